"""Referenced parts are kept per process under the database's parts generation: a request reads the generation
alone while nothing changed, the parts in one query when something did, and every change to the parts tables,
made through any connection, is seen by the next request."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import pytest
from sqlalchemy import event, text

from calcsvc.core import led_string
from calcsvc.data.database import Database
from calcsvc.data.part_lookup import GENERATION, REFERENCES
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


@contextmanager
def counted_generation_reads(database: Database, monkeypatch: pytest.MonkeyPatch) -> Iterator[list[str]]:
    """The statements read through ``Database.read_value`` (on a DBAPI connection, which no engine event sees)."""
    statements: list[str] = []
    read_value = database.read_value

    def counted(statement: str) -> Any:
        statements.append(statement)
        return read_value(statement)

    with monkeypatch.context() as patch:
        patch.setattr(database, "read_value", counted)
        yield statements


def test_three_cached_references_take_one_generation_read_and_no_query(
    database: Database, monkeypatch: pytest.MonkeyPatch
) -> None:
    with counted_selects(database) as selects:
        resolve_parts(database, ROLES, THREE)  # fills the cache
    assert len(selects) == 1
    with counted_selects(database) as selects, counted_generation_reads(database, monkeypatch) as reads:
        resolved = resolve_parts(database, ROLES, THREE)
    assert selects == [] and reads == [GENERATION]
    assert [p["part_id"] for p in resolved.parts] == list(THREE.values())
    assert resolved.values["supply_v"] == 12.0 and resolved.values["vf_typ_v"] == 2.1


def test_every_write_to_the_parts_tables_gives_a_new_generation(database: Database) -> None:
    """Triggers, so a writer outside this service (the parts tool, an administrator's SQL) is seen too."""
    seen = [database.read_value(GENERATION)]
    with database.transaction() as session:
        session.execute(text("UPDATE parts SET description = 'as edited by hand' WHERE part_id = :p"), {"p": LED})
    seen.append(database.read_value(GENERATION))
    with database.transaction() as session:
        session.execute(text("UPDATE part_revisions SET author = 'someone' WHERE part_id = :p"), {"p": LED})
    seen.append(database.read_value(GENERATION))
    edit(database, LED, vf_typ_v=2.2)
    seen.append(database.read_value(GENERATION))
    assert None not in seen and len(set(seen)) == len(seen)


def test_a_status_set_by_hand_elsewhere_is_seen_by_the_next_request(database: Database) -> None:
    assert resolve_parts(database, ROLES, {"led": LED}).warnings == []
    writer = other_worker(database)
    try:
        with writer.transaction() as session:
            session.execute(text("UPDATE parts SET status = 'draft' WHERE part_id = :p"), {"p": LED})
    finally:
        writer.dispose()
    assert resolve_parts(database, ROLES, {"led": LED}).warnings == [f"led '{LED}' revision 1 is draft, not approved"]


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
    monkeypatch.setattr(REFERENCES, "size", 2)
    resolved = resolve_parts(database, ROLES, THREE)
    assert REFERENCES.count(database) <= 2
    assert resolved.values["vf_typ_v"] == 2.1 and resolved.values["supply_v"] == 12.0


def test_a_reference_to_no_stored_part_leaves_what_is_kept(database: Database) -> None:
    """A caller naming parts that do not exist cannot make every other request read the parts again."""
    resolve_parts(database, ROLES, THREE)
    with pytest.raises(UnknownPart):
        resolve_parts(database, ROLES, {"led": "led-not-stored"})
    with counted_selects(database) as selects:
        resolve_parts(database, ROLES, THREE)
    assert selects == []
