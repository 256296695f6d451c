"""Referenced parts are read in one query and their revisions' content cached per process, and every change to
the parts table, made through any connection, is seen by the next request that does not pin a revision."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import pytest
from sqlalchemy import event

from calcsvc.core import led_string
from calcsvc.data.database import Database
from calcsvc.data.part_lookup import REVISIONS
from calcsvc.data.store import PartStore
from calcsvc.service.errors import RetiredPartReference, UnknownPart
from calcsvc.service.resolve import resolve_parts

ROLES = led_string.SPEC.roles
LED = "led-red-5mm"
THREE = {"supply": "supply-adapter-12v-2a", "led": LED, "transistor": "npn-small-signal"}


@contextmanager
def counted_selects(database: Database) -> Iterator[list[str]]:
    statements: list[str] = []

    def count(_conn: Any, _cursor: Any, statement: str, *_args: Any) -> None:
        if statement.lstrip().upper().startswith("SELECT"):
            statements.append(statement)

    event.listen(database.engine, "before_cursor_execute", count)
    try:
        yield statements
    finally:
        event.remove(database.engine, "before_cursor_execute", count)


def other_worker(database: Database) -> Database:
    """Another connection pool to the same database, as another worker process has."""
    return Database(database.url)


def edit(database: Database, part_id: str, **changes: float) -> int:
    with database.transaction() as session:
        store = PartStore(session)
        part = store.get(part_id)
        return store.update(part_id, part.revision, part.description, {**part.parameters, **changes}, "edna").revision


def test_three_references_take_one_query_once_their_revisions_are_cached(database: Database) -> None:
    resolve_parts(database, ROLES, THREE)  # warms the cache
    with counted_selects(database) as selects:
        resolved = resolve_parts(database, ROLES, THREE)
    assert len(selects) == 1
    assert [p["part_id"] for p in resolved.parts] == list(THREE.values())
    assert resolved.values["supply_v"] == 12.0 and resolved.values["vf_typ_v"] == 2.1


def test_an_edit_through_another_worker_is_seen_by_the_next_unpinned_request(database: Database) -> None:
    assert resolve_parts(database, ROLES, {"led": LED}).values["vf_typ_v"] == 2.1
    writer = other_worker(database)
    try:
        revision = edit(writer, LED, vf_typ_v=2.2)
    finally:
        writer.dispose()
    seen = resolve_parts(database, ROLES, {"led": LED})
    assert seen.values["vf_typ_v"] == 2.2
    assert seen.parts[0]["revision"] == revision and seen.parts[0]["status"] == "draft"
    assert seen.warnings == [f"led '{LED}' revision {revision} is draft, not approved"]
    pinned = resolve_parts(database, ROLES, {"led": LED, "led_revision": 1})
    assert pinned.values["vf_typ_v"] == 2.1 and pinned.parts[0]["status"] == "approved"


def test_approval_and_retirement_are_seen_though_the_revision_stays(database: Database) -> None:
    revision = edit(database, LED, vf_typ_v=2.2)
    assert resolve_parts(database, ROLES, {"led": LED}).parts[0]["status"] == "draft"
    with database.transaction() as session:
        PartStore(session).approve(LED, revision, "rita")
    approved = resolve_parts(database, ROLES, {"led": LED})
    assert approved.parts[0]["status"] == "approved" and approved.warnings == []
    with database.transaction() as session:
        PartStore(session).retire(LED, revision, "edna", "replaced")
    with pytest.raises(RetiredPartReference):
        resolve_parts(database, ROLES, {"led": LED})
    pinned = resolve_parts(database, ROLES, {"led": LED, "led_revision": revision})
    assert pinned.parts[0]["status"] == "retired" and pinned.values["vf_typ_v"] == 2.2


def test_a_part_created_under_a_renamed_parts_old_id_is_read_afresh(database: Database) -> None:
    assert resolve_parts(database, ROLES, {"led": LED}).values["vf_typ_v"] == 2.1
    with database.transaction() as session:
        store = PartStore(session)
        store.rename(LED, "led-red-5mm-old", "edna")
        led = store.get("led-red-5mm-old")
        store.create(LED, "led", "Another red LED", {**led.parameters, "vf_typ_v": 2.3}, "edna", approve=True)
    again = resolve_parts(database, ROLES, {"led": LED})
    assert again.values["vf_typ_v"] == 2.3 and again.parts[0]["revision"] == 1
    assert resolve_parts(database, ROLES, {"led": "led-red-5mm-old"}).values["vf_typ_v"] == 2.1


def test_missing_parts_and_revisions_are_refused_as_without_the_cache(database: Database) -> None:
    resolve_parts(database, ROLES, {"led": LED})
    with pytest.raises(UnknownPart) as no_revision:
        resolve_parts(database, ROLES, {"led": LED, "led_revision": 9})
    assert set(no_revision.value.errors or {}) == {"led_revision"}
    with pytest.raises(UnknownPart) as no_part:
        resolve_parts(database, ROLES, {"led": "led-not-stored"})
    assert set(no_part.value.errors or {}) == {"led"}


def test_a_full_cache_empties_and_refills(database: Database, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(REVISIONS, "size", 2)
    resolved = resolve_parts(database, ROLES, THREE)
    assert len(REVISIONS) <= 2
    assert resolved.values["vf_typ_v"] == 2.1 and resolved.values["supply_v"] == 12.0
