"""Switching over HTTP: a logic-level MOSFET for the greenhouse channel from a 3.3 V pin, a part stated only at
10 V refused for that pin, and the PWM stage in the channel review and its report."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest
from flask.testing import FlaskClient
from helpers import assert_problem

DEMO = json.loads((Path(__file__).resolve().parents[2] / "examples" / "greenhouse-channel.json").read_text())
# Two strings of 350 mA each through one switch, from the 12 V adapter (12.6 V at its high tolerance).
MOSFET_CHANNEL = {
    "transistor": "nmos-logic-small",
    "driver": "driver-mcu-3v3",
    "drain_current_a": "700 mA",
    "supply_max_v": "12.6 V",
    "duty_cycle": 0.5,
    "ambient_c": 45,
    "gate_pulldown_ohm": "100 kohm",
    "pwm_frequency_hz": "2 kHz",
    "pwm_resolution_bits": 4,
}


def test_logic_level_mosfet_from_a_3v3_pin_passes_with_its_gate_resistor_losses_and_flicker(
    client: FlaskClient, seeded: Any
) -> None:
    response = client.post("/v1/calc/mosfet-switch", json=MOSFET_CHANNEL)
    assert response.status_code == 200, response.get_json()
    data = response.get_json()
    r = data["results"]
    # Each edge a twentieth of the shortest pulse, 1/(2 kHz · 16) = 31.25 µs: 1.5625 µs · 0.75 V / 3 nC = 390.6 Ω,
    # so 390 Ω (E24, at or below), above the 10 mA pin's smallest 3.3 V / 9.5 mA = 347 Ω.
    assert r["rg_exact_ohm"] == pytest.approx(390.625)
    assert r["rg_ohm"] == 390.0
    assert 0 < r["conduction_loss_w"] and 0 < r["switching_loss_w"] < r["conduction_loss_w"]
    assert r["junction_c"] < 150 - 20
    assert {c["name"]: c["ok"] for c in data["checks"]} == {
        "gate_reaches_stated_drive": True,
        "pin_peak_current": True,
        "drain_current_rating": True,
        "drain_voltage_rating": True,
        "dissipation_at_ambient": True,
        "junction_temperature": True,
        "shortest_pulse_covers_edges": True,
        "flicker_low_risk": True,
    }


def test_a_mosfet_stated_only_at_10_v_is_refused_for_a_3v3_pin(client: FlaskClient, seeded: Any) -> None:
    body = {**MOSFET_CHANNEL, "transistor": "nmos-standard-10v"}
    problem = assert_problem(client.post("/v1/calc/mosfet-switch", json=body), 422, "drive_high_v")
    assert "not a logic-level part" in json.dumps(problem)


def test_pwm_frequency_in_the_review_and_its_report(client: FlaskClient, seeded: Any) -> None:
    body = {**DEMO, "pwm_frequency_hz": "2 kHz", "pwm_resolution_bits": 6, "samples": 0}
    response = client.post("/v1/review/channel", json=body)
    assert response.status_code == 200, response.get_json()
    data = response.get_json()
    assert data["inputs"]["pwm_frequency_hz"] == 2000.0
    checks = {c["name"]: c for c in data["checks"]}
    assert checks["shortest_pulse_covers_edges"]["ok"] and checks["flicker_low_risk"]["ok"]
    report = client.post("/v1/review/channel", json=body, headers={"Accept": "text/markdown"}).get_data(as_text=True)
    assert "pwm_frequency_hz" in report and "shortest_pulse_covers_edges" in report


def test_a_pwm_too_fast_for_a_darlington_fails_the_on_time_check_with_its_numbers(
    client: FlaskClient, seeded: Any
) -> None:
    body = {**DEMO, "transistor": "npn-darlington-1a", "pwm_frequency_hz": "2 kHz", "samples": 0}
    data = client.post("/v1/review/channel", json=body).get_json()
    check = next(c for c in data["checks"] if c["name"] == "shortest_pulse_covers_edges")
    # Ten times the seed Darlington's (0.2 + 0.5) µs on and (3 + 1.5) µs off against 1/(2 kHz · 2^8).
    assert not check["ok"]
    assert check["value"] == pytest.approx(52e-6)
    assert check["limit"] == pytest.approx(1 / (2000 * 256))


def test_period_and_pwm_frequency_must_agree(client: FlaskClient, seeded: Any) -> None:
    body = {**DEMO, "duty_cycle": None, "on_time_s": "250 us", "period_s": "1 ms", "pwm_frequency_hz": "2 kHz"}
    body = {k: v for k, v in body.items() if v is not None}
    assert_problem(client.post("/v1/review/channel", json=body), 422, "pwm_frequency_hz")


def test_mosfet_search_ranks_by_dissipation_and_gives_the_refusal_reason(client: FlaskClient, seeded: Any) -> None:
    body = {k: v for k, v in MOSFET_CHANNEL.items() if k != "transistor"}
    response = client.post(
        "/v1/select/mosfet-switch", json={**body, "search": "transistor", "rank_by": "mosfet_power_w"}
    )
    assert response.status_code == 200, response.get_json()
    data = response.get_json()
    assert data["passing"] == 1
    best, *refused = data["candidates"]
    assert best["part_id"] == "nmos-logic-small" and best["ok"]
    assert best["results"]["junction_c"] < 130 and best["results"]["mosfet_power_w"] > 0
    # The parts stated only from 4.5 V or 10 V gate drive are not logic-level parts for the 3.3 V pin.
    assert {c["part_id"] for c in refused} == {"nmos-logic-power", "nmos-standard-10v"}
    assert all("not a logic-level part" in c["problem"]["drive_high_v"][0] for c in refused)


GREENHOUSE_SWITCH = {
    "driver": "driver-mcu-3v3",
    "load_current_a": "700 mA",
    "supply_max_v": "12.6 V",
    "duty_cycle": 0.5,
    "ambient_c": 45,
    "pwm_frequency_hz": "2 kHz",
    "pwm_resolution_bits": 4,
}


def test_switch_search_ranks_bipolar_darlington_and_mosfet_together(client: FlaskClient, seeded: Any) -> None:
    response = client.post("/v1/select/switch", json={**GREENHOUSE_SWITCH, "rank_by": "dissipation"})
    assert response.status_code == 200, response.get_json()
    data = response.get_json()
    kinds = {c["part_id"]: c["kind"] for c in data["candidates"]}
    assert kinds["nmos-logic-small"] == "mosfet" and kinds["npn-darlington-1a"] == "bjt"
    assert kinds["npn-small-signal"] == "bjt"
    best = data["candidates"][0]
    # The only passing switch: the logic-level MOSFET, with its losses and junction temperature.
    assert best["part_id"] == "nmos-logic-small" and best["ok"] and data["passing"] == 1
    assert best["dissipation_w"] == pytest.approx(best["results"]["mosfet_power_w"])
    assert best["results"]["junction_c"] < 130
    # The Darlington is too slow for 16 steps at 2 kHz; the single transistors ask too much of the pin.
    darlington = next(c for c in data["candidates"] if c["part_id"] == "npn-darlington-1a")
    assert darlington["failing"] == ["shortest_pulse_covers_edges"] and darlington["dissipation_w"] > 0
    single = next(c for c in data["candidates"] if c["part_id"] == "npn-medium-power")
    assert "driver_current" in single["failing"]
    # The candidates' requests re-run them through their own calculation.
    again = client.post(f"/v1/calc/{best['calculation']}", json=best["request"]).get_json()
    assert again["results"]["mosfet_power_w"] == pytest.approx(best["results"]["mosfet_power_w"])
