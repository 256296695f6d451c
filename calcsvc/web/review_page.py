"""``/review/``: server-rendered pages for reviewing the parts table, approving revisions (with their impact on
the saved designs) and reviewing a channel (calcsvc.web.pages); importing this module registers every page on
``bp``."""

from __future__ import annotations

from calcsvc.web.pages import channel, design_impact, parts
from calcsvc.web.pages.common import bp

__all__ = ["bp", "channel", "design_impact", "parts"]
