"""Candidate search over the seeded parts table: single roles (op-amps, transistors, LEDs) and whole channels.

Every expected part id below is derived by hand from the values in seed_parts/*.json; the comments show the
arithmetic (the models are those of the calculation modules, e.g. f_-3dB = GBW/NG + GBW/A0).
"""

from __future__ import annotations

import json
import math
from collections import Counter
from pathlib import Path
from typing import Any

import pytest
from flask import Flask
from flask.testing import FlaskClient
from helpers import assert_problem, bearer

DEMO = json.loads((Path(__file__).resolve().parents[2] / "examples" / "greenhouse-channel.json").read_text())
SLEW_20K_5V = {"calculation": "slew-limit", "inputs": {"frequency_hz": "20 kHz", "amplitude_v": 5}}
OPAMPS_GAIN_50 = {"opamp": {}, "gain": 50, "signal_hz": "20 kHz", "require": [SLEW_20K_5V]}
SWITCH_150MA = {
    "search": "transistor",
    "collector_current_a": 0.15,
    "drive_high_v": 3.3,
    "driver_current_max_a": "8 mA",
}
LEDS_3_ON_9V = {"led": {}, "supply_v": 9, "leds_in_series": 3, "current_a": "15 mA"}


def select(client: FlaskClient, calculation: str, body: dict[str, Any]) -> dict[str, Any]:
    response = client.post(f"/v1/select/{calculation}", json=body)
    assert response.status_code == 200, response.get_json()
    return response.get_json()


def ids(candidates: list[dict[str, Any]]) -> list[str]:
    return [c["part_id"] for c in candidates]


def test_op_amps_that_keep_20_khz_at_gain_50_without_slew_limiting(client: FlaskClient, seeded: Any) -> None:
    # Bandwidth at noise gain 50: f = GBW/50 + GBW/A0 must reach 20 kHz (signal_in_band).
    #   jfet-4mhz        4.5e6/50 + 4.5e6/1.2e5 = 90 037.5 Hz   margin (90 037.5 - 20 000)/90 037.5 = 0.778
    #   rrio-3mhz        2.5e6/50 + 2.5e6/8e4   = 50 031.25 Hz  margin 0.600
    #   general-1mhz     1.2e6/50 + 1.2e6/1.5e5 = 24 008 Hz     margin 0.167
    #   micropower       1.2e5/50 + 1.2e5/6e4   =  2 402 Hz     fails
    # 5 V peak at 20 kHz needs 2π · 20e3 · 5 = 628 319 V/s (slew_rate, Sedra & Smith, Microelectronic
    # Circuits, 7th ed., §2.8.4, from memory):
    #   jfet 12 V/µs margin 0.948; rrio 1.8 V/µs margin (1.8e6 - 628 319)/1.8e6 = 0.651; general 0.6 V/µs
    #   margin -0.047 (fails); micropower 0.06 V/µs margin -9.47 (fails). No supply_v: output_swing and the
    #   supply range do not apply.
    data = select(client, "closed-loop-bandwidth", OPAMPS_GAIN_50)
    assert data["evaluated"] == 4 and data["passing"] == 2 and data["role"] == "opamp"
    assert data["filter"] == {"status": ["approved"], "where": {}}
    assert ids(data["candidates"]) == [
        "opamp-jfet-4mhz",
        "opamp-rrio-3mhz",
        "opamp-general-1mhz",
        "opamp-micropower-100khz",
    ]
    jfet, rrio, general, micro = data["candidates"]
    assert (jfet["limiting_check"], jfet["margin"]) == ("signal_in_band", pytest.approx(70_037.5 / 90_037.5))
    assert (rrio["limiting_check"], rrio["margin"]) == ("signal_in_band", pytest.approx(30_031.25 / 50_031.25))
    assert general["failing"] == ["slew-limit.slew_rate"] and general["margin"] == pytest.approx(
        1 - 2e5 * math.pi / 6e5
    )
    assert micro["failing"] == ["signal_in_band", "slew-limit.slew_rate"]
    assert jfet["ok"] and rrio["ok"] and not general["ok"] and not micro["ok"]
    assert jfet["results"]["bandwidth_hz"] == pytest.approx(90_037.5)
    assert jfet["required_results"]["slew-limit"]["required_slew_rate_v_per_s"] == pytest.approx(2e5 * math.pi)
    assert data["require"][0]["inputs"]["frequency_hz"] == 20_000.0
    assert "slew-limit.slew_rate" in data["check_details"]


def test_rank_by_a_result_and_only_passing(client: FlaskClient, seeded: Any) -> None:
    # Passing ones by bandwidth, lowest first: rrio 50 031 Hz, then jfet 90 038 Hz (derived above).
    body = {**OPAMPS_GAIN_50, "rank_by": "bandwidth_hz", "order": "asc", "only_passing": True}
    data = select(client, "closed-loop-bandwidth", body)
    assert ids(data["candidates"]) == ["opamp-rrio-3mhz", "opamp-jfet-4mhz"]
    assert (data["rank_by"], data["order"]) == ("bandwidth_hz", "asc")
    by_slew = select(
        client, "closed-loop-bandwidth", {**OPAMPS_GAIN_50, "rank_by": "slew-limit.slew_limited_amplitude_v"}
    )
    assert ids(by_slew["candidates"])[:2] == ["opamp-jfet-4mhz", "opamp-rrio-3mhz"]
    assert len(select(client, "closed-loop-bandwidth", {**OPAMPS_GAIN_50, "limit": 1})["candidates"]) == 1


def test_transistors_that_saturate_150_ma_from_an_8_ma_pin(client: FlaskClient, seeded: Any) -> None:
    # With defaults each part is designed at its own Vce(sat) test ratio over (1 + 5 %) for a high E24 resistor
    # (common practice). The Darlington (tested at Ic/Ib = 250) needs 150 mA × 1.05 / 250 = 0.63 mA:
    # Rb = E24 at or below (3.3 - 1.7) V / 0.63 mA = 2540 Ω -> 2.4 kΩ; the pin gives 1.6 V / 2.4 kΩ = 0.667 mA,
    # at most (3.3 - (1.7 - 2 × 0.2)) V / (2.4 kΩ × 0.95) = 0.877 mA hot (2 mV/K over 100 K, from memory).
    # Its least margin is Ic/Ib = 150 mA / 0.667 mA = 225 against the test ratio 250: 10 %.
    # The single-transistor parts (test ratio 10) ask about 16-17 mA of the 8 mA pin and fail driver_current.
    data = select(client, "bjt-switch", SWITCH_150MA)
    assert data["passing"] == 1
    assert ids(data["candidates"])[0] == "npn-darlington-1a"
    darlington, *others = data["candidates"]
    assert darlington["ok"] and darlington["results"]["rb_ohm"] == 2400.0
    assert darlington["results"]["drive_current_a"] == pytest.approx(1.6 / 2400)
    assert darlington["results"]["drive_current_max_a"] == pytest.approx(2.0 / 2280)
    assert (darlington["limiting_check"], darlington["margin"]) == ("vce_sat_guarantee", pytest.approx(0.1))
    assert all(c["failing"] == ["driver_current"] for c in others)
    assert all(c["results"]["drive_current_a"] > 0.015 for c in others)
    assert any("damage the microcontroller" in caution for caution in others[0]["cautions"])
    assert data["excluded"] == [
        {"part_id": "pnp-small-signal", "revision": 1, "status": "approved",
         "reason": "polarity is 'pnp'; the transistor role needs 'npn'"}
    ]  # fmt: skip

    # The candidate's request reproduces it through the calculation endpoint, part pinned by revision.
    request = darlington["request"]
    assert request["transistor"] == "npn-darlington-1a" and request["transistor_revision"] == 1
    single = client.post("/v1/calc/bjt-switch", json=request).get_json()
    assert single["results"] == darlington["results"]
    assert min(c["margin"] for c in single["checks"]) == pytest.approx(darlington["margin"])


def test_leds_three_in_series_on_9_v(client: FlaskClient, seeded: Any) -> None:
    # 3 × Vf_typ must stay below 9 V: red 6.3 V and deep red 6.9 V do; blue (9.3 V), green, white and royal
    # blue (9.0 V) cannot light, and the core refuses them with its own numbers (no 422 for the whole search).
    # Red: R = (9 - 6.3)/15 mA = 180 Ω (E24); worst current (9 - 3 × 1.9)/(180 × 0.95) = 19.3 mA of 30 mA,
    # margin 0.357 (E24's 5 % resistor tolerance, common practice). Deep red: 2.1 V/15 mA = 140 Ω, up to the
    # E24 150 Ω; worst (9 - 3 × 2.0)/(150 × 0.95) = 21.1 mA of 500 mA, margin 0.958; its tightest check is its
    # junction there: 2.0 V × 21.1 mA = 42 mW per LED through 10 + 40 K/W, 25 + 2.1 = 27.1 °C against
    # 125 - 20 = 105 °C (the coupled point moves it by under 0.01 K), margin 0.742.
    data = select(client, "led-string", LEDS_3_ON_9V)
    assert ids(data["candidates"]) == [
        "led-deep-red-grow-1w", "led-red-5mm",
        "led-blue-5mm", "led-green-5mm", "led-royal-blue-grow-1w", "led-white-5mm",
    ]  # fmt: skip
    deep_red, red, *dark = data["candidates"]
    assert data["passing"] == 2 and deep_red["ok"] and red["ok"]
    assert deep_red["limiting_check"] == "led_junction_temperature"
    assert deep_red["margin"] == pytest.approx(1 - (25 + 50 * 2.0 * 3 / 142.5) / 105, rel=1e-3)
    # Red's worst string warms by itself (350 K/W, -2 mV/K per LED): a first pass 350 × 1.9 V × 19.3 mA = 12.8 K,
    # a second 350 × 1.874 V × 19.75 mA = 12.96 K, so (3.3 + 3 × 0.002 × 12.96) V / 171 Ω = 19.75 mA of 30 mA.
    assert red["margin"] == pytest.approx(1 - ((3.3 + 3 * 0.002 * 12.96) / 171) / 0.03, rel=1e-3)
    assert (deep_red["results"]["resistor_ohm"], red["results"]["resistor_ohm"]) == (150, 180)
    assert any("eye safety" in caution for caution in deep_red["cautions"])  # a 1 W class LED
    for candidate in dark:
        assert candidate["failing"] == ["physically_possible"] and candidate["results"] is None
        assert candidate["margin"] is None and candidate["limiting_check"] is None
    assert "(9.3 V = 3 × 3.1 V + 0 V)" in dark[0]["problem"]["supply_v"][0]
    assert "(9 V = 3 × 3 V + 0 V)" in dark[3]["problem"]["supply_v"][0]
    assert ids(select(client, "led-string", {**LEDS_3_ON_9V, "only_passing": True})["candidates"]) == ids(
        [deep_red, red]
    )

    single = client.post("/v1/calc/led-string", json=red["request"]).get_json()
    assert single["results"] == red["results"] and single["cautions"] == red["cautions"]


def test_explicit_values_override_every_candidate(client: FlaskClient, seeded: Any) -> None:
    # Search supplies with supply_v given: every candidate runs at 9 V and gives only its tolerance. Red LEDs,
    # 3 in series at 15 mA: headroom 9 - 6.3 = 2.7 V for all; R = 2.7 V/15 mA = 180 Ω (E24); worst current
    # (9 (1 + t) - 5.7)/(180 × 0.95): adapters (t = 0.05) 21.9 mA; the battery pack gives a band (for the channel
    # review), no tolerance: 19.3 mA.
    body = {"supply": {}, "supply_v": 9, "led": "led-red-5mm", "leds_in_series": 3, "current_a": 0.015}
    data = select(client, "led-string", body)
    assert data["from_candidates"] == ["supply_tolerance"] and data["inputs"]["supply_v"] == 9
    assert [c["results"]["headroom_v"] for c in data["candidates"]] == pytest.approx([2.7] * len(data["candidates"]))
    worst = {c["part_id"]: c["results"]["current_max_a"] for c in data["candidates"]}
    assert worst["supply-adapter-5v-1a"] == pytest.approx(3.75 / 171)
    assert worst["supply-battery-9v-6aa"] == pytest.approx(3.3 / 171)
    assert data["parts"] == [{"role": "led", "part_id": "led-red-5mm", "revision": 1, "status": "approved"}]


def test_filter_bounds_take_units_and_lists_name_parts(client: FlaskClient, seeded: Any) -> None:
    # At least 2 MHz and at most 5 V/µs: only rrio-3mhz (3 MHz, 1.5 V/µs); jfet slews at 13 V/µs.
    where = {"gbw_hz": {"min": "2 MHz"}, "slew_rate_v_per_s": {"max": "5 V/us"}}
    data = select(client, "closed-loop-bandwidth", {**OPAMPS_GAIN_50, "opamp": {"where": where}})
    assert ids(data["candidates"]) == ["opamp-rrio-3mhz"]
    assert data["filter"]["where"] == {"gbw_hz": {"min": 2e6}, "slew_rate_v_per_s": {"max": 5e6}}
    none = select(client, "closed-loop-bandwidth", {**OPAMPS_GAIN_50, "opamp": {"where": {"gbw_hz": {"min": "1 GHz"}}}})
    assert (none["evaluated"], none["candidates"]) == (0, [])
    listed = select(client, "bjt-switch", {**SWITCH_150MA, "transistor": ["pnp-small-signal", "npn-small-signal"]})
    assert ids(listed["candidates"]) == ["npn-small-signal"] and listed["filter"] == {
        "part_ids": ["pnp-small-signal", "npn-small-signal"]
    }
    assert [e["part_id"] for e in listed["excluded"]] == ["pnp-small-signal"]


def test_a_required_calculation_can_refuse_a_candidate(client: FlaskClient, seeded: Any) -> None:
    # On a 3 V rail span an output 1.6 V short of each rail has no room to swing: the slew calculation refuses
    # jfet-4mhz (3 V ≤ 2 × 1.6 V) but takes the others. 1 V peak at 20 kHz needs 2π · 20e3 · 1 = 125.7 kV/s
    # (Sedra & Smith, 7th ed., §2.8.4, from memory): rrio passes (its worst margin is the swing,
    # (1.5 - 0.04 - 1)/1.46 = 0.315); micropower fails (60 kV/s; 2 402 Hz bandwidth, margin -7.33); general
    # fails worse (swing 1.5 - 1.4 = 0.1 V, margin -9; 3 V is also below its 6 V supply minimum).
    # The refused one comes last.
    slew = {"calculation": "slew-limit", "inputs": {"frequency_hz": 20e3, "amplitude_v": 1, "supply_v": 3}}
    data = select(client, "closed-loop-bandwidth", {**OPAMPS_GAIN_50, "require": [slew]})
    assert ids(data["candidates"]) == [
        "opamp-rrio-3mhz",
        "opamp-micropower-100khz",
        "opamp-general-1mhz",
        "opamp-jfet-4mhz",
    ]
    rrio, _, general, jfet = data["candidates"]
    assert (rrio["limiting_check"], rrio["margin"]) == ("slew-limit.output_swing", pytest.approx(0.46 / 1.46))
    assert "slew-limit.opamp_supply_min" in general["failing"] and "slew-limit.output_swing" in general["failing"]
    assert jfet["failing"] == ["slew-limit.physically_possible"] and jfet["results"]["bandwidth_hz"] == 90_037.5
    assert "slew-limit.supply_v" in jfet["problem"] and jfet["required_results"] == {"slew-limit": None}


def test_drafts_are_searched_only_when_asked(client: FlaskClient, seeded: Any, tokens: dict[str, str]) -> None:
    part = {"part_id": "opamp-draft-10mhz", "kind": "opamp", "parameters": {
        "gbw_hz": 1e7, "slew_rate_v_per_s": 2e7, "open_loop_gain": 1e5, "supply_min_v": 5, "supply_max_v": 36,
        "output_headroom_v": 1.0}}  # fmt: skip
    assert client.post("/v1/parts", json=part, headers=bearer(tokens["edna"])).status_code == 201
    approved = select(client, "closed-loop-bandwidth", OPAMPS_GAIN_50)
    assert "opamp-draft-10mhz" not in ids(approved["candidates"])
    both = select(client, "closed-loop-bandwidth", {**OPAMPS_GAIN_50, "opamp": {"status": ["approved", "draft"]}})
    # 1e7/50 + 1e7/1e5 = 200 100 Hz: margin (200 100 - 20 000)/200 100 = 0.900, the best; it is flagged as a draft.
    best = both["candidates"][0]
    assert (best["part_id"], best["status"]) == ("opamp-draft-10mhz", "draft")
    assert best["warnings"][0] == "opamp 'opamp-draft-10mhz' revision 1 is draft, not approved"


def opamps(**change: Any) -> tuple[str, dict[str, Any]]:
    return "closed-loop-bandwidth", {**OPAMPS_GAIN_50, **change}


@pytest.mark.parametrize(
    ("calculation", "body", "field"),
    [
        (*opamps(opamp={"where": {"gbw_khz": {"min": 1}}}), "opamp.where.gbw_khz"),
        (*opamps(opamp={"where": {"gbw_hz": {"min": "2 mA"}}}), "opamp.where.gbw_hz.min"),
        (*opamps(opamp={"where": {"gbw_hz": {"min": 2, "max": 1}}}), "opamp.where.gbw_hz.max"),
        (*opamps(opamp={"status": ["reviewed"]}), "opamp.status.0"),
        (*opamps(opamp={}, opamp_revision=1), "opamp_revision"),
        (*opamps(rank_by="slew-limit.full_power_bandwidth_hz", require=[]), "rank_by"),
        (*opamps(require=[{"calculation": "led-string", "inputs": {}}]), "require.0.calculation"),
        (*opamps(require=[{**SLEW_20K_5V, "inputs": {"amplitude_v": "5 A"}}]), "require.0.inputs.amplitude_v"),
        (*opamps(require=[{**SLEW_20K_5V, "inputs": {"waveform": "triangle"}}]), "require.0.inputs.frequency_hz"),
        (*opamps(require=[SLEW_20K_5V, SLEW_20K_5V]), "require.1.calculation"),
        (*opamps(opamp=["opamp-rrio-3mhz", "led-red-5mm"]), "opamp"),
        (*opamps(opamp=None), "search"),
        (*opamps(gain=None), "gain"),  # the same for every candidate: the request's own fault
        ("bjt-switch", {**SWITCH_150MA, "driver": {}}, "search"),
        ("bjt-switch", {**SWITCH_150MA, "transistor": {}, "driver": {}}, "driver"),
        ("led-string", {**LEDS_3_ON_9V, "current_a": None}, "current_a"),
    ],
)
def test_bad_searches_name_the_field(
    client: FlaskClient, seeded: Any, calculation: str, body: dict[str, Any], field: str
) -> None:
    body = {k: v for k, v in body.items() if v is not None}
    assert_problem(client.post(f"/v1/select/{calculation}", json=body), 422, field)


def test_unknown_listed_part_is_not_found(client: FlaskClient, seeded: Any) -> None:
    body = {**OPAMPS_GAIN_50, "opamp": ["opamp-rrio-3mhz", "opamp-missing"]}
    assert_problem(client.post("/v1/select/closed-loop-bandwidth", json=body), 404, "opamp")


def test_searches_beyond_the_configured_size_are_refused(app: Flask, client: FlaskClient, seeded: Any) -> None:
    app.config["SELECT_MAX_COMBINATIONS"] = 3
    assert_problem(client.post("/v1/select/closed-loop-bandwidth", json=OPAMPS_GAIN_50), 413)  # 4 op-amps
    body = {**DEMO, "led": {}, "samples": 0}  # 6 LEDs
    assert_problem(client.post("/v1/select/channel", json=body), 413)
    app.config["SELECT_MAX_COMBINATIONS"] = 6
    assert client.post("/v1/select/channel", json=body).status_code == 200


# ---- whole channels ----------------------------------------------------------------------------------------

# The demo's channel (3.3 V pin sourcing 10 mA, two strings of three LEDs at 20 mA, six channels at 50 %, the
# preamp) over every seeded supply × npn transistor × LED: 3 × 4 × 6 = 72 designs. By hand:
# - 5 V adapter: 3 × Vf_typ ≥ 6.3 V > 5 V for every LED, so the core refuses all 24.
# - 9 V pack (band 6.0-9.6 V): blue, green, white and royal blue (3 × Vf_typ + Vce_sat ≥ 9.25 V > 9 V) are refused
#   (16); red and deep red fail headroom at the end of discharge: 6.0 - 3 × 2.5 - Vce_sat < 0 < 10 % of 6.0 V (8).
# - 12 V adapter (±5 %): blue, green, white, royal blue fail headroom at the low corner, 11.4 - 3 × Vf_max (≥ 10.5)
#   - Vce_sat ≤ 0.65 V < 1.14 V (16). Red and deep red pass (8): e.g. red on the small-signal part,
#   (12 - 6.3 - 0.25) V / 20 mA = 272.5 -> 300 Ω, worst current (12.6 - 5.7 - 0.25)/285 = 23.3 mA ≤ 30 mA.
# A passing design's least margin is Ic/Ib against its transistor's Vce(sat) test ratio (vce_sat_guarantee: the
# base is sized at the ratio over 1 + 5 %, so only the E24 rounding of Rb adds margin), or, where the strings
# draw most (deep red on the medium-power part), the pin's current at its stress corner (driver_current).
CHANNEL_SEARCH = {**DEMO, "supply": {}, "transistor": {}, "led": {}, "samples": 0, "limit": 100}


def channel_select(client: FlaskClient, body: dict[str, Any]) -> dict[str, Any]:
    response = client.post("/v1/select/channel", json=body)
    assert response.status_code == 200, response.get_json()
    return response.get_json()


def test_channel_search_ranks_the_seeded_designs(client: FlaskClient, seeded: Any) -> None:
    data = channel_select(client, CHANNEL_SEARCH)
    assert data["combinations"] == 72 and data["candidates"] == {"supply": 3, "transistor": 4, "led": 6}
    assert [e["part_id"] for e in data["excluded"]["transistor"]] == ["pnp-small-signal"]
    designs = data["designs"]
    refused = [d for d in designs if d["failing"] == ["physically_possible"]]
    passing = [d for d in designs if d["verdict"] == "pass"]
    assert (data["passing"], len(passing), len(refused), len(designs)) == (8, 8, 40, 72)
    assert designs[:8] == passing and designs[-40:] == refused
    parts = [{p["role"]: p["part_id"] for p in d["parts"]} for d in passing]
    assert {p["supply"] for p in parts} == {"supply-adapter-12v-2a"}
    assert {(p["transistor"], p["led"]) for p in parts} == {
        (t, led) for t in ("npn-small-signal", "npn-medium-power", "npn-power-tab", "npn-darlington-1a")
        for led in ("led-red-5mm", "led-deep-red-grow-1w")
    }  # fmt: skip
    assert all(0 < d["margin"] < 0.1 for d in passing)
    assert {d["limiting_check"] for d in passing} == {"vce_sat_guarantee", "driver_current"}
    assert [d["margin"] for d in passing] == sorted((d["margin"] for d in passing), reverse=True)
    supplies = Counter({p["role"]: p["part_id"] for p in d["parts"]}["supply"] for d in refused)
    assert supplies == {"supply-adapter-5v-1a": 24, "supply-battery-9v-6aa": 16}
    # Refused in role order: the 5 V adapter, the darlington (1 V drop), blue LEDs first.
    assert "(10.4 V = 3 × 3.1 V + 1.1 V)" in refused[0]["problem"]["supply_v"][0]
    failing = designs[8:32]
    assert [d["margin"] for d in failing] == sorted((d["margin"] for d in failing), reverse=True)
    assert {d["limiting_check"] for d in failing} == {"headroom"}


def test_best_channel_design_reruns_identically_through_the_review(client: FlaskClient, seeded: Any) -> None:
    data = channel_select(client, CHANNEL_SEARCH)
    margins = []
    for design in data["designs"][:8]:
        review = client.post("/v1/review/channel", json=design["request"]).get_json()
        assert review["parts"] == design["parts"] and review["verdict"] == design["verdict"] == "pass"
        assert review["failing"] == design["failing"]
        worst = sorted((c["worst_case"]["margin"], c["name"]) for c in review["checks"])
        assert (worst[0][1], worst[0][0]) == (design["limiting_check"], pytest.approx(design["margin"], abs=1e-12))
        margins.append(worst[0][0])
        stages, numbers = review["stages"], design["numbers"]
        assert numbers == pytest.approx({
            "resistor_ohm": stages["led_string"]["resistor_ohm"],
            "string_current_a": stages["led_string"]["current_a"],
            "rb_ohm": stages["switch"]["rb_ohm"],
            "drive_current_a": stages["switch"]["drive_current_a"],
            "transistor_power_w": stages["switch"]["transistor_power_w"],
            "supply_average_current_a": stages["supply"]["average_current_a"],
            "supply_power_w": stages["supply"]["average_power_w"],
            "led_junction_c": stages["thermal"]["led_junction_c"],
            "transistor_junction_c": stages["thermal"]["transistor_junction_c"],
            "resistor_hot_spot_c": stages["thermal"]["resistor_hot_spot_c"],
            "max_duty_cycle": review["max_duty_cycle"],
        }, rel=1e-12)  # fmt: skip
        assert design["cautions"] == review["cautions"]
    # Ranked by the least margin, descending.
    assert margins == sorted(margins, reverse=True)


GROW_SEARCH = {
    **DEMO, "led": "led-deep-red-grow-1w", "transistor": {}, "current_a": "200 mA", "duty_cycle": 1.0,
    "channels": 1, "samples": 0,
}  # fmt: skip


def test_channel_search_judges_each_candidate_at_the_given_ambient(client: FlaskClient, seeded: Any) -> None:
    # Two strings of three 1 W-class LEDs at 200 mA: the Darlington drops 1.1 V at 0.4 A, about 0.5 W in
    # 140 K/W, so its junction keeps 20 K below 150 °C at 25 °C ambient but not at 55 °C.
    def darlington(body: dict[str, Any]) -> dict[str, Any]:
        designs = channel_select(client, body)["designs"]
        used = [{p["role"]: p["part_id"] for p in d["parts"]} for d in designs]
        return next(d for d, parts in zip(designs, used, strict=True) if parts["transistor"] == "npn-darlington-1a")

    cool = darlington({**GROW_SEARCH, "ambient_c": 25})
    assert cool["verdict"] == "pass"
    hot = darlington({**GROW_SEARCH, "ambient_c": "55 degC"})
    assert hot["verdict"] == "fail" and "transistor_junction_temperature" in hot["failing"]
    assert hot["numbers"]["transistor_junction_c"] > cool["numbers"]["transistor_junction_c"] + 30.0
    only = channel_select(client, {**GROW_SEARCH, "ambient_c": 55, "only_passing": True})["designs"]
    # The Darlington, the only design passing at 25 °C (the others overdrive the 3.3 V pin), is left out at 55 °C.
    assert only == []


def test_channel_rank_by_supply_power(client: FlaskClient, seeded: Any) -> None:
    # Average supply power = 12 V × 6 channels × 2 strings × I × 0.5 with I = (12 - 3 Vf_typ - Vce_sat)/R and R
    # the E24 value at or above that drop / 20 mA. Small-signal part (Vce_sat 0.25 V) with deep red (2.3 V):
    # 4.85 V/20 mA = 242.5 -> 270 Ω, 17.96 mA, 1.293 W; with red (2.1 V): 5.45 V -> 300 Ω, 1.308 W; power tab
    # (0.6 V) with deep red: 4.5 V -> 240 Ω, 1.35 W. The others draw more (up to the darlington, 1.1 V, with deep
    # red: 4.0 V -> 200 Ω, 20 mA, 1.44 W).
    data = channel_select(client, {**CHANNEL_SEARCH, "rank_by": "supply_power_w", "only_passing": True})
    powers = [d["numbers"]["supply_power_w"] for d in data["designs"]]
    assert powers == sorted(powers) and len(powers) == 8
    assert powers[:3] == pytest.approx([12 * 6 * 2 * 0.5 * i for i in (4.85 / 270, 5.45 / 300, 4.5 / 240)])
    first = {p["role"]: p["part_id"] for p in data["designs"][0]["parts"]}
    assert (first["transistor"], first["led"]) == ("npn-small-signal", "led-deep-red-grow-1w")
    assert powers[-1] == pytest.approx(1.44)


def test_channel_rank_by_yield(client: FlaskClient, seeded: Any) -> None:
    # A design passing at every corner yields exactly 1 (every build lies inside the corners' box); the
    # shortlist of ten by margin holds the eight passing designs and the two nearest misses, re-ranked.
    body = {**CHANNEL_SEARCH, "rank_by": "yield", "samples": 400, "seed": 3, "limit": 12}
    data = channel_select(client, body)
    designs = data["designs"]
    yields = [d["yield"]["fraction"] for d in designs[:10]]
    assert yields == sorted(yields, reverse=True) and yields[:8] == [1.0] * 8 and yields[9] < 1.0
    assert all(d["yield"] is None for d in designs[10:])
    assert designs[9]["request"]["samples"] == 400 and designs[9]["request"]["seed"] == 3
    review = client.post("/v1/review/channel", json=designs[9]["request"]).get_json()
    assert review["yield"]["fraction"] == designs[9]["yield"]["fraction"]
    assert_problem(client.post("/v1/select/channel", json={**body, "samples": 0}), 422, "rank_by")


@pytest.mark.parametrize(
    ("change", "field", "status"),
    [
        ({"supply": "supply-adapter-12v-2a", "transistor": "npn-small-signal", "led": "led-red-5mm"}, "body", 422),
        ({"transistor_revision": 1}, "transistor_revision", 422),
        ({"strings": 1000, "samples": 100_000}, "samples", 422),
        ({"led": {"where": {"if_max_a": {"min": "2 V"}}}}, "led.where.if_max_a.min", 422),
        ({"supply": ["supply-adapter-12v-2a", "supply-missing"]}, "supply", 404),
    ],
)
def test_bad_channel_searches_name_the_field(
    client: FlaskClient, seeded: Any, change: dict[str, Any], field: str, status: int
) -> None:
    assert_problem(client.post("/v1/select/channel", json={**CHANNEL_SEARCH, **change}), status, field)
