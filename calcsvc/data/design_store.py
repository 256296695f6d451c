"""The saved designs: every save adds a revision (the request as given, its inputs in SI, the part revisions
they resolved to and the review at them), retiring hides a design from the watch list and nothing is deleted.
The parts the current revision uses are indexed, so the designs an edited part touches are one query.

Writers are serialised as in the parts store: a conditional UPDATE on the revision the writer read."""

from __future__ import annotations

from collections.abc import Collection
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

from sqlalchemy import delete, func, select, update
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from calcsvc.data.models import Design, DesignPart, DesignRevision
from calcsvc.data.part_ids import is_part_id
from calcsvc.data.store_errors import DesignExists, DesignNotFound, DesignRetired, InvalidPartId, StaleRevision

DESIGN_STATUSES = ("active", "retired")
ID_RULE = "a design_id is 1 to 64 lowercase ASCII letters, digits and hyphens, starting with a letter or digit"


@dataclass(frozen=True)
class DesignContent:
    """What one save writes: the calculation ("channel" for the whole-channel review), the body as given, the
    inputs as read (SI, part references by role), the parts used ({role, part_id, revision, status}) and the
    review's answer at those revisions."""

    calculation: str
    owner: str
    description: str
    body: dict[str, Any]
    inputs: dict[str, Any]
    parts: list[dict[str, Any]]
    review: dict[str, Any]


@dataclass(frozen=True)
class DesignView:
    """One revision of a design as it is read, with the design's current status."""

    design_id: str
    revision: int
    status: str
    content: DesignContent
    author: str
    created_at: datetime

    @property
    def etag(self) -> str:
        return f'"{self.design_id}-r{self.revision}"'


def _now() -> datetime:
    return datetime.now(UTC)


def _view(row: DesignRevision, status: str) -> DesignView:
    content = DesignContent(
        row.calculation, row.owner, row.description, dict(row.body), dict(row.inputs), list(row.parts), dict(row.review)
    )
    return DesignView(row.design_id, row.revision, status, content, row.author, row.created_at)


_LIGHT = ("design_id", "revision", "calculation", "owner", "description", "inputs", "parts", "author", "created_at")


def _light_view(row: Any) -> DesignView:
    """A revision read without the request as given and the saved review (both left empty)."""
    content = DesignContent(row.calculation, row.owner, row.description, {}, dict(row.inputs), list(row.parts), {})
    return DesignView(row.design_id, row.revision, row.status, content, row.author, row.created_at)


class DesignStore:
    def __init__(self, session: Session) -> None:
        self.session = session

    def _row(self, design_id: str) -> Design:
        design = self.session.get(Design, design_id)
        if design is None:
            raise DesignNotFound(f"no design '{design_id}'", "design_id")
        return design

    def get(self, design_id: str) -> DesignView:
        return self.get_revision(design_id, self._row(design_id).revision)

    def get_revision(self, design_id: str, revision: int) -> DesignView:
        current = self._row(design_id)
        row = self.session.get(DesignRevision, (design_id, revision))
        if row is None:
            raise DesignNotFound(f"design '{design_id}' has no revision {revision}", "revision")
        return _view(row, current.status)

    def revisions(self, design_id: str) -> list[DesignView]:
        current = self._row(design_id)
        rows = self.session.scalars(
            select(DesignRevision).where(DesignRevision.design_id == design_id).order_by(DesignRevision.revision)
        )
        return [_view(row, current.status) for row in rows]

    def list(
        self,
        status: str | None = None,
        design_ids: Collection[str] | None = None,
        offset: int = 0,
        limit: int | None = 50,
        as_saved: bool = True,
    ) -> tuple[list[DesignView], int]:
        """Current revisions by design_id, optionally of one status and among ``design_ids``; no limit: all.
        ``as_saved=False`` reads what re-reviewing needs (inputs and parts), leaving the request as given and
        the saved review empty: thousands of designs are read in a fraction of the time."""
        joined = (Design.design_id == DesignRevision.design_id) & (Design.revision == DesignRevision.revision)
        columns = [DesignRevision] if as_saved else [getattr(DesignRevision, name) for name in _LIGHT]
        query = select(*columns, Design.status).join(Design, joined)
        if status:
            query = query.where(Design.status == status)
        if design_ids is not None:
            query = query.where(Design.design_id.in_(list(design_ids)))
        total = self.session.scalar(select(func.count()).select_from(query.subquery())) or 0
        query = query.order_by(Design.design_id).offset(offset)
        if limit is not None:
            query = query.limit(limit)
        if as_saved:
            return [_view(row, status) for row, status in self.session.execute(query)], total
        return [_light_view(row) for row in self.session.execute(query)], total

    def using_part(self, part_id: str) -> list[str]:
        """The active designs whose current revision uses ``part_id`` in some role, by design_id."""
        query = (
            select(DesignPart.design_id)
            .join(Design, Design.design_id == DesignPart.design_id)
            .where(DesignPart.part_id == part_id, Design.status == "active")
            .distinct()
            .order_by(DesignPart.design_id)
        )
        return list(self.session.scalars(query))

    def _write_revision(self, design_id: str, revision: int, content: DesignContent, author: str, at: datetime) -> None:
        self.session.add(
            DesignRevision(
                design_id=design_id,
                revision=revision,
                calculation=content.calculation,
                owner=content.owner,
                description=content.description,
                body=content.body,
                inputs=content.inputs,
                parts=content.parts,
                review=content.review,
                author=author,
                created_at=at,
            )
        )
        self.session.execute(
            delete(DesignPart).where(DesignPart.design_id == design_id).execution_options(synchronize_session=False)
        )
        for used in content.parts:
            self.session.add(
                DesignPart(design_id=design_id, role=used["role"], part_id=used["part_id"], revision=used["revision"])
            )
        self.session.flush()

    def create(self, design_id: str, content: DesignContent, author: str) -> DesignView:
        """Save a new design as revision 1."""
        if not is_part_id(design_id):
            raise InvalidPartId(f"{design_id[:80]!r} is not a valid design_id: {ID_RULE}", "design_id")
        if self.session.get(Design, design_id) is not None:
            raise DesignExists(f"a design '{design_id}' already exists", "design_id")
        now = _now()
        self.session.add(
            Design(
                design_id=design_id,
                calculation=content.calculation,
                owner=content.owner,
                description=content.description,
                status="active",
                revision=1,
                updated_at=now,
                updated_by=author,
            )
        )
        try:
            self.session.flush()
        except IntegrityError as exc:  # saved by someone else in the meantime
            raise DesignExists(f"a design '{design_id}' already exists", "design_id") from exc
        self._write_revision(design_id, 1, content, author, now)
        return self.get(design_id)

    def update(self, design_id: str, expected_revision: int, content: DesignContent, author: str) -> DesignView:
        """Store a new revision if the design is still at ``expected_revision`` (a retired one is refused)."""
        current = self._row(design_id)
        if current.status == "retired":
            raise DesignRetired(f"design '{design_id}' is retired", "design_id")
        now = _now()
        result = self.session.execute(
            update(Design)
            .where(Design.design_id == design_id, Design.revision == expected_revision, Design.status == "active")
            .values(
                calculation=content.calculation,
                owner=content.owner,
                description=content.description,
                revision=expected_revision + 1,
                updated_at=now,
                updated_by=author,
            )
            .execution_options(synchronize_session=False)
        )
        if result.rowcount != 1:
            raise StaleRevision(f"design '{design_id}' is no longer at revision {expected_revision}", "If-Match")
        self._write_revision(design_id, expected_revision + 1, content, author, now)
        self.session.expire_all()
        return self.get(design_id)

    def retire(self, design_id: str, expected_revision: int, actor: str) -> DesignView:
        """Take a design off the watch list if it is still at ``expected_revision``; its revisions stay readable.
        Retiring a retired design changes nothing."""
        current = self._row(design_id)
        result = self.session.execute(
            update(Design)
            .where(Design.design_id == design_id, Design.revision == expected_revision, Design.status == "active")
            .values(status="retired", updated_at=_now(), updated_by=actor)
            .execution_options(synchronize_session=False)
        )
        if result.rowcount != 1:
            self.session.refresh(current)
            if current.revision != expected_revision:
                raise StaleRevision(f"design '{design_id}' is no longer at revision {expected_revision}", "If-Match")
        self.session.expire_all()
        return self.get(design_id)
