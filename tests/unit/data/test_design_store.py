"""The saved-designs store called directly, on every configured database: each save is a revision, writes name
the revision they act on, retiring keeps the history, and the parts a design uses find it."""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import pytest
from flask import Flask
from sqlalchemy.orm import Session

from calcsvc.data.design_store import DesignContent, DesignStore
from calcsvc.data.store_errors import DesignExists, DesignNotFound, DesignRetired, InvalidPartId, StaleRevision


def content(led: str, revision: int, channels: int = 6) -> DesignContent:
    request = {"led": led, "current_a": "20 mA", "channels": channels}
    inputs = {"led": led, "current_a": 0.02, "channels": channels}
    parts = [{"role": "led", "part_id": led, "revision": revision, "status": "approved"}]
    review: dict[str, Any] = {"verdict": "pass", "failing": [], "tightest_margin": 0.07, "fingerprint": "ab" * 32}
    return DesignContent("channel", "edna", "grow light", request, inputs, parts, review)


@pytest.fixture
def session(app: Flask) -> Iterator[Session]:
    with app.extensions["calcsvc.db"].transaction() as s:
        yield s


def test_a_design_round_trips_with_its_revisions(session: Session) -> None:
    store = DesignStore(session)
    first = store.create("bench-lamp", content("led-red-5mm", 1), "edna")
    assert (first.revision, first.status, first.etag) == (1, "active", '"bench-lamp-r1"')
    assert first.content == content("led-red-5mm", 1)  # JSON in, the same JSON out, "20 mA" as given
    second = store.update("bench-lamp", 1, content("led-green-5mm", 2, channels=8), "rosa")
    assert (second.revision, second.author, second.content.inputs["channels"]) == (2, "rosa", 8)
    assert [v.content.parts[0]["part_id"] for v in store.revisions("bench-lamp")] == ["led-red-5mm", "led-green-5mm"]
    assert store.get_revision("bench-lamp", 1).content == content("led-red-5mm", 1)
    # Only the current revision's parts find the design.
    assert store.using_part("led-green-5mm") == ["bench-lamp"] and store.using_part("led-red-5mm") == []


def test_writes_name_their_revision_and_retiring_keeps_history(session: Session) -> None:
    store = DesignStore(session)
    store.create("bench-lamp", content("led-red-5mm", 1), "edna")
    with pytest.raises(DesignExists):
        store.create("bench-lamp", content("led-red-5mm", 1), "edna")
    with pytest.raises(StaleRevision):
        store.update("bench-lamp", 7, content("led-red-5mm", 1), "edna")
    with pytest.raises(InvalidPartId):
        store.create("Bench Lamp", content("led-red-5mm", 1), "edna")
    with pytest.raises(DesignNotFound):
        store.get("none-such")
    retired = store.retire("bench-lamp", 1, "edna")
    assert retired.status == "retired" and store.retire("bench-lamp", 1, "edna").status == "retired"
    with pytest.raises(DesignRetired):
        store.update("bench-lamp", 1, content("led-red-5mm", 1), "edna")
    assert store.using_part("led-red-5mm") == []  # off the impact lists
    assert store.list("active")[1] == 0 and store.list("retired")[0][0].design_id == "bench-lamp"
    assert len(store.revisions("bench-lamp")) == 1
