"""The parts a request references, read in one query, with each revision's content cached per process.

A revision's kind and parameters never change once written (an edit adds a revision), so a worker keeps them
after the first read. What does change is read fresh on every request, in one query for all referenced
parts: each part's current revision and status, and the referenced revision's approval and creation time.
Invalidation is therefore correct across workers and processes without any message between them:

- an edit, a restore or a retirement elsewhere changes the current revision or status, which the query sees;
- a pinned revision's status comes from the same query (current: the part's status; older: approved or draft);
- content is cached under the revision's creation time, so a part renamed away and a new part created under the
  old id (its revision 1 written at another moment) never meet the old part's cached content;
- a schema migration may rewrite stored parameters (adding a declared default): the schema version read in the
  same query is part of the key, so a migrated database is read afresh.
"""

from __future__ import annotations

import threading
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlalchemy import Connection, and_, bindparam, column, func, or_, select, table, tuple_
from sqlalchemy.orm import Session

from calcsvc.data.models import Part, PartRevision

MAX_CACHED_REVISIONS = 4096  # a few hundred bytes each; far more than the parts a deployment references
_SCHEMA_VERSION = select(func.max(column("version_num"))).select_from(table("alembic_version")).scalar_subquery()
_REVISION = tuple_(PartRevision.part_id, PartRevision.revision)
# Built once, so SQLAlchemy compiles them once: the lists are bound per request ("expanding" parameters).
_REFERENCED = (
    select(
        Part.part_id,
        Part.revision,
        Part.status,
        PartRevision.revision,
        PartRevision.created_at,
        PartRevision.approved_by,
        _SCHEMA_VERSION,
    )
    .join(PartRevision, PartRevision.part_id == Part.part_id)
    .where(
        or_(
            and_(Part.part_id.in_(bindparam("current", expanding=True)), PartRevision.revision == Part.revision),
            _REVISION.in_(bindparam("pinned", expanding=True)),
        )
    )
)
_CONTENT = select(PartRevision.part_id, PartRevision.revision, PartRevision.kind, PartRevision.parameters).where(
    _REVISION.in_(bindparam("revisions", expanding=True))
)


@dataclass(frozen=True)
class Referenced:
    """A referenced revision of a part as a calculation uses it. ``parameters`` is shared: read, never change."""

    part_id: str
    kind: str
    parameters: Mapping[str, Any]
    status: str
    revision: int


Key = tuple[str, str | None, str, int, datetime]  # database, schema version, part_id, revision, created


class RevisionCache:
    """Kind and parameters by revision, for one process; emptied whole when full (a rare, cheap refill)."""

    def __init__(self, size: int = MAX_CACHED_REVISIONS) -> None:
        self.size = size
        self._entries: dict[Key, tuple[str, dict[str, Any]]] = {}
        self._lock = threading.Lock()

    def get(self, key: Key) -> tuple[str, dict[str, Any]] | None:
        return self._entries.get(key)

    def put(self, key: Key, content: tuple[str, dict[str, Any]]) -> None:
        with self._lock:
            if len(self._entries) >= self.size:
                self._entries.clear()
            self._entries[key] = content

    def __len__(self) -> int:
        return len(self._entries)


REVISIONS = RevisionCache()


def look_up(
    reader: Session | Connection, references: Iterable[tuple[str, int | None]], cache: RevisionCache = REVISIONS
) -> dict[tuple[str, int | None], Referenced]:
    """The referenced revisions (``None``: the current one) that exist; a missing part or revision is left out,
    for the caller to refuse as it would without the cache. One query, and one more only for content not cached.
    ``reader``: a session's transaction, or a Core connection (no ORM session to set up: a request that only
    reads parts saves more than its query's time)."""
    wanted = set(references)
    if not wanted:
        return {}
    connection = reader.connection() if isinstance(reader, Session) else reader
    current = [part_id for part_id, revision in wanted if revision is None]
    pinned = [(part_id, revision) for part_id, revision in wanted if revision is not None]
    rows = connection.execute(_REFERENCED, {"current": current, "pinned": pinned}).all()
    database = str(connection.engine.url)
    found: dict[tuple[str, int | None], tuple[Key, str]] = {}
    for part_id, current_revision, current_status, revision, created, approved_by, schema in rows:
        key: Key = (database, schema, part_id, revision, created)
        # As the store reads them: the current revision has the part's status, an older one what review gave it.
        status = current_status if revision == current_revision else "approved" if approved_by else "draft"
        if (part_id, revision) in wanted:
            found[(part_id, revision)] = (key, status)
        if revision == current_revision and (part_id, None) in wanted:
            found[(part_id, None)] = (key, status)
    _fill(connection, cache, [key for key, _status in found.values() if cache.get(key) is None])
    answer = {}
    for reference, (key, status) in found.items():
        content = cache.get(key)
        if content is None:  # emptied meanwhile by another thread's fill: read the store without the cache
            return {}
        answer[reference] = Referenced(key[2], content[0], content[1], status, key[3])
    return answer


def _fill(connection: Connection, cache: RevisionCache, keys: list[Key]) -> None:
    if not keys:
        return
    by_revision = {(key[2], key[3]): key for key in keys}
    rows = connection.execute(_CONTENT, {"revisions": list(by_revision)}).all()
    for part_id, revision, kind, parameters in rows:
        cache.put(by_revision[(part_id, revision)], (kind, dict(parameters)))
