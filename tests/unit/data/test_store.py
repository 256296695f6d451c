"""The revisioned parts store called directly, on every configured database: nothing is ever lost, every
write names the revision it acts on, and nobody approves their own revision."""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import pytest
from flask import Flask
from sqlalchemy.orm import Session

from calcsvc.data.store import (
    InvalidPart,
    InvalidPartId,
    PartExists,
    PartNotFound,
    PartRetired,
    PartStore,
    SelfApproval,
    StaleRevision,
)

LED: dict[str, Any] = {
    "color": "red",
    "vf_typ_v": 2.0,
    "vf_min_v": 1.8,
    "vf_max_v": 2.4,
    "if_test_a": 0.02,
    "if_max_a": 0.03,
}


@pytest.fixture
def session(app: Flask) -> Iterator[Session]:
    with app.extensions["calcsvc.db"].transaction() as s:
        yield s


def test_an_edit_adds_a_revision_and_keeps_the_old_one(session: Session) -> None:
    store = PartStore(session)
    first = store.create("led-grow-red", "led", "grow-light red (typical of its class)", LED, "edna")
    second = store.update("led-grow-red", first.revision, first.description, {**LED, "vf_max_v": 2.5}, "edna")
    assert (first.revision, second.revision, second.status) == (1, 2, "draft")
    assert store.get_revision("led-grow-red", 1).parameters["vf_max_v"] == 2.4
    assert [r.revision for r in store.revisions("led-grow-red")] == [1, 2]


def test_a_stale_revision_changes_nothing(session: Session) -> None:
    store = PartStore(session)
    store.create("led-grow-red", "led", "", LED, "edna")
    store.update("led-grow-red", 1, "", {**LED, "vf_max_v": 2.5}, "edna")
    with pytest.raises(StaleRevision):
        store.update("led-grow-red", 1, "", {**LED, "vf_max_v": 2.6}, "edna")
    assert store.get("led-grow-red").parameters["vf_max_v"] == 2.5


def test_approval_needs_a_second_person_and_the_current_revision(session: Session) -> None:
    store = PartStore(session)
    store.create("led-grow-red", "led", "", LED, "edna")
    with pytest.raises(SelfApproval):
        store.approve("led-grow-red", 1, "edna")
    store.update("led-grow-red", 1, "", {**LED, "vf_max_v": 2.5}, "edna")
    with pytest.raises(StaleRevision):
        store.approve("led-grow-red", 1, "rita")  # rita read revision 1; revision 2 is what would be approved
    approved = store.approve("led-grow-red", 2, "rita")
    assert (approved.status, approved.approved_by) == ("approved", "rita")


def test_retire_is_history_and_restore_is_a_new_draft(session: Session) -> None:
    store = PartStore(session)
    store.create("led-grow-red", "led", "", LED, "edna", approve=True)
    retired = store.retire("led-grow-red", 1, "edna", "no longer stocked")
    assert retired.status == "retired"
    with pytest.raises(PartRetired):
        store.update("led-grow-red", 1, "", LED, "edna")
    restored = store.restore("led-grow-red", 1, "edna", "stocked again")
    assert (restored.revision, restored.status) == (2, "draft")
    actions = [event.action for revision in store.revisions("led-grow-red") for event in revision.events]
    assert actions[:2] == ["created", "approved"] and "retired" in actions and "restored" in actions


@pytest.mark.parametrize("part_id", ["led-nl\n", "LED-RED", "led red", "-led", "led/red", "l" * 65, "led-\u00e9"])
def test_no_id_the_api_could_not_address_is_stored(session: Session, part_id: str) -> None:
    with pytest.raises(InvalidPartId):
        PartStore(session).create(part_id, "led", "", LED, "edna")


def test_parameters_are_checked_by_kind_and_ids_are_unique(session: Session) -> None:
    store = PartStore(session)
    with pytest.raises(InvalidPart) as refused:
        store.create("led-grow-red", "led", "", {**LED, "vf_min_v": 2.6}, "edna")  # min above typical
    assert refused.value.errors
    store.create("led-grow-red", "led", "", LED, "edna")
    with pytest.raises(PartNotFound):
        store.get("led-grow-blue")
    with pytest.raises(PartExists):  # the database refuses it, which ends the transaction
        store.create("led-grow-red", "led", "", LED, "edna")
