"""The channel review with an N-MOSFET as its switch, over HTTP: the greenhouse grow-light channel at 350 mA per
string from a 3.3 V pin, its reports and page, the switch search for it, a 10 V-only part refused for that pin,
and a saved MOSFET design re-reviewed and judged on a part edit."""

from __future__ import annotations

import json
from html import unescape
from pathlib import Path
from typing import Any
from urllib.parse import urlencode

import pytest
from flask.testing import FlaskClient
from helpers import assert_problem, bearer

from calcsvc.service.search.channel import MOSFET_NUMBERS, NUMBERS
from calcsvc.web.pages.channel import ChannelForm

DEMO = json.loads((Path(__file__).resolve().parents[2] / "examples" / "greenhouse-channel.json").read_text())
# The greenhouse grow-light channel: three strings of three royal-blue 1 W grow LEDs at 350 mA from the 12 V adapter,
# switched by a small logic-level MOSFET straight from the 3.3 V pin, dimmed at 2 kHz in 16 steps (a 10 mA pin
# charges 3 nC through its 360 Ω gate resistor in about a microsecond, so finer steps would be shorter than ten
# edges), with a 100 kΩ gate pull-down. The LEDs come from one reel binned 2.9–3.3 V (typical 3.1 V; the part's
# whole 2.7–3.6 V range leaves no headroom for three in series on 11.4 V), their boards sit on the fixture's
# aluminium bar (15 K/W board to air per LED instead of a bare star's 40) and the string resistors are 1 % parts:
# with 5 % ones, or bare stars, the hottest corner's string resistor needs more than the largest 5 W rating at the
# usual 2× derating.
MOSFET_CHANNEL = {
    **DEMO,
    "transistor": "nmos-logic-small",
    "led": "led-royal-blue-grow-1w",
    "vf_min_v": 2.9,
    "vf_typ_v": 3.1,
    "vf_max_v": 3.3,
    "leds_in_series": 3,
    "strings": 3,
    "current_a": "350 mA",
    "channels": 1,
    "pwm_frequency_hz": "2 kHz",
    "pwm_resolution_bits": 4,
    "gate_pulldown_ohm": "100 kohm",
    "led_rth_ba_k_per_w": 15,
    "resistor_tolerance": 0.01,
    "samples": 2000,
}
SMALL = {  # nmos-logic-small's seed values
    "vgs_1_v": 2.5, "rds_on_1_ohm": 0.1, "vgs_2_v": 4.5, "rds_on_2_ohm": 0.06, "qg_total_c": 3e-9,
    "vgs_th_max_v": 1.5, "rth_ja_k_per_w": 150.0, "tj_max_c": 150.0,
}  # fmt: skip


def review(client: FlaskClient, body: dict[str, Any]) -> dict[str, Any]:
    response = client.post("/v1/review/channel", json=body)
    assert response.status_code == 200, response.get_json()
    return response.get_json()


def test_grow_light_channel_on_a_logic_mosfet_passes_from_a_3v3_pin(client: FlaskClient, seeded: Any) -> None:
    data = review(client, MOSFET_CHANNEL)
    assert data["verdict"] == "pass", data["failing"]
    checks = {c["name"]: c for c in data["checks"]}
    switch = data["stages"]["switch"]
    # The pin's rated high level, 2.8 V, less the pull-down's share of 2.8 V over 390 Ω + 100 kΩ, reaches the
    # 2.5 V the part states its on-resistance at; between 2.5 V (0.1 Ω) and 4.5 V (0.06 Ω) linearly.
    gate_v = 2.8 * 100e3 / (100e3 + 390)
    # The gate resistor: the largest E24 value whose edges take a twentieth of the shortest pulse, 1/(2 kHz × 16)
    # / 20 = 1.5625 µs with Q = I·t: 3 nC at (0.75 V, the lowest threshold's share) gives 390.6 Ω → 390 Ω, above
    # the 3.3 V/(10 mA × 0.99) = 333 Ω the pin's rating needs.
    assert switch["rg_ohm"] == 390 and switch["gate_v"] == pytest.approx(2.8 * 100e3 / (100e3 + 390))
    assert switch["rds_on_ohm"] == pytest.approx(0.1 - (gate_v - 2.5) / 2.0 * 0.04)
    assert checks["gate_reaches_stated_drive"]["ok"] and checks["pin_peak_current"]["ok"]
    # Heat by hand: the thermal stage's MOSFET dissipation is conduction I²·R(Tj)·D plus switching loss, and its
    # junction is thermal Ohm's law Ta + P·Rθ with the part's 150 K/W.
    heat = data["stages"]["thermal"]
    assert heat["transistor_junction_c"] == pytest.approx(25 + heat["transistor_power_hot_w"] * 150.0)
    on = 3 * heat["led_current_hot_a"]  # three strings through the drain
    rds = switch["rds_on_ohm"]
    alpha = 0.007  # the on-resistance's rise per kelvin (from memory, ``on_resistance``)
    rds_hot = rds * (1 + alpha * (heat["transistor_junction_c"] - 25))
    switching = 12.0 * on * (switch["turn_on_s"] + switch["turn_off_s"]) * 2000 / 6
    assert heat["transistor_power_hot_w"] == pytest.approx(on**2 * rds_hot * 0.5 + switching, rel=1e-9)
    for name in ("transistor_junction_temperature", "transistor_derated_power"):
        assert checks[name]["part"] == "transistor" and checks[name]["ok"]
    assert checks["flicker_low_risk"]["ok"] and checks["shortest_pulse_covers_edges"]["ok"]
    # Full-depth PWM is low risk from 1250 Hz (IEEE Std 1789-2015, from memory): 2 kHz is 60 % clear of it, so the
    # flicker check is not what limits this design.
    flicker = checks["flicker_low_risk"]
    assert (flicker["value"], flicker["limit"], flicker["unit"]) == (2000, 1250, "Hz")
    assert flicker["margin"] == pytest.approx(0.6)
    assert not {"saturation", "collector_current_rating", "driver_current"} & set(checks)
    # The worst case of the switch's ratings is at the corners that stress each: the drain current where the LEDs
    # draw most (no drop in the switch), the pin where the gate resistor is low.
    assert checks["drain_current_rating"]["worst_case"]["corner"]["on_resistance"] == "none"
    assert checks["headroom"]["worst_case"]["corner"]["on_resistance"] == "max"
    assert checks["pin_peak_current"]["worst_case"]["corner"]["gate_resistor"] == "low"
    assert data["yield"]["fraction"] == 1.0
    items = {item["item"]: item for item in data["bill_of_materials"]["per_channel"]}
    assert items["gate_resistor"]["value_ohm"] == 390 and items["gate_pulldown"]["value_ohm"] == 100e3
    assert items["gate_resistor"]["rating_min_w"] == 0.125 and items["gate_pulldown"]["series"] == "E24"
    assert items["switch_transistor"]["part_id"] == "nmos-logic-small" and items["switch_transistor"]["revision"] == 1
    assert "base_resistor" not in items


def test_mosfet_reports_and_page_show_the_gate_losses_and_flicker(client: FlaskClient, seeded: Any) -> None:
    shown = ("Gate resistor 390 Ω", "Gate pull-down 100000 Ω", "On-resistance", "Conduction loss", "Switching loss",
             "Junction temperature", "flicker_low_risk", "PWM frequency 2000 Hz", "gate_pulldown")  # fmt: skip
    for accept in ("text/markdown", "text/html"):
        response = client.post("/v1/review/channel", json=MOSFET_CHANNEL, headers={"Accept": accept})
        assert response.status_code == 200 and response.mimetype == accept
        text = response.get_data(as_text=True)
        assert all(words in text for words in shown), [words for words in shown if words not in text]
    form = {k: str(v) for k, v in MOSFET_CHANNEL.items() if k in ChannelForm._declared_fields}
    page = client.get("/review/channel?" + urlencode(form))
    assert page.status_code == 200
    html = unescape(page.get_data(as_text=True))
    assert 'id="verdict">pass<' in html
    assert all(words in html for words in shown), [words for words in shown if words not in html]
    assert '<option value="nmos-logic-small" selected>' in html  # the switch select lists MOSFETs too


def test_standard_mosfet_is_refused_for_a_3v3_pin(client: FlaskClient, seeded: Any) -> None:
    # Stated only at 10 V gate drive: from a 2.8 V pin its on-resistance is not specified at all.
    response = client.post("/v1/review/channel", json={**MOSFET_CHANNEL, "transistor": "nmos-standard-10v"})
    problem = assert_problem(response, 422, "drive_high_v")
    assert "not a logic-level part for this pin" in problem["errors"]["drive_high_v"][0]


def test_both_switch_kinds_inputs_are_refused_naming_the_field(client: FlaskClient, seeded: Any) -> None:
    response = client.post("/v1/review/channel", json={**MOSFET_CHANNEL, "hfe_min": 100})
    assert_problem(response, 422, "hfe_min")


def test_explicit_mosfet_numbers_review_as_the_part_does(client: FlaskClient, seeded: Any) -> None:
    by_part = review(client, MOSFET_CHANNEL)
    explicit = {k: v for k, v in MOSFET_CHANNEL.items() if k != "transistor"}
    explicit |= {**SMALL, "vgs_3_v": 10.0, "rds_on_3_ohm": 0.045, "vds_max_v": 30.0, "id_max_a": 3.0,
                 "power_max_w": 0.8}  # fmt: skip
    by_numbers = review(client, explicit)
    assert by_numbers["checks"] == by_part["checks"]
    assert by_numbers["stages"]["switch"] == by_part["stages"]["switch"]


def test_switch_search_for_the_grow_light_channel_ranks_every_kind(client: FlaskClient, seeded: Any) -> None:
    # The switch carries the three strings at their worst-case current (the review's drain_current_rating).
    worst = review(client, MOSFET_CHANNEL)["stages"]["switch"]["drain_current_max_a"]
    body = {"load_current_a": worst, "supply_max_v": 12.6, "driver": "driver-mcu-3v3", "duty_cycle": 0.5,
            "pwm_frequency_hz": 2000, "pwm_resolution_bits": 4}  # fmt: skip
    response = client.post("/v1/select/switch", json=body)
    assert response.status_code == 200, response.get_json()
    candidates = response.get_json()["candidates"]
    found = {c["part_id"]: c for c in candidates}
    assert {"nmos-logic-small", "npn-darlington-1a", "npn-medium-power"} <= set(found)
    assert {found["nmos-logic-small"]["kind"], found["npn-darlington-1a"]["kind"]} == {"mosfet", "bjt"}
    assert candidates[0]["part_id"] == "nmos-logic-small" and candidates[0]["ok"]
    # The 1 A Darlington cannot carry 1.8 A: it is ranked, with the check it fails.
    assert not found["npn-darlington-1a"]["ok"] and "collector_current_rating" in found["npn-darlington-1a"]["failing"]


def test_saved_mosfet_design_rereviews_and_sees_a_part_edit(
    client: FlaskClient, seeded: Any, tokens: dict[str, str]
) -> None:
    body = {"design_id": "grow-light-mosfet", "description": "grow light on a MOSFET", "request": MOSFET_CHANNEL}
    saved = client.post("/v1/designs", json=body, headers=bearer(tokens["edna"]))
    assert saved.status_code == 201, saved.get_json()
    bipolar = {"design_id": "greenhouse-demo", "description": "six channels", "request": DEMO}
    assert client.post("/v1/designs", json=bipolar, headers=bearer(tokens["edna"])).status_code == 201
    direct = review(client, MOSFET_CHANNEL)
    assert saved.get_json()["review"]["fingerprint"] == direct["fingerprint"]
    again = client.get("/v1/designs/grow-light-mosfet/review").get_json()
    assert again["pinned"]["reproduced"] is True and again["pinned"]["verdict"] == "pass"
    # A draft that rates the part for 1.5 A: the worst-case 1.8 A drain current then fails its rating.
    current = client.get("/v1/parts/nmos-logic-small")
    parameters = {**current.get_json()["parameters"], "id_max_a": 1.5}
    headers = {**bearer(tokens["edna"]), "If-Match": current.headers["ETag"]}
    assert client.put("/v1/parts/nmos-logic-small", json={"parameters": parameters}, headers=headers).status_code == 200
    impact = client.get("/v1/parts/nmos-logic-small/impact").get_json()
    assert impact["summary"]["using"] == 1 and impact["summary"]["pass_to_fail"] == 1
    first = impact["designs"][0]
    assert first["design_id"] == "grow-light-mosfet" and first["after"]["failing"] == ["drain_current_rating"]
    # The part's review page shows the same impact above its approve button.
    page = unescape(client.get("/review/parts/nmos-logic-small").get_data(as_text=True))
    assert "grow-light-mosfet" in page and "drain_current_rating" in page
    # Both designs, one per switch kind, judged together on the watch list: neither fails at today's parts.
    assert client.get("/v1/designs?fails_at_current=true").get_json()["items"] == []


def test_channel_search_with_the_mosfet_held_fixed(client: FlaskClient, seeded: Any) -> None:
    # The LEDs searched around the fixed MOSFET: every candidate reviewed as the single review would.
    body = {**MOSFET_CHANNEL, "led": ["led-royal-blue-grow-1w", "led-deep-red-grow-1w"], "samples": 0}
    response = client.post("/v1/select/channel", json=body)
    assert response.status_code == 200, response.get_json()
    designs = response.get_json()["designs"]
    assert [d["verdict"] for d in designs] == ["pass", "fail"]
    best = designs[0]
    direct = review(client, best["request"])
    assert direct["verdict"] == "pass" and direct["stages"]["switch"]["rg_ohm"] == 390
    assert {p["part_id"] for p in best["parts"]} >= {"nmos-logic-small", "led-royal-blue-grow-1w"}


SEEDED_SWITCHES = ["npn-small-signal", "npn-medium-power", "npn-power-tab", "npn-darlington-1a", "pnp-small-signal",
                   "nmos-logic-small", "nmos-logic-power", "nmos-standard-10v"]  # fmt: skip


def test_channel_search_ranks_mosfet_and_bipolar_switches_together(client: FlaskClient, seeded: Any) -> None:
    body = {**MOSFET_CHANNEL, "transistor": SEEDED_SWITCHES, "samples": 0}
    response = client.post("/v1/select/channel", json=body)
    assert response.status_code == 200, response.get_json()
    data = response.get_json()
    assert [e["part_id"] for e in data["excluded"]["transistor"]] == ["pnp-small-signal"]
    designs = {next(p["part_id"] for p in d["parts"] if p["role"] == "transistor"): d for d in data["designs"]}
    assert len(designs) == data["combinations"] == 7
    ranked = list(designs)
    best = designs["nmos-logic-small"]
    assert best["verdict"] == "pass" and ranked[0] == "nmos-logic-small"
    assert all(ranked.index(t) > 0 for t in ranked if t.startswith("npn-"))
    # The outside check: every design is what the single review of its request says.
    for switch, design in designs.items():
        reviewed = client.post("/v1/review/channel", json=design["request"])
        if design["failing"] == ["physically_possible"]:
            assert reviewed.status_code == 422 and set(design["problem"]) == set(reviewed.get_json()["errors"])
            continue
        review = reviewed.get_json()
        assert reviewed.status_code == 200, review
        assert (review["verdict"], review["failing"]) == (design["verdict"], design["failing"]), switch
        worst = min((c["worst_case"]["margin"], c["name"]) for c in review["checks"])
        assert (worst[1], worst[0]) == (design["limiting_check"], pytest.approx(design["margin"], abs=1e-12))
        keys = MOSFET_NUMBERS if switch.startswith("nmos-") else NUMBERS
        stages = review["stages"]
        expected = {key: stages[stage][name] for key, (stage, name) in keys.items()}
        assert design["numbers"] == pytest.approx({**expected, "max_duty_cycle": review["max_duty_cycle"]}, rel=1e-12)
        # The MOSFET's gate pull-down is its own input: a bipolar design's request leaves it out.
        assert ("gate_pulldown_ohm" in design["request"]) == switch.startswith("nmos-")
    # Stated only at 10 V gate drive: refused for the 2.8 V pin, as the single review refuses it.
    refused = designs["nmos-standard-10v"]
    assert refused["failing"] == ["physically_possible"] and ranked[-1] == "nmos-standard-10v"
    assert "not a logic-level part for this pin" in refused["problem"]["drive_high_v"][0]


def test_channel_search_filter_reads_both_switch_kinds_when_asked(client: FlaskClient, seeded: Any) -> None:
    base = {**MOSFET_CHANNEL, "samples": 0}

    def designs(transistor: Any) -> list[Any]:
        response = client.post("/v1/select/channel", json={**base, "transistor": transistor})
        assert response.status_code == 200, response.get_json()
        return response.get_json()["designs"]

    # Every approved switch of both kinds, as listing them all.
    assert designs({"kind": ["bjt", "mosfet"]}) == designs(SEEDED_SWITCHES)
    # A filter reads the bipolar parts alone by default (without the MOSFET's own gate pull-down, then).
    base.pop("gate_pulldown_ohm")
    assert {p["part_id"] for d in designs({}) for p in d["parts"] if p["role"] == "transistor"} == {
        "npn-small-signal", "npn-medium-power", "npn-power-tab", "npn-darlington-1a"
    }  # fmt: skip
    # A bound on a parameter only MOSFETs have leaves the bipolar parts out: on-resistance stated from 2.5 V.
    low = designs({"kind": ["bjt", "mosfet"], "where": {"vgs_1_v": {"max": "2.5 V"}}})
    assert [next(p["part_id"] for p in d["parts"] if p["role"] == "transistor") for d in low] == ["nmos-logic-small"]


def test_a_mosfet_input_in_a_search_over_bipolar_switches_is_refused_naming_it(
    client: FlaskClient, seeded: Any
) -> None:
    # The gate pull-down belongs to a MOSFET; the filter reads bipolar parts only: the refusal names that input,
    # not the MOSFET parameters the bipolar candidates lack.
    response = client.post("/v1/select/channel", json={**MOSFET_CHANNEL, "samples": 0, "transistor": {}})
    problem = assert_problem(response, 422, "gate_pulldown_ohm")
    assert list(problem["errors"]) == ["gate_pulldown_ohm"] and "bjt parts only" in problem["detail"]


def test_a_bipolar_input_in_a_search_over_mosfets_is_refused_naming_it(client: FlaskClient, seeded: Any) -> None:
    # The reverse: a forced beta belongs to a bipolar switch, and the listed candidates are MOSFETs alone.
    body = {**MOSFET_CHANNEL, "samples": 0, "forced_beta": 20, "transistor": ["nmos-logic-small", "nmos-logic-power"]}
    problem = assert_problem(client.post("/v1/select/channel", json=body), 422, "forced_beta")
    assert list(problem["errors"]) == ["forced_beta"] and "mosfet parts only" in problem["detail"]


def test_a_mosfet_part_on_a_heat_sink_brings_its_junction_to_case_resistance(client: FlaskClient, seeded: Any) -> None:
    # nmos-logic-power states 3 K/W junction to case; on a 20 K/W sink its junction sees 23 K/W, not its 62 to air.
    body = {**MOSFET_CHANNEL, "transistor": "nmos-logic-power", "heatsink_k_per_w": 20, "pwm_resolution_bits": 3}
    # A 5 V gate driver: its on-resistance is stated from 4.5 V.
    body |= {"drive_high_v": 4.8, "drive_low_v": 0.2, "source_current_max_a": 0.02, "drive_supply_v": 5.0}
    body.pop("driver")
    data = review(client, body)
    heat = data["stages"]["thermal"]
    assert heat["transistor_junction_c"] == pytest.approx(25 + heat["transistor_power_hot_w"] * 23.0)


def test_a_pull_down_that_takes_the_gate_under_its_stated_drive_is_refused_naming_the_pin(
    client: FlaskClient, seeded: Any
) -> None:
    # nmos-logic-power states its on-resistance from 4.5 V; a 4.5 V pin less the 100 kΩ pull-down's share across
    # the gate resistor leaves the gate just under it, so no on-resistance is stated for the strings' design.
    body = {k: v for k, v in MOSFET_CHANNEL.items() if k != "driver"}
    body |= {"transistor": "nmos-logic-power", "drive_high_v": 4.5}
    problem = assert_problem(client.post("/v1/review/channel", json=body), 422, "drive_high_v")
    assert set(problem["errors"]) == {"drive_high_v"}
    message = problem["errors"]["drive_high_v"][0]
    assert "gate pull-down" in message and "vgs_1_v (4.5 V)" in message
    gate_v = float(message.split("leaves the gate at ")[1].split(" V")[0])
    assert 4.4 < gate_v < 4.5
