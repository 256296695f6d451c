"""Part references resolved directly: the review rules of the parts table, without a server."""

from __future__ import annotations

import pytest

from calcsvc.core import bjt_switch, led_string
from calcsvc.data.database import Database
from calcsvc.data.store import PartStore
from calcsvc.service.errors import InvalidInput, RetiredPartReference, UnknownPart, WrongPartKind
from calcsvc.service.resolve import resolve_parts

ROLES = led_string.SPEC.roles
DRAFT_LED = {"color": "amber", "vf_typ_v": 2.2, "vf_min_v": 2.0, "vf_max_v": 2.6, "if_test_a": 0.02, "if_max_a": 0.03}


def test_explicit_values_win_over_the_parts(database: Database) -> None:
    resolved = resolve_parts(database, ROLES, {"led": "led-red-5mm", "vf_typ_v": 2.5})
    assert resolved.values["vf_typ_v"] == 2.5  # given explicitly
    assert resolved.values["vf_min_v"] == 1.9  # from the part
    assert "led" not in resolved.values and resolved.parts[0]["part_id"] == "led-red-5mm"
    assert resolved.warnings == []  # seeded parts are approved


def test_a_draft_is_used_with_a_warning(database: Database) -> None:
    with database.transaction() as session:
        PartStore(session).create("led-amber-draft", "led", "Amber, unreviewed", DRAFT_LED, "edna")
    resolved = resolve_parts(database, ROLES, {"led": "led-amber-draft"})
    assert resolved.values["vf_typ_v"] == 2.2
    assert resolved.warnings == ["led 'led-amber-draft' revision 1 is draft, not approved"]


def test_a_retired_part_needs_a_pinned_revision(database: Database) -> None:
    with database.transaction() as session:
        store = PartStore(session)
        store.retire("led-red-5mm", store.get("led-red-5mm").revision, "edna", "replaced")
    with pytest.raises(RetiredPartReference) as refused:
        resolve_parts(database, ROLES, {"led": "led-red-5mm"})
    assert set(refused.value.errors or {}) == {"led"}
    pinned = resolve_parts(database, ROLES, {"led": "led-red-5mm", "led_revision": 1})
    assert pinned.parts[0]["status"] == "retired" and "retired" in pinned.warnings[0]


def test_wrong_kind_unknown_parts_and_a_revision_without_a_part_are_refused(database: Database) -> None:
    with pytest.raises(WrongPartKind):
        resolve_parts(database, ROLES, {"led": "supply-adapter-12v-2a"})
    with pytest.raises(WrongPartKind):  # a pnp transistor where the switch needs npn
        resolve_parts(database, bjt_switch.SPEC.roles, {"transistor": "pnp-small-signal"})
    with pytest.raises(UnknownPart) as unknown:
        resolve_parts(database, ROLES, {"led": "led-red-5mm", "led_revision": 99})
    assert set(unknown.value.errors or {}) == {"led_revision"}
    with pytest.raises(InvalidInput):
        resolve_parts(database, ROLES, {"led_revision": 1})
