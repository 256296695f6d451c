"""The bill of materials of a MOSFET channel: its gate resistor's dissipation against a numerical RC integral,
its gate pull-down by Joule's law, and the MOSFET itself."""

from __future__ import annotations

import math
from typing import Any

import pytest
from flask import Flask
from scipy.integrate import quad

from calcsvc.service import review
from calcsvc.service.demo import demo_si
from calcsvc.web.review_schemas import REVIEW_REQUEST

# The grow-light channel of tests/integration/test_review_mosfet.py, without its yield.
GROW = {
    "transistor": "nmos-logic-small", "led": "led-royal-blue-grow-1w", "vf_min_v": 2.9, "vf_typ_v": 3.1,
    "vf_max_v": 3.3, "leds_in_series": 3, "strings": 3, "current_a": 0.35, "channels": 1, "pwm_frequency_hz": 2000,
    "pwm_resolution_bits": 4, "gate_pulldown_ohm": 100e3, "led_rth_ba_k_per_w": 15, "resistor_tolerance": 0.01,
    "samples": 0,
}  # fmt: skip


def _bom(seeded: Flask, **overrides: Any) -> dict[str, dict[str, Any]]:
    body = REVIEW_REQUEST.load({**demo_si(), **GROW, **overrides})
    document = review.run_review(seeded.extensions["calcsvc.db"], body)
    return {item["item"]: item for item in document["bill_of_materials"]["per_channel"]}


def test_gate_resistor_takes_the_gate_charge_energy_of_each_edge(seeded: Flask) -> None:
    items = _bom(seeded)
    rg, pulldown, qg, vdd, f = 390.0, 100e3, 3e-9, 3.3, 2000.0
    # The gate as a capacitance C = Qg/V charged and discharged through Rg once a period: the energy in the
    # resistor is ∫ i²·R dt with i = (V/R)·e^(−t/RC), integrated numerically for each edge.
    c = qg / vdd
    tau = rg * c
    per_edge, _ = quad(lambda t: (vdd / rg * math.exp(-t / tau)) ** 2 * rg, 0.0, 50 * tau)
    steady = (vdd / (rg * 0.99 + pulldown)) ** 2 * rg  # the pull-down's current while on, Rg at its low end
    assert items["gate_resistor"]["dissipation_max_w"] == pytest.approx(2 * per_edge * f + steady, rel=1e-6)
    assert items["gate_resistor"]["rating_min_w"] == 0.125 and items["gate_resistor"]["tolerance"] == 0.01
    # The pull-down with the pin held high: Joule's law, V²/R.
    assert items["gate_pulldown"]["dissipation_max_w"] == pytest.approx(vdd**2 / pulldown)
    assert items["gate_pulldown"]["series"] == "E24" and items["gate_pulldown"]["count"] == 1
    assert items["switch_transistor"]["part_id"] == "nmos-logic-small"


def test_without_a_pull_down_the_recommended_one_is_listed(seeded: Flask) -> None:
    body = {k: v for k, v in GROW.items() if k != "gate_pulldown_ohm"}
    document = review.run_review(seeded.extensions["calcsvc.db"], REVIEW_REQUEST.load({**demo_si(), **body}))
    items = {item["item"]: item for item in document["bill_of_materials"]["per_channel"]}
    recommended = document["stages"]["switch"]["gate_pulldown_recommended_ohm"]
    assert items["gate_pulldown"]["value_ohm"] == recommended == 100e3
    assert any("No gate pull-down" in note for note in document["warnings"])
