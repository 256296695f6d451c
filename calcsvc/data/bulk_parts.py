"""Parts read in bulk for many saved designs at once: named revisions in one query, and each part's latest
approved revision (what a design would use today) in another."""

from __future__ import annotations

from collections.abc import Collection

from sqlalchemy import func, select, tuple_
from sqlalchemy.orm import Session

from calcsvc.data.models import Part, PartRevision
from calcsvc.data.store import PartView, revision_view


def revisions_of(session: Session, keys: Collection[tuple[str, int]]) -> dict[tuple[str, int], PartView]:
    """The named (part_id, revision)s that exist, each seen as a part (its status as ``revision_view`` gives)."""
    if not keys:
        return {}
    part_ids = {part_id for part_id, _ in keys}
    current = {row.part_id: row for row in session.scalars(select(Part).where(Part.part_id.in_(part_ids)))}
    rows = session.scalars(
        select(PartRevision).where(tuple_(PartRevision.part_id, PartRevision.revision).in_(list(keys)))
    )
    return {(row.part_id, row.revision): revision_view(row, current[row.part_id]) for row in rows}


def latest_approved(session: Session, part_ids: Collection[str]) -> dict[str, tuple[int | None, str]]:
    """Per existing part: its latest approved revision (None if none was ever approved) and its current status."""
    if not part_ids:
        return {}
    approved = dict(
        session.execute(
            select(PartRevision.part_id, func.max(PartRevision.revision))
            .where(PartRevision.part_id.in_(list(part_ids)), PartRevision.approved_by.is_not(None))
            .group_by(PartRevision.part_id)
        ).all()
    )
    statuses = session.execute(select(Part.part_id, Part.status).where(Part.part_id.in_(list(part_ids)))).all()
    return {part_id: (approved.get(part_id), status) for part_id, status in statuses}
