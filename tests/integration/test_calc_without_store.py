"""A calculation given numbers only never takes a database connection; one naming parts takes what it needs."""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import pytest
from flask import Flask
from flask.testing import FlaskClient
from sqlalchemy import event

NUMBERS = {
    "supply_v": 12.0, "vf_typ_v": 2.1, "vf_min_v": 1.9, "vf_max_v": 2.5, "if_max_a": 0.03,
    "leds_in_series": 3, "strings": 2, "current_a": 0.02,
}  # fmt: skip
PARTS = {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "leds_in_series": 3, "strings": 2, "current_a": 0.02}


@pytest.fixture
def checkouts(seeded: Flask) -> Iterator[list[Any]]:
    """Every connection handed out by the app's pool while the test runs."""
    engine = seeded.extensions["calcsvc.db"].engine
    taken: list[Any] = []

    def take(*args: Any) -> None:
        taken.append(args)

    event.listen(engine, "checkout", take)
    yield taken
    event.remove(engine, "checkout", take)


def test_numbers_take_no_connection(client: FlaskClient, checkouts: list[Any]) -> None:
    assert client.post("/v1/calc/led-string", json=NUMBERS).status_code == 200
    assert checkouts == []


def test_part_references_are_read(client: FlaskClient, checkouts: list[Any]) -> None:
    assert client.post("/v1/calc/led-string", json=PARTS).status_code == 200
    assert checkouts
