"""A part's history as it is read: its revisions in order, each with the actions done to it (who, when, why)."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from typing import Any

# What an event records; "returned": a draft sent back to its author with the reason, "commented": a remark.
ACTIONS = ("created", "edited", "approved", "retired", "restored", "renamed", "returned", "commented")


@dataclass(frozen=True)
class EventView:
    """One action on a revision (one of ACTIONS); ``reason`` holds why, or the comment's text."""

    action: str
    actor: str
    at: datetime
    reason: str | None


@dataclass(frozen=True)
class RevisionView:
    """One stored revision, as the history lists it, with what was done to it in order."""

    part_id: str
    revision: int
    kind: str
    description: str
    parameters: dict[str, Any]
    author: str
    created_at: datetime
    approved_by: str | None
    approved_at: datetime | None
    events: tuple[EventView, ...]
