"""The calculation endpoints: parts or explicit values, units as strings, the envelope, and clear refusals."""

from __future__ import annotations

import math
from typing import Any

import pytest
from flask.testing import FlaskClient
from helpers import assert_problem, bearer

ENVELOPE = {"calculation", "inputs", "parts", "results", "checks", "warnings", "cautions", "safety", "fingerprint"}

BJT = {"collector_current_a": 0.04, "drive_high_v": 3.3}
EXPLICIT_LED = {
    "supply_v": "12 V",
    "vf_typ_v": 2.0,
    "vf_min_v": 1.8,
    "vf_max_v": 2.4,
    "if_max_a": "30 mA",
    "leds_in_series": 3,
    "strings": 2,
    "current_a": "20 mA",
}


def post(client: FlaskClient, name: str, body: dict[str, Any]) -> dict[str, Any]:
    response = client.post(f"/v1/calc/{name}", json=body)
    assert response.status_code == 200, response.get_json()
    data = response.get_json()
    assert set(data) == ENVELOPE and data["calculation"] == name
    return data


def test_led_string_from_parts_matches_explicit_values(client: FlaskClient, seeded: Any) -> None:
    from_parts = post(
        client,
        "led-string",
        {
            "supply": "supply-adapter-12v-2a",
            "supply_tolerance": 0,
            "led": "led-red-5mm",
            "leds_in_series": 3,
            "strings": 2,
            "current_a": "20 mA",
        },
    )
    # The seeded red LED's forward voltages, given explicitly.
    same = post(client, "led-string", {**EXPLICIT_LED, "vf_typ_v": 2.1, "vf_min_v": 1.9, "vf_max_v": 2.5})
    assert from_parts["results"] == same["results"]
    explicit = post(client, "led-string", EXPLICIT_LED)
    # Ohm's law: (12 V - 3 x 2.0 V) / 20 mA = 300 ohm, an E24 value (IEC 60063), so the current is exact.
    assert explicit["results"]["resistor_ohm"] == 300.0
    assert explicit["results"]["current_a"] == pytest.approx(0.020)
    assert explicit["results"]["total_current_a"] == pytest.approx(0.040)
    assert {p["part_id"] for p in from_parts["parts"]} == {"supply-adapter-12v-2a", "led-red-5mm"}
    assert explicit["parts"] == [] and explicit["inputs"]["supply_v"] == 12.0


def test_explicit_values_override_the_part(client: FlaskClient, seeded: Any) -> None:
    data = post(client, "led-string", {**EXPLICIT_LED, "led": "led-red-5mm", "vf_typ_v": 2.2})
    assert data["inputs"]["vf_typ_v"] == 2.2  # the part's is 2.1
    assert data["inputs"]["if_max_a"] == 0.03  # from the part


def test_transistor_part_supplies_the_switch_drop(client: FlaskClient, seeded: Any) -> None:
    data = post(client, "led-string", {**EXPLICIT_LED, "transistor": "npn-small-signal"})
    assert data["inputs"]["switch_drop_v"] == 0.25
    # (12 - 6 - 0.25) V / 20 mA = 287.5 ohm exactly; the next E24 value up is 300 ohm (IEC 60063).
    assert data["results"]["resistor_exact_ohm"] == pytest.approx(287.5)
    assert data["results"]["resistor_ohm"] == 300.0


def test_closed_loop_bandwidth_on_a_seeded_opamp(client: FlaskClient, seeded: Any) -> None:
    data = post(
        client,
        "closed-loop-bandwidth",
        {
            "opamp": "opamp-general-1mhz",
            "gain": 100,
            "sweep_start_hz": 10,
            "sweep_stop_hz": "1 MHz",
            "sweep_points": 50,
        },
    )
    results = data["results"]
    # GBW 1.2 MHz at gain 100 gives about 12 kHz (GBW/NG, Sedra & Smith, Microelectronic Circuits, 7th ed.,
    # §2.7.3, from memory); exactly GBW/NG + GBW/A0 in the model.
    assert results["bandwidth_hz"] == pytest.approx(1.2e6 / 100 + 1.2e6 / 150_000)
    assert len(results["sweep"]["frequency_hz"]) == 50
    assert results["sweep"]["gain_db"][0] == pytest.approx(20 * math.log10(abs(results["closed_loop_gain"])), abs=1e-3)
    assert results["gain_at_signal_db"] is None  # no signal_hz given: does not apply


def test_inverting_stage_from_resistors(client: FlaskClient) -> None:
    data = post(
        client,
        "closed-loop-bandwidth",
        {"configuration": "inverting", "rf_ohm": "100 kohm", "rg_ohm": "10 kohm", "gbw_hz": "1 MHz"},
    )
    # Inverting gain -10 has noise gain 11 (Sedra & Smith, Microelectronic Circuits, 7th ed., §2.7.3, from memory).
    assert data["results"]["signal_gain"] == -10
    assert data["results"]["noise_gain"] == 11
    assert data["results"]["bandwidth_hz"] == pytest.approx(1e6 / 11)


def test_slew_limit_with_unit_strings(client: FlaskClient) -> None:
    data = post(client, "slew-limit", {"slew_rate_v_per_s": "0.5 V/us", "frequency_hz": "20 kHz", "amplitude_v": 5})
    # Sine: required slew 2*pi*f*Vp = 0.63 V/us > 0.5 V/us, so it slew-limits.
    assert data["results"]["slew_limited"] is True
    assert data["results"]["required_slew_rate_v_per_s"] == pytest.approx(2 * math.pi * 20e3 * 5)
    failing = [c["name"] for c in data["checks"] if not c["ok"]]
    assert failing == ["slew_rate"]


def test_bjt_switch_with_driver_part(client: FlaskClient, seeded: Any) -> None:
    data = post(
        client,
        "bjt-switch",
        {
            "transistor": "npn-small-signal",
            "driver": "driver-mcu-3v3",
            "collector_current_a": "40 mA",
            "supply_max_v": "12.6 V",
        },
    )
    # The part's test ratio 10 over (1 + 5 %): Ib = 40 mA × 1.05 / 10 = 4.2 mA; Rb = (2.8 - 0.9) V / 4.2 mA
    # = 452.4 ohm; largest E24 value below is 430 ohm. The pin at its 3.3 V supply with a hot junction
    # (0.9 - 0.2 V, 2 mV/K over 100 K, from memory) and Rb at -5 %: 2.6 V / 408.5 ohm = 6.36 mA of 10 mA.
    assert data["results"]["rb_exact_ohm"] == pytest.approx(1.9 / 0.0042)
    assert data["results"]["rb_ohm"] == 430.0
    assert data["results"]["drive_current_max_a"] == pytest.approx(2.6 / 408.5)
    assert all(c["ok"] for c in data["checks"])
    assert {c["name"] for c in data["checks"]} >= {
        "saturation",
        "vce_sat_guarantee",
        "driver_current",
        "off_state",
        "voltage_rating",
    }


def test_duty_cycle_power_of_the_greenhouse_channels(client: FlaskClient, seeded: Any) -> None:
    body = {
        "supply": "supply-battery-9v-6aa",
        "loads": [
            {"name": "grow channel", "peak_current_a": "40 mA", "duty_cycle": 0.5, "count": 6},
            {"name": "controller", "peak_current_a": "15 mA", "on_time_s": "1 ms", "period_s": "4 ms"},
        ],
    }
    data = post(client, "duty-cycle-power", body)
    results = data["results"]
    average = 6 * 0.040 * 0.5 + 0.015 * 0.25
    assert results["average_current_a"] == pytest.approx(average)
    assert results["average_power_w"] == pytest.approx(9 * average)
    assert results["runtime_h"] == pytest.approx(2.0 / average)
    assert results["loads"][0]["rms_current_a"] == pytest.approx(0.040 * math.sqrt(0.5))
    assert any("capacity" in w for w in data["warnings"])


def test_waveform_load_agrees_with_the_rectangular_pulse(client: FlaskClient) -> None:
    period, on, peak = 1e-3, 0.25e-3, 0.1
    times = [0.0, on, on + 1e-12, period]
    waveform = {"supply_v": 12, "loads": [{"waveform": {"time_s": times, "current_a": [peak, peak, 0.0, 0.0]}}]}
    rectangle = {"supply_v": 12, "loads": [{"peak_current_a": peak, "duty_cycle": 0.25}]}
    a = post(client, "duty-cycle-power", waveform)["results"]
    b = post(client, "duty-cycle-power", rectangle)["results"]
    assert a["average_current_a"] == pytest.approx(b["average_current_a"], rel=1e-6)


@pytest.mark.parametrize(
    ("name", "body", "status", "field"),
    [
        ("closed-loop-bandwidth", {"gain": 0.5, "gbw_hz": 1e6}, 422, "gain"),
        ("bjt-switch", {**BJT, "transistor": "npn-small-signal", "duty_cycle": 1.3}, 422, "duty_cycle"),
        ("led-string", {**EXPLICIT_LED, "current_a": -0.02}, 422, "current_a"),
        ("led-string", {**EXPLICIT_LED, "supply_v": "5 V"}, 422, "supply_v"),
        ("led-string", {**EXPLICIT_LED, "led": "led-nonexistent"}, 404, "led"),
        ("led-string", {**EXPLICIT_LED, "supply_v": "12 A"}, 422, "supply_v"),
        ("led-string", {**EXPLICIT_LED, "supply_v": "NaN"}, 422, "supply_v"),
        ("led-string", {key: v for key, v in EXPLICIT_LED.items() if key != "vf_typ_v"}, 422, "vf_typ_v"),
        ("led-string", {**EXPLICIT_LED, "colour": "red"}, 422, "colour"),
        ("slew-limit", {"slew_rate_v_per_s": 5e5}, 422, "frequency_hz"),
        ("duty-cycle-power", {"supply_v": 9, "loads": [{"peak_current_a": 0.1, "duty_cycle": 1.3}]}, 422,
         "loads.0.duty_cycle"),
        ("duty-cycle-power", {"supply_v": 9, "loads": []}, 422, "loads"),
        ("bjt-switch", {**BJT, "transistor": "pnp-small-signal"}, 422, "transistor"),
        ("bjt-switch", {**BJT, "transistor": "led-red-5mm"}, 422, "transistor"),
    ],
)  # fmt: skip
def test_bad_inputs_name_the_field(
    client: FlaskClient, seeded: Any, name: str, body: dict[str, Any], status: int, field: str
) -> None:
    assert_problem(client.post(f"/v1/calc/{name}", json=body), status, field)


def test_supply_below_forward_voltage_says_so(client: FlaskClient) -> None:
    body = assert_problem(client.post("/v1/calc/led-string", json={**EXPLICIT_LED, "supply_v": 5}), 422, "supply_v")
    assert "forward voltage" in body["errors"]["supply_v"][0]


STRING_ONLY = {"supply_v": 12, "leds_in_series": 3, "current_a": 0.02}


def test_part_review_status_rules(client: FlaskClient, seeded: Any, tokens: dict[str, str]) -> None:
    part = client.get("/v1/parts/led-red-5mm")
    changed = {"parameters": {**part.get_json()["parameters"], "vf_typ_v": 2.2}}
    headers = {**bearer(tokens["edna"]), "If-Match": part.headers["ETag"]}
    edited = client.put("/v1/parts/led-red-5mm", json=changed, headers=headers)
    assert edited.status_code == 200
    draft = post(client, "led-string", {**STRING_ONLY, "led": "led-red-5mm"})
    assert any("draft" in w for w in draft["warnings"])
    assert draft["parts"][0] == {"role": "led", "part_id": "led-red-5mm", "revision": 2, "status": "draft"}
    retire = {**bearer(tokens["edna"]), "If-Match": edited.headers["ETag"]}
    assert client.delete("/v1/parts/led-red-5mm", headers=retire).status_code == 200
    assert_problem(client.post("/v1/calc/led-string", json={**STRING_ONLY, "led": "led-red-5mm"}), 422, "led")
    pinned = post(client, "led-string", {**STRING_ONLY, "led": "led-red-5mm", "led_revision": 1})
    assert pinned["inputs"]["vf_typ_v"] == 2.1 and pinned["parts"][0]["revision"] == 1
    assert_problem(client.post("/v1/calc/led-string", json={**EXPLICIT_LED, "led_revision": 1}), 422, "led_revision")


def test_fingerprint_is_stable_and_sensitive(client: FlaskClient) -> None:
    a = post(client, "led-string", EXPLICIT_LED)["fingerprint"]
    b = post(client, "led-string", dict(reversed(list(EXPLICIT_LED.items()))))["fingerprint"]
    c = post(client, "led-string", {**EXPLICIT_LED, "current_a": 0.019})["fingerprint"]
    assert a == b != c and len(a) == 64


def test_high_power_leds_carry_a_caution(client: FlaskClient, seeded: Any) -> None:
    body = {"supply": "supply-adapter-12v-2a", "led": "led-deep-red-grow-1w", "leds_in_series": 3, "current_a": 0.35}
    data = post(client, "led-string", body)
    assert data["cautions"], data


def test_voltage_gains_in_decibels_are_twenty_log10_everywhere(
    client: FlaskClient, seeded: Any, tokens: dict[str, str]
) -> None:
    # IEC 60027-3: the level of a voltage ratio is 20·log10 of it, so 26 dB is 19.95 V/V (not the power ratio
    # 398) and 106 dB is 199 526 V/V (not 4e10). GBW 1 MHz over NG 19.95: 50.1 kHz.
    gain, a0 = 10 ** (26 / 20), 10 ** (106 / 20)
    body = {"gbw_hz": "1 MHz", "gain": "26 dB", "open_loop_gain": "106 dB"}
    single = post(client, "closed-loop-bandwidth", body)
    assert single["inputs"]["gain"] == pytest.approx(gain) and single["inputs"]["open_loop_gain"] == pytest.approx(a0)
    assert single["results"]["bandwidth_hz"] == pytest.approx(1e6 / gain + 1e6 / a0)
    # The same in a batch cell, a query string, the channel review's fields and a search filter.
    batch = client.post("/v1/batch/closed-loop-bandwidth", json=[body]).get_json()
    assert batch["rows"][0]["results"] == single["results"]
    query = client.get("/v1/calc/closed-loop-bandwidth", query_string=body).get_json()
    assert query["results"] == single["results"]
    where = {"open_loop_gain": {"min": "100 dB"}}  # 1e5 V/V: the 60 000 and 80 000 V/V seeds are out
    found = client.post(
        "/v1/select/closed-loop-bandwidth", json={"opamp": {"where": where}, "gain": "26 dB", "signal_hz": "1 kHz"}
    ).get_json()
    assert found["filter"]["where"] == {"open_loop_gain": {"min": pytest.approx(1e5)}}
    assert sorted(c["part_id"] for c in found["candidates"]) == ["opamp-general-1mhz", "opamp-jfet-4mhz"]
    # A part's open_loop_gain too.
    part = {"part_id": "opamp-db-test", "kind": "opamp", "parameters": {
        "gbw_hz": "1 MHz", "slew_rate_v_per_s": "1 V/us", "open_loop_gain": "106 dB", "supply_min_v": 5,
        "supply_max_v": 30, "output_headroom_v": 1}}  # fmt: skip
    created = client.post("/v1/parts", json=part, headers=bearer(tokens["edna"]))
    assert created.status_code == 201 and created.get_json()["parameters"]["open_loop_gain"] == pytest.approx(a0)


def test_decibels_are_refused_on_ratios_that_are_no_voltage_gain(client: FlaskClient) -> None:
    led = {"supply_v": 12, "vf_typ_v": 2.0, "vf_min_v": 1.8, "vf_max_v": 2.4, "if_max_a": 0.03,
           "leds_in_series": 3, "current_a": "20 mA"}  # fmt: skip
    body = assert_problem(
        client.post("/v1/calc/led-string", json={**led, "supply_tolerance": "-26 dB"}), 422, "supply_tolerance"
    )
    assert "logarithmic" in body["errors"]["supply_tolerance"][0]
    bjt = {**BJT, "hfe_min": "40 dB", "vbe_sat_v": 0.85, "vce_sat_v": 0.2, "ic_max_a": 0.2, "power_max_w": 0.5}
    assert_problem(client.post("/v1/calc/bjt-switch", json=bjt), 422, "hfe_min")
    assert_problem(client.post("/v1/calc/closed-loop-bandwidth", json={"gbw_hz": "1 MHz", "gain": "3 Np"}), 422, "gain")
