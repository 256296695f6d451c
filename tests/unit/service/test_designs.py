"""Saved designs in the service layer: the batched pass that the watch list and the impact use gives, design for
design, the verdict, failing checks, tightest margin and fingerprint of the full single review; and the demo is
seeded as a design once."""

from __future__ import annotations

from typing import Any

import pytest

from calcsvc.core.outcome import DomainError
from calcsvc.data.database import Database
from calcsvc.data.design_store import DesignStore
from calcsvc.service.demo import demo_si
from calcsvc.service.design_batch import Request, pinned, review_many
from calcsvc.service.design_outcome import document_summary
from calcsvc.service.designs import DEMO_DESIGN_ID, run_request, seed_demo_design
from calcsvc.service.errors import ServiceError

FRONT_STAGE = ("opamp", "configuration", "gain", "signal_hz", "amplitude_v")
CHANNELS: list[dict[str, Any]] = [
    demo_si(),
    {**demo_si(), "led": "led-green-5mm"},
    {**demo_si(), "transistor": "npn-darlington-1a"},
    {**demo_si(), "supply": "supply-battery-9v-6aa", "leds_in_series": 2},
    {**demo_si(), "opamp": "opamp-rrio-3mhz"},
    {**demo_si(), "supply_tolerance": 0.1},
    {**demo_si(), "current_a": 0.028, "e_series": "E12"},
    {k: v for k, v in demo_si().items() if k not in FRONT_STAGE},
    {**demo_si(), "led": "led-white-5mm", "leds_in_series": 4},  # 4 x 3.5 V > 12 V: physically impossible
]
LED_STRING = {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "leds_in_series": 3, "current_a": 0.029}
DESIGNS = [("channel", body) for body in CHANNELS] + [("led-string", LED_STRING)]


def _single(database: Database, calculation: str, body: dict[str, Any]) -> dict[str, Any] | None:
    try:
        return document_summary(run_request(database, calculation, body))
    except (ServiceError, DomainError):
        return None  # refused: the batch must refuse it too


def test_the_batched_pass_agrees_with_each_full_review(database: Database) -> None:
    singles = [_single(database, calculation, body) for calculation, body in DESIGNS]
    assert {s["verdict"] for s in singles if s} == {"pass", "fail"} and None in singles  # every outcome is covered
    assert any(s and s["cautions"] for s in singles)  # the over-voltage op-amp's caution is carried too
    requests = []
    for (calculation, body), single in zip(DESIGNS, singles, strict=True):
        pins = {p["role"]: p["revision"] for p in single["parts"]} if single else {}
        requests.append(Request(calculation, pinned(body, pins)))
    with database.transaction() as session:
        batched = review_many(session, requests)
    for single, batch in zip(singles, batched, strict=True):
        if single is None:
            assert batch["verdict"] == "error" and batch["problem"]["errors"]
            continue
        for key in ("verdict", "failing", "tightest_check", "fingerprint", "parts", "cautions"):
            assert batch[key] == single[key], key
        assert batch["tightest_margin"] == pytest.approx(single["tightest_margin"], rel=1e-12)
        assert [(c["name"], c["ok"]) for c in batch["checks"]] == [(c["name"], c["ok"]) for c in single["checks"]]


def test_the_demo_is_seeded_as_a_design_once(database: Database) -> None:
    assert seed_demo_design(database, "seed") is True
    assert seed_demo_design(database, "seed") is False  # kept as it is, edits and all
    with database.transaction() as session:
        demo = DesignStore(session).get(DEMO_DESIGN_ID)
    assert (demo.revision, demo.content.review["verdict"], demo.content.owner) == (1, "pass", "seed")
