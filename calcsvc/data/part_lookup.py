"""The parts a request references: read in one query, and kept per process under the parts generation.

Every write to the parts tables, through any connection, worker or process, gives the database's parts
generation a new random value (triggers, migration 0007). A worker keeps the references it resolved under the
generation they were read at, and each request reads the generation alone, one cheap statement with no
parameters: while it is unchanged, the references read before are answered from memory. When it changed, or a
reference was not read before, the references are read in one query that returns the generation with them, from
the same snapshot, so what is kept is never older than the generation it is kept under. An edit, approval,
retirement, restore or rename elsewhere is therefore seen by the next request, without any message between
workers.
"""

from __future__ import annotations

import threading
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

from sqlalchemy import Connection, and_, bindparam, column, or_, select, table, tuple_
from sqlalchemy.orm import Session

from calcsvc.data.database import Database
from calcsvc.data.models import Part, PartRevision

MAX_CACHED_REFERENCES = 4096  # per database; a few hundred bytes each, far more than a deployment references
GENERATION = "SELECT generation FROM parts_generation"
_GENERATION = select(column("generation")).select_from(table("parts_generation")).scalar_subquery()
_REVISION = tuple_(PartRevision.part_id, PartRevision.revision)
# Built once, so SQLAlchemy compiles it once: the lists are bound per query ("expanding" parameters).
_REFERENCED = (
    select(
        Part.part_id,
        Part.revision,
        Part.status,
        PartRevision.revision,
        PartRevision.approved_by,
        PartRevision.kind,
        PartRevision.parameters,
        _GENERATION,
    )
    .join(PartRevision, PartRevision.part_id == Part.part_id)
    .where(
        or_(
            and_(Part.part_id.in_(bindparam("current", expanding=True)), PartRevision.revision == Part.revision),
            _REVISION.in_(bindparam("pinned", expanding=True)),
        )
    )
)

Reference = tuple[str, int | None]  # part_id, revision (None: the current one)


@dataclass(frozen=True)
class Referenced:
    """A referenced revision of a part as a calculation uses it. ``parameters`` is shared: read, never change."""

    part_id: str
    kind: str
    parameters: Mapping[str, Any]
    status: str
    revision: int


def read(connection: Connection, references: Iterable[Reference]) -> tuple[int | None, dict[Reference, Referenced]]:
    """The parts generation and the referenced revisions that exist, in one query; a missing part or revision is
    left out, for the caller to refuse. The generation is None when none exists (nothing to keep)."""
    wanted = set(references)
    current = [part_id for part_id, revision in wanted if revision is None]
    pinned = [(part_id, revision) for part_id, revision in wanted if revision is not None]
    rows = connection.execute(_REFERENCED, {"current": current, "pinned": pinned}).all()
    found: dict[Reference, Referenced] = {}
    for part_id, current_revision, current_status, revision, approved_by, kind, parameters, _generation in rows:
        # As the store reads them: the current revision has the part's status, an older one what review gave it.
        status = current_status if revision == current_revision else "approved" if approved_by else "draft"
        referenced = Referenced(part_id, kind, dict(parameters), status, revision)
        if (part_id, revision) in wanted:
            found[(part_id, revision)] = referenced
        if revision == current_revision and (part_id, None) in wanted:
            found[(part_id, None)] = referenced
    return (rows[0][-1] if rows else None), found


def look_up(session: Session, references: Iterable[Reference]) -> dict[Reference, Referenced]:
    """:func:`read` in the session's transaction, without the cache."""
    return read(session.connection(), references)[1]


class ReferenceCache:
    """Resolved references by database, for one process, valid while its parts generation stays the same."""

    def __init__(self, size: int = MAX_CACHED_REFERENCES) -> None:
        self.size = size
        # Each database's entry is replaced whole, never changed in place, so a thread reading one needs no lock.
        self._kept: dict[str, tuple[int, dict[Reference, Referenced]]] = {}
        self._lock = threading.Lock()

    def look_up(self, database: Database, references: Iterable[Reference]) -> dict[Reference, Referenced]:
        """The references that exist: one statement reading the generation, and one query more only when one of
        them was not read at that generation."""
        wanted = set(references)
        generation = database.read_value(GENERATION)
        kept_generation, kept = self._kept.get(database.url, (None, {}))
        if generation is None or generation != kept_generation:
            kept = {}
        if not wanted.issubset(kept):
            with database.reading() as connection:  # all of them: the generation may have changed meanwhile
                generation, found = read(connection, wanted)
            if generation is None:  # none of them exists: nothing to keep, and what is kept stays
                return {}
            if generation == kept_generation:
                found = {**kept, **found}
            with self._lock:
                self._kept[database.url] = (generation, found if len(found) <= self.size else {})
            kept = found
        return {reference: kept[reference] for reference in wanted if reference in kept}

    def count(self, database: Database) -> int:
        """How many references of ``database`` are kept (at most ``size``)."""
        return len(self._kept.get(database.url, (None, {}))[1])


REFERENCES = ReferenceCache()
