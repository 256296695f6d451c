"""What reviewers and editors say about a revision: a draft sent back to its author with the reason, and comments
on any revision. Each is an event on the revision it concerns (``returned``, ``commented``), kept with its history
like every other action; sending back leaves the revision a draft, which its author answers with an edit."""

from __future__ import annotations

from datetime import UTC, datetime

from sqlalchemy import select
from sqlalchemy.orm import Session

from calcsvc.data.models import Part, PartEvent, PartRevision
from calcsvc.data.store_errors import NotADraft, PartNotFound, PartRetired, StaleRevision

MAX_NOTE_LENGTH = 2000


def _current(session: Session, part_id: str) -> Part:
    part = session.get(Part, part_id)
    if part is None:
        raise PartNotFound(f"no part '{part_id}'", "part_id")
    return part


def send_back(session: Session, part_id: str, revision: int, reviewer: str, reason: str) -> None:
    """Return the current draft ``revision`` to its author with ``reason``; refused when it is no longer the
    current revision, approved already, or the part is retired."""
    part = _current(session, part_id)
    if part.revision != revision:
        raise StaleRevision(f"revision {revision} of '{part_id}' is not the current revision", "If-Match")
    if part.status == "retired":
        raise PartRetired(f"part '{part_id}' is retired", "part_id")
    if part.status != "draft":
        raise NotADraft(
            f"revision {revision} of '{part_id}' is {part.status}: only a draft can be sent back", "If-Match"
        )
    session.add(
        PartEvent(part_id=part_id, revision=revision, action="returned", actor=reviewer, at=_now(), reason=reason)
    )
    session.flush()


def comment(session: Session, part_id: str, revision: int, actor: str, text: str) -> None:
    """Add a comment to any stored revision of the part."""
    _current(session, part_id)
    if session.get(PartRevision, (part_id, revision)) is None:
        raise PartNotFound(f"part '{part_id}' has no revision {revision}", "revision")
    event = PartEvent(part_id=part_id, revision=revision, action="commented", actor=actor, at=_now(), reason=text)
    session.add(event)
    session.flush()


def returns(session: Session, revisions: list[tuple[str, int]]) -> dict[tuple[str, int], tuple[str, str]]:
    """The last send-back (reviewer, reason) of each of these (part_id, revision) that was sent back."""
    wanted = set(revisions)
    if not wanted:
        return {}
    found: dict[tuple[str, int], tuple[str, str]] = {}
    query = (
        select(PartEvent)
        .where(PartEvent.action == "returned", PartEvent.part_id.in_({part_id for part_id, _ in wanted}))
        .order_by(PartEvent.id)
    )
    for event in session.scalars(query):
        if (event.part_id, event.revision) in wanted:
            found[(event.part_id, event.revision)] = (event.actor, event.reason or "")
    return found


def _now() -> datetime:
    return datetime.now(UTC)
