"""``/review/``: server-rendered pages for reviewing the parts table, approving revisions and reviewing a channel
(calcsvc.web.pages); importing this module registers every page on ``bp``."""

from __future__ import annotations

from calcsvc.web.pages import channel, parts
from calcsvc.web.pages.common import bp

__all__ = ["bp", "channel", "parts"]
