"""The revisioned parts table: every edit adds a revision, approval stamps the revision it names,
retiring hides a part from new designs and restoring brings it back as a new draft revision. Every action is
recorded as an event on the revision it concerns (who, when, why). Nothing is ever deleted.

Concurrent writers are serialised by conditional UPDATEs (``WHERE revision = expected``), which both
SQLite and PostgreSQL evaluate atomically, so of several editors holding the same ETag exactly one wins.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

from sqlalchemy import delete, func, select, update
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from calcsvc.data.kinds import validate_part
from calcsvc.data.models import Part, PartEvent, PartRevision
from calcsvc.data.part_history import EventView, RevisionView
from calcsvc.data.part_ids import RULE, is_part_id
from calcsvc.data.store_errors import (
    InvalidPart,
    InvalidPartId,
    PartExists,
    PartNotFound,
    PartNotRetired,
    PartRetired,
    SelfApproval,
    StaleRevision,
)

STATUSES = ("draft", "approved", "retired")


@dataclass(frozen=True)
class PartView:
    """A part as it is read: the current row, or one revision of it."""

    part_id: str
    kind: str
    description: str
    parameters: dict[str, Any]
    status: str
    revision: int
    updated_at: datetime
    updated_by: str
    approved_by: str | None

    @property
    def etag(self) -> str:
        return f'"{self.part_id}-r{self.revision}"'


def _now() -> datetime:
    return datetime.now(UTC)


def _view(part: Part) -> PartView:
    return PartView(
        part.part_id,
        part.kind,
        part.description,
        dict(part.parameters),
        part.status,
        part.revision,
        part.updated_at,
        part.updated_by,
        part.approved_by,
    )


def revision_view(row: PartRevision, current: Part) -> PartView:
    """A past revision seen as a part; its status is what it was given when approved, else draft."""
    if row.revision == current.revision:
        status = current.status
    else:
        status = "approved" if row.approved_by else "draft"
    return PartView(
        row.part_id,
        row.kind,
        row.description,
        dict(row.parameters),
        status,
        row.revision,
        row.created_at,
        row.author,
        row.approved_by,
    )


class PartStore:
    def __init__(self, session: Session) -> None:
        self.session = session

    def _row(self, part_id: str) -> Part:
        part = self.session.get(Part, part_id)
        if part is None:
            raise PartNotFound(f"no part '{part_id}'", "part_id")
        return part

    def get(self, part_id: str) -> PartView:
        return _view(self._row(part_id))

    def get_revision(self, part_id: str, revision: int) -> PartView:
        current = self._row(part_id)
        row = self.session.get(PartRevision, (part_id, revision))
        if row is None:
            raise PartNotFound(f"part '{part_id}' has no revision {revision}", "revision")
        return revision_view(row, current)

    def get_many(self, part_ids: list[str]) -> dict[str, PartView]:
        rows = self.session.scalars(select(Part).where(Part.part_id.in_(part_ids)))
        return {row.part_id: _view(row) for row in rows}

    def list(
        self, kind: str | None = None, status: str | None = None, offset: int = 0, limit: int = 50
    ) -> tuple[list[PartView], int]:
        query = select(Part)
        if kind:
            query = query.where(Part.kind == kind)
        if status:
            query = query.where(Part.status == status)
        total = self.session.scalar(select(func.count()).select_from(query.subquery())) or 0
        rows = self.session.scalars(query.order_by(Part.part_id).offset(offset).limit(limit))
        return [_view(row) for row in rows], total

    def all_of_kind(self, kind: str, statuses: Sequence[str]) -> list[PartView]:
        """Every current part of ``kind`` whose status is one of ``statuses``, by part_id; no pagination
        (candidate search evaluates them all at once)."""
        query = select(Part).where(Part.kind == kind, Part.status.in_(statuses)).order_by(Part.part_id)
        return [_view(row) for row in self.session.scalars(query)]

    def revisions(self, part_id: str) -> list[RevisionView]:
        self._row(part_id)
        rows = self.session.scalars(
            select(PartRevision).where(PartRevision.part_id == part_id).order_by(PartRevision.revision)
        )
        events: dict[int, list[EventView]] = {}
        for event in self.session.scalars(
            select(PartEvent).where(PartEvent.part_id == part_id).order_by(PartEvent.revision, PartEvent.id)
        ):
            events.setdefault(event.revision, []).append(EventView(event.action, event.actor, event.at, event.reason))
        return [
            RevisionView(
                row.part_id,
                row.revision,
                row.kind,
                row.description,
                dict(row.parameters),
                row.author,
                row.created_at,
                row.approved_by,
                row.approved_at,
                tuple(events.get(row.revision, ())),
            )
            for row in rows
        ]

    def _event(
        self, part_id: str, revision: int, action: str, actor: str, at: datetime, reason: str | None = None
    ) -> None:
        self.session.add(
            PartEvent(part_id=part_id, revision=revision, action=action, actor=actor, at=at, reason=reason)
        )

    def _add_revision(
        self,
        current: tuple[str, int, str],
        content: tuple[str, dict[str, Any]],
        author: str,
        at: datetime,
        action: str,
        reason: str | None = None,
        approved: bool = False,
    ) -> None:
        """Store revision ``current`` = (part_id, revision, kind) with ``content`` = (description, parameters),
        and the event that wrote it (then its approval, when the author approves it as it is written)."""
        part_id, revision, kind = current
        description, parameters = content
        self.session.add(
            PartRevision(
                part_id=part_id,
                revision=revision,
                kind=kind,
                description=description,
                parameters=parameters,
                author=author,
                created_at=at,
                approved_by=author if approved else None,
                approved_at=at if approved else None,
            )
        )
        self.session.flush()
        self._event(part_id, revision, action, author, at, reason)
        if approved:
            self._event(part_id, revision, "approved", author, at)
        self.session.flush()

    def create(
        self,
        part_id: str,
        kind: str,
        description: str,
        parameters: dict[str, Any],
        author: str,
        approve: bool = False,
    ) -> PartView:
        """Add a part as revision 1 (draft, or approved by its author when seeding)."""
        if not is_part_id(part_id):
            raise InvalidPartId(f"{part_id[:80]!r} is not a valid part_id: {RULE}", "part_id")
        errors = validate_part(kind, description, parameters)
        if errors:
            raise InvalidPart(errors)
        now = _now()
        self.session.add(
            Part(
                part_id=part_id,
                kind=kind,
                description=description,
                parameters=parameters,
                status="approved" if approve else "draft",
                revision=1,
                updated_at=now,
                updated_by=author,
                approved_by=author if approve else None,
            )
        )
        try:
            self.session.flush()
        except IntegrityError as exc:
            raise PartExists(f"a part '{part_id}' already exists", "part_id") from exc
        self._add_revision((part_id, 1, kind), (description, parameters), author, now, "created", approved=approve)
        return self.get(part_id)

    def update(
        self, part_id: str, expected_revision: int, description: str, parameters: dict[str, Any], author: str
    ) -> PartView:
        """Store a new revision if the part is still at ``expected_revision``; it returns to draft."""
        current = self._row(part_id)
        if current.status == "retired":
            raise PartRetired(f"part '{part_id}' is retired; restore it before revising it", "part_id")
        errors = validate_part(current.kind, description, parameters)
        if errors:
            raise InvalidPart(errors)
        new_revision = expected_revision + 1
        now = _now()
        result = self.session.execute(
            update(Part)
            .where(Part.part_id == part_id, Part.revision == expected_revision, Part.status != "retired")
            .values(
                description=description,
                parameters=parameters,
                status="draft",
                revision=new_revision,
                updated_at=now,
                updated_by=author,
                approved_by=None,
            )
            .execution_options(synchronize_session=False)
        )
        if result.rowcount != 1:
            self.session.refresh(current)
            if current.status == "retired":  # retired meanwhile, at the same revision
                raise PartRetired(f"part '{part_id}' is retired; restore it before revising it", "part_id")
            raise StaleRevision(f"part '{part_id}' is no longer at revision {expected_revision}", "If-Match")
        self._add_revision((part_id, new_revision, current.kind), (description, parameters), author, now, "edited")
        self.session.expire_all()
        return self.get(part_id)

    def approve(self, part_id: str, revision: int, reviewer: str) -> PartView:
        """Approve ``revision`` if it is still the current one and was written by someone else."""
        current = self._row(part_id)
        row = self.session.get(PartRevision, (part_id, revision))
        if row is None or current.revision != revision:
            raise StaleRevision(f"revision {revision} of '{part_id}' is not the current revision", "If-Match")
        if current.status == "retired":
            raise PartRetired(f"part '{part_id}' is retired", "part_id")
        if row.author == reviewer:
            raise SelfApproval("a revision cannot be approved by its own author", "revision")
        if current.status == "approved":
            return _view(current)  # already approved: the first approval stands, never overwritten
        now = _now()
        result = self.session.execute(
            update(Part)
            .where(Part.part_id == part_id, Part.revision == revision, Part.status != "retired")
            .values(status="approved", approved_by=reviewer)
            .execution_options(synchronize_session=False)
        )
        if result.rowcount != 1:
            raise StaleRevision(f"revision {revision} of '{part_id}' is not the current revision", "If-Match")
        row.approved_by = reviewer
        row.approved_at = now
        self._event(part_id, revision, "approved", reviewer, now)
        self.session.flush()
        self.session.expire_all()
        return self.get(part_id)

    def retire(self, part_id: str, expected_revision: int, actor: str, reason: str | None = None) -> PartView:
        """Withdraw a part from new designs if it is still at ``expected_revision``; its revisions stay readable
        and pinnable, and the retirement is an event on that revision. Retiring a retired part changes nothing."""
        current = self._row(part_id)
        now = _now()
        result = self.session.execute(
            update(Part)
            .where(Part.part_id == part_id, Part.revision == expected_revision, Part.status != "retired")
            .values(status="retired", updated_at=now, updated_by=actor)
            .execution_options(synchronize_session=False)
        )
        if result.rowcount != 1:
            self.session.refresh(current)
            if current.revision != expected_revision:
                raise StaleRevision(f"part '{part_id}' is no longer at revision {expected_revision}", "If-Match")
            return _view(current)  # already retired at this revision (a repeated request)
        self._event(part_id, expected_revision, "retired", actor, now, reason)
        self.session.flush()
        self.session.expire_all()
        return self.get(part_id)

    def restore(self, part_id: str, expected_revision: int, author: str, reason: str | None = None) -> PartView:
        """Bring a retired part back as a new draft revision (a copy of the retired one) for a reviewer to
        approve, if it is still at ``expected_revision``."""
        current = self._row(part_id)
        if current.revision != expected_revision:
            raise StaleRevision(f"part '{part_id}' is no longer at revision {expected_revision}", "If-Match")
        if current.status != "retired":
            raise PartNotRetired(f"part '{part_id}' is not retired; there is nothing to restore", "part_id")
        new_revision = expected_revision + 1
        now = _now()
        result = self.session.execute(
            update(Part)
            .where(Part.part_id == part_id, Part.revision == expected_revision, Part.status == "retired")
            .values(status="draft", revision=new_revision, updated_at=now, updated_by=author, approved_by=None)
            .execution_options(synchronize_session=False)
        )
        if result.rowcount != 1:
            raise StaleRevision(f"part '{part_id}' is no longer at revision {expected_revision}", "If-Match")
        self._add_revision(
            (part_id, new_revision, current.kind),
            (current.description, current.parameters),
            author,
            now,
            "restored",
            reason,
        )
        self.session.expire_all()
        return self.get(part_id)

    def malformed_ids(self) -> list[str]:
        """Stored part_ids that break the id rule (written before it was enforced everywhere)."""
        return [part_id for part_id in self.session.scalars(select(Part.part_id)) if not is_part_id(part_id)]

    def rename(self, old: str, new: str, actor: str) -> PartView:
        """Move a part, its revisions and its events to a new id; the move is an event on the current revision."""
        current = self._row(old)
        if not is_part_id(new):
            raise InvalidPartId(f"{new[:80]!r} is not a valid part_id: {RULE}", "part_id")
        if self.session.get(Part, new) is not None:
            raise PartExists(f"a part '{new}' already exists", "part_id")
        fields = {column.key: getattr(current, column.key) for column in Part.__table__.columns}
        self.session.add(Part(**{**fields, "part_id": new}))
        self.session.flush()
        for table in (PartRevision, PartEvent):
            self.session.execute(
                update(table)
                .where(table.part_id == old)
                .values(part_id=new)
                .execution_options(synchronize_session=False)
            )
        self.session.execute(delete(Part).where(Part.part_id == old).execution_options(synchronize_session=False))
        self.session.expire_all()
        self._event(new, fields["revision"], "renamed", actor, _now(), f"renamed from {old!r}")
        self.session.flush()
        return self.get(new)
