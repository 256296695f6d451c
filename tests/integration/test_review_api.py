"""The whole-channel review over HTTP: the greenhouse demo, an under-driven switch, and reports that agree
with the JSON number for number."""

from __future__ import annotations

import io
import json
import re
from pathlib import Path
from typing import Any

import pytest
from flask.testing import FlaskClient
from helpers import assert_problem
from PIL import Image

from calcsvc.core.channel_front import FRONT_STAGE_FIELDS

DEMO = json.loads((Path(__file__).resolve().parents[2] / "examples" / "greenhouse-channel.json").read_text())
EXPLICIT = {
    "supply_v": 12, "supply_tolerance": 0.05, "supply_min_v": 11.4, "supply_max_v": 12.6, "current_max_a": 2,
    "drive_high_v": 2.8, "drive_low_v": 0.2, "source_current_max_a": 0.01, "drive_supply_v": 3.3,
    "hfe_min": 80, "hfe_typ": 180, "vbe_sat_v": 0.9, "vce_sat_v": 0.25, "ic_max_a": 0.3, "power_max_w": 0.5,
    "vce_sat_forced_beta": 10, "base_junctions": 1, "vceo_max_v": 45,
    "td_s": 4e-8, "tr_s": 4e-8, "ts_s": 2.5e-7, "tf_s": 8e-8,
    "vf_typ_v": 2.1, "vf_min_v": 1.9, "vf_max_v": 2.5, "if_max_a": 0.03,
    "tj_max_c": 150, "rth_ja_k_per_w": 250, "led_tj_max_c": 100, "led_rth_jb_k_per_w": 200, "led_rth_ba_k_per_w": 150,
    "vf_tempco_v_per_k": -0.002, "if_derating_knee_c": 60,
    "leds_in_series": 3, "strings": 2, "current_a": 0.02, "duty_cycle": 0.5, "channels": 6, "samples": 2000,
}  # fmt: skip


def review(client: FlaskClient, body: dict[str, Any]) -> dict[str, Any]:
    response = client.post("/v1/review/channel", json=body)
    assert response.status_code == 200, response.get_json()
    return response.get_json()


def test_greenhouse_demo_passes_with_every_stage(client: FlaskClient, seeded: Any) -> None:
    data = review(client, DEMO)
    assert data["verdict"] == "pass" and data["failing"] == []
    assert set(data["stages"]) == {"led_string", "switch", "supply", "front_stage", "thermal"}
    assert {c["stage"] for c in data["checks"]} == {"led_string", "switch", "supply", "front_stage", "thermal"}
    assert {p["role"] for p in data["parts"]} == {"supply", "driver", "transistor", "led", "opamp"}
    # (12 - 3 x 2.1 - 0.25) V / 20 mA = 272.5 ohm, rounded up to the E24 value 300 ohm (IEC 60063).
    assert data["stages"]["led_string"]["resistor_ohm"] == 300.0
    # Six channels of 2 x 18.17 mA at 50 % on a 2 A adapter: every channel could run at 100 %.
    assert data["stages"]["supply"]["average_current_a"] == pytest.approx(6 * 2 * 5.45 / 300 * 0.5)
    assert data["max_duty_cycle"] == 1.0
    assert data["yield"]["fraction"] == 1.0 and data["yield"]["samples"] == 10_000
    assert len(data["fingerprint"]) == 64
    # The op-amp (rated 6-30 V) runs from the adapter's 11.4-12.6 V: each end checked at its own corner.
    checks = {c["name"]: c for c in data["checks"]}
    assert checks["opamp_supply_min"]["worst_case"]["value"] == pytest.approx(11.4)
    assert checks["opamp_supply_min"]["worst_case"]["corner"] == {"supply": "low"}
    assert checks["opamp_supply_min"]["worst_case"]["limit"] == 6.0
    assert checks["opamp_supply_max"]["worst_case"]["value"] == pytest.approx(12.6)
    assert checks["opamp_supply_max"]["worst_case"]["limit"] == 30.0
    # Output offset: 2.5 mV × noise gain 20 (Franco, 3rd ed., §5.4, from memory), A0 150 000 V/V.
    assert data["stages"]["front_stage"]["output_offset_v"] == pytest.approx(0.05 / (1 + 20 / 150_000))


HEAT_RESULTS = (
    "led_junction_c", "led_current_limit_a", "transistor_junction_c", "transistor_derated_limit_w",
    "resistor_hot_spot_c", "resistor_derated_limit_w", "thermal_iterations", "max_ambient_c",
)  # fmt: skip


def test_greenhouse_demo_at_45_c_shows_every_parts_temperature_and_derated_limit(
    client: FlaskClient, seeded: Any
) -> None:
    data = review(client, {**DEMO, "ambient_c": "45 degC", "samples": 500})
    heat = data["stages"]["thermal"]
    assert heat["ambient_c"] == 45.0
    assert all(isinstance(heat[name], float) for name in HEAT_RESULTS), heat
    # Every part is warmer than the air; the transistor's rating is derated to (150 − 45)/250 W (thermal Ohm's law).
    assert min(heat["led_junction_c"], heat["transistor_junction_c"], heat["resistor_hot_spot_c"]) > 45.0
    assert heat["transistor_derated_limit_w"] == pytest.approx(105 / 250)
    thermal = {c["name"]: c for c in data["checks"] if c["stage"] == "thermal"}
    assert {c["part"] for c in thermal.values()} == {"led", "transistor", "string resistor"}
    assert data["max_ambient_c"] == heat["max_ambient_c"]
    assert any("warm enclosure" in caution for caution in data["cautions"])
    assert any("datasheet" in caution for caution in data["cautions"])


GROW_CHANNEL = {
    **DEMO, "transistor": "npn-darlington-1a", "led": "led-deep-red-grow-1w", "current_a": "200 mA",
    "duty_cycle": 1.0, "channels": 1, "samples": 0,
}  # fmt: skip


def test_a_design_passing_at_25_c_and_failing_at_55_c_names_the_check_the_part_and_the_largest_ambient(
    client: FlaskClient, seeded: Any
) -> None:
    cool = review(client, {**GROW_CHANNEL, "ambient_c": 25})
    assert cool["verdict"] == "pass", cool["failing"]
    assert 25.0 < cool["max_ambient_c"] < 55.0
    hot = review(client, {**GROW_CHANNEL, "ambient_c": 55})
    assert hot["verdict"] == "fail"
    failing = [c for c in hot["checks"] if not c["ok"]]
    assert {(c["name"], c["part"]) for c in failing} >= {("transistor_junction_temperature", "transistor")}
    assert hot["max_ambient_c"] is None  # fails already at its own (coldest) ambient
    headers = {"Accept": "text/markdown"}
    report = client.post("/v1/review/channel", json={**GROW_CHANNEL, "ambient_c": 25}, headers=headers)
    assert "The design passes up to 36" in report.get_data(as_text=True)


def test_thermal_runaway_is_a_failing_check_not_an_error(client: FlaskClient, seeded: Any) -> None:
    # Five 1 W-class LEDs on 13 V through a Darlington: 0.4 V of headroom, no stable temperature below Tj,max.
    body = {
        **GROW_CHANNEL, "supply": None, "supply_v": 13, "supply_tolerance": 0.05, "current_max_a": 2,
        "leds_in_series": 5, "current_a": "300 mA", "vf_tempco_v_per_k": "-4 mV/K",
    }  # fmt: skip
    del body["supply"]
    data = review(client, body)
    assert "led_thermal_runaway" in data["failing"]
    assert data["stages"]["thermal"]["led_junction_c"] is None
    assert any("runaway" in caution for caution in data["cautions"])


@pytest.mark.parametrize(
    ("change", "failing"),
    [
        # A 5.5 V-maximum op-amp on the 12 V adapter: destroyed at any corner, and a caution says so.
        ({"opamp": "opamp-rrio-3mhz"}, "opamp_supply_max"),
        # The 10 V-minimum class on the 9 V pack (±15 %: 7.65-10.35 V).
        ({"supply": "supply-battery-9v-6aa", "opamp": "opamp-jfet-4mhz", "current_a": "10 mA"}, "opamp_supply_min"),
    ],
)
def test_op_amp_outside_its_supply_range_fails(
    client: FlaskClient, seeded: Any, change: dict[str, Any], failing: str
) -> None:
    data = review(client, {**DEMO, **change, "samples": 0})
    assert data["verdict"] == "fail" and failing in data["failing"]
    if failing == "opamp_supply_max":
        assert any("destroy" in caution for caution in data["cautions"])


def test_greenhouse_preamp_shows_its_windows_output_error_noise_and_phase_margin(
    client: FlaskClient, seeded: Any
) -> None:
    data = review(client, {**DEMO, "samples": 0})
    front = data["stages"]["front_stage"]
    # Gain 20 about 6 V on the 12 V adapter, 2 V peak out: inputs 5.9-6.1 V inside the general-purpose part's
    # 2-10 V common-mode range, output 4-8 V inside its 1.2-10.6 V swing (seeded class-typical values).
    assert (front["signal_input_min_v"], front["signal_input_max_v"]) == pytest.approx((5.9, 6.1))
    assert (front["input_common_mode_min_v"], front["input_common_mode_max_v"]) == (2.0, 10.0)
    assert (front["output_swing_min_v"], front["output_swing_max_v"]) == pytest.approx((1.2, 10.6))
    # DC error: 2.5 mV × 20 + 80 nA × |100 kΩ − 20 × 1 kΩ| + 10 nA × (100 kΩ + 20 × 1 kΩ) = 57.6 mV, 23.6 LSB of
    # a 12-bit converter over 10 V.
    assert front["output_error_v"] == pytest.approx(0.0576, rel=1e-9)
    assert front["output_error_lsb"] == pytest.approx(0.0576 / (10 / 4096), rel=1e-9)
    assert front["output_noise_rms_v"] > 0 and front["noise_bits"] > 12
    assert front["phase_margin_deg"] > 45
    checks = {c["name"]: c for c in data["checks"]}
    for name in ("input_common_mode_low", "input_common_mode_high", "output_swing_low", "output_swing_high"):
        assert checks[name]["ok"], name
    assert checks["output_swing_high"]["worst_case"]["corner"] == {"supply": "low"}
    assert checks["noise_bits"]["ok"] and checks["phase_margin"]["ok"]
    assert "output_error" not in checks  # no allowed error given: shown, not judged
    for accept, words in (("text/markdown", "## Front stage: "), ("text/html", "<h2>Front stage: ")):
        report = client.post("/v1/review/channel", json={**DEMO, "samples": 0}, headers={"Accept": accept})
        text = report.get_data(as_text=True)
        for title in ("single-supply windows", "dc output error", "noise", "stability"):
            assert words + title in text, (accept, title)
        assert (
            "0.0576 V" in text and f"{front['phase_margin_deg']:.6g}" in text and f"{front['noise_bits']:.6g}" in text
        )


def test_a_follower_on_a_long_cable_fails_stability_until_the_suggested_isolation_resistor_is_added(
    client: FlaskClient, seeded: Any
) -> None:
    # The preamp as a follower (gain 1, no feedback resistor) driving 100 nF of cable: the general-purpose part's
    # 75 Ω output resistance puts a 21 kHz pole inside its loop.
    follower = {**DEMO, "gain": 1, "rf_ohm": 0, "amplitude_v": "0.1 V", "load_capacitance_f": "100 nF", "samples": 0}
    before = review(client, follower)
    assert before["verdict"] == "fail" and before["failing"] == ["phase_margin"]
    suggested = before["stages"]["front_stage"]["isolation_suggested_ohm"]
    assert suggested is not None and any("isolation_suggested_ohm" in w for w in before["warnings"])
    after = review(client, {**follower, "isolation_ohm": suggested})
    assert after["verdict"] == "pass"
    phase = next(c for c in after["checks"] if c["name"] == "phase_margin")
    assert phase["ok"] and phase["value"] == before["stages"]["front_stage"]["isolation_phase_margin_deg"]


def test_explicit_values_give_the_same_review_as_parts(client: FlaskClient, seeded: Any) -> None:
    from_parts = {k: v for k, v in DEMO.items() if k not in {"opamp", "configuration", *FRONT_STAGE_FIELDS}}
    a = review(client, {**from_parts, "samples": 2000, "drive_low_v": 0.2})
    b = review(client, {**EXPLICIT, "seed": DEMO["seed"]})
    assert a["stages"] == b["stages"] and a["checks"] == b["checks"] and a["yield"] == b["yield"]


def test_under_driven_switch_fails_saturation_and_loses_yield(client: FlaskClient) -> None:
    # Forced beta 30 against hfe_min 20: the worst-case transistor cannot saturate.
    weak = {**EXPLICIT, "hfe_min": 20, "hfe_typ": 40, "forced_beta": 30, "vce_sat_forced_beta": 40, "samples": 5000}
    data = review(client, weak)
    assert data["verdict"] == "fail" and "saturation" in data["failing"]
    saturation = next(c for c in data["checks"] if c["name"] == "saturation")
    assert not saturation["ok"] and saturation["worst_case"]["corner"]["hfe"] == "min"
    assert data["yield"]["most_failing_check"] == "saturation"
    assert data["yield"]["fraction"] < 1.0 and data["yield"]["failures"]["saturation"] > 0


def test_pwm_timing_instead_of_duty_cycle(client: FlaskClient) -> None:
    base = {k: v for k, v in EXPLICIT.items() if k != "duty_cycle"}
    timed = review(client, {**base, "on_time_s": "250 us", "period_s": "1 ms", "samples": 0})
    fraction = review(client, {**base, "duty_cycle": 0.25, "samples": 0})
    assert timed["stages"]["supply"] == fraction["stages"]["supply"] and timed["yield"] is None
    assert_problem(client.post("/v1/review/channel", json={**base, "on_time_s": 0.001}), 422, "period_s")
    assert_problem(client.post("/v1/review/channel", json={**base, "on_time_s": 2, "period_s": 1}), 422, "on_time_s")


@pytest.mark.parametrize(
    ("change", "field"),
    [
        ({"duty_cycle": 1.3}, "duty_cycle"),
        ({"supply_v": 5}, "supply_v"),
        ({"samples": 1_000_001}, "samples"),
        ({"current_a": "20 mV"}, "current_a"),
        ({"vf_min_v": 2.2}, "vf_typ_v"),
    ],
)
def test_bad_inputs_name_the_field(client: FlaskClient, change: dict[str, Any], field: str) -> None:
    assert_problem(client.post("/v1/review/channel", json={**EXPLICIT, **change}), 422, field)


def _numbers(text: str) -> list[float]:
    return [float(x) for x in re.findall(r"-?\d+(?:\.\d+)?(?:e[+-]?\d+)?", text)]


def _with_unit(cell: str, unit: str) -> float:
    """A report cell's number, which must carry the check's unit."""
    number, _, shown = cell.partition(" ")
    assert shown == unit, cell
    return float(number)


def test_markdown_report_agrees_with_the_json(client: FlaskClient, seeded: Any) -> None:
    data = review(client, DEMO)
    response = client.post("/v1/review/channel", json=DEMO, headers={"Accept": "text/markdown"})
    assert response.status_code == 200 and response.mimetype == "text/markdown"
    report = response.get_data(as_text=True)
    assert report.startswith("# Channel review: PASS") and data["fingerprint"] in report
    rows = {line.split("|")[1].strip(): line for line in report.splitlines() if line.startswith("| ")}
    units = {"led_current_rating": "A", "headroom": "V", "resistor_rating": "W", "driver_current": "A",
             "signal_in_band": "Hz", "slew_rate": "V/s", "saturation": ""}  # fmt: skip
    for check in data["checks"]:
        cells = [cell.strip() for cell in rows[check["name"]].split("|")[1:-1]]
        unit = units.get(check["name"], cells[2].partition(" ")[2])
        assert _with_unit(cells[2], unit) == pytest.approx(check["value"], rel=1e-5)
        assert _with_unit(cells[3], unit) == pytest.approx(check["limit"], rel=1e-5)
        assert cells[4] == f"{check['margin'] * 100:.3g} %"
        assert _with_unit(cells[5], unit) == pytest.approx(check["worst_case"]["value"], rel=1e-5)
        assert cells[-1] == ("pass" if check["ok"] else "FAIL")
    for name, value in data["inputs"].items():
        if isinstance(value, int | float):
            assert _numbers(rows[name].split("|")[2])[0] == pytest.approx(value, rel=1e-5)
    for part in data["parts"]:
        assert f"`{part['part_id']}` revision {part['revision']}" in report


def test_html_report(client: FlaskClient, seeded: Any) -> None:
    weak = {**EXPLICIT, "hfe_min": 20, "hfe_typ": 40, "forced_beta": 30, "vce_sat_forced_beta": 40, "samples": 500}
    response = client.post("/v1/review/channel", json=weak, headers={"Accept": "text/html"})
    assert response.mimetype == "text/html"
    page = response.get_data(as_text=True)
    assert "FAIL" in page and "saturation" in page and "<table" in page


def test_yield_histogram_of_the_most_failing_check(client: FlaskClient) -> None:
    weak = {**EXPLICIT, "hfe_min": 20, "hfe_typ": 40, "forced_beta": 30, "vce_sat_forced_beta": 40, "samples": 1000}
    png = client.post("/v1/review/channel/histogram.png", json=weak)
    assert png.status_code == 200 and png.mimetype == "image/png" and png.data.startswith(b"\x89PNG")
    svg = client.post("/v1/review/channel/histogram.svg", json=weak)
    assert svg.mimetype == "image/svg+xml" and b"saturation" in svg.data


def test_a_passing_design_plots_its_tightest_check_or_the_one_asked_for(client: FlaskClient) -> None:
    data = review(client, EXPLICIT)
    tightest = data["yield"]["tightest_check"]
    assert data["yield"]["most_failing_check"] is None and tightest is not None
    # Every build passes; the builds stay inside the corners' box, so no build comes closer than the worst corner.
    worst = {c["name"]: c["worst_case"]["margin"] for c in data["checks"]}
    assert worst[tightest] - 1e-12 <= data["yield"]["least_margin"] and data["yield"]["least_margin"] > 0
    svg = client.post("/v1/review/channel/histogram.svg", json=EXPLICIT)
    assert svg.status_code == 200 and f"{tightest}: 2000 of 2000 samples".encode() in svg.data
    headroom = client.post("/v1/review/channel/histogram.svg?check=headroom", json=EXPLICIT)
    assert headroom.status_code == 200 and b"headroom (value / its limit): 2000 of 2000" in headroom.data
    assert_problem(client.post("/v1/review/channel/histogram.svg?check=nothing", json=EXPLICIT), 422, "check")
    # No op-amp in this design: its checks do not apply, so there is nothing to plot for them.
    assert_problem(client.post("/v1/review/channel/histogram.svg?check=slew_rate", json=EXPLICIT), 422, "check")


def test_darlington_channel_asks_the_pin_for_a_fraction_of_a_milliamp(client: FlaskClient, seeded: Any) -> None:
    # Sized at the Darlington's own Vce(sat) test ratio (250, over 1.05 for a +5 % resistor) rather than Ic/Ib = 10:
    # about 2 × 24.4 mA × 1.05 / 250 ≈ 0.2 mA of base current, where a ratio of 10 would ask about 5 mA.
    data = review(client, {**DEMO, "transistor": "npn-darlington-1a", "samples": 0})
    switch = data["stages"]["switch"]
    assert data["verdict"] == "pass"
    assert switch["forced_beta_design"] == pytest.approx(250 / 1.05)
    assert switch["drive_current_a"] < 0.3e-3 and switch["drive_current_max_a"] < 0.5e-3


def test_heat_plot_draws_each_parts_temperature_against_ambient(client: FlaskClient, seeded: Any) -> None:
    body = {**DEMO, "ambient_c": 40, "ambient_min_c": 10, "ambient_max_c": 55, "samples": 0}
    png = client.post("/v1/review/channel/heat.png", json=body)
    assert png.status_code == 200 and png.mimetype == "image/png"
    image = Image.open(io.BytesIO(png.data))
    marked = {k: float(v) for k, v in (pair.split("=") for pair in image.info["Description"].split("; "))}
    heat = review(client, body)["stages"]["thermal"]
    assert marked["ambient_c"] == 40.0
    for name in ("led_junction_c", "transistor_junction_c", "resistor_hot_spot_c"):
        assert marked[name] == pytest.approx(heat[name], rel=1e-12), name
    assert marked["led_limit_c"] == 100.0 - 20.0 and marked["transistor_limit_c"] == 150.0 - 20.0
    svg = client.post("/v1/review/channel/heat.svg", json=body)
    assert svg.mimetype == "image/svg+xml" and b"LED junction" in svg.data


def _bom_rows(report: str, title: str) -> list[list[str]]:
    """The rows of one bill-of-materials table of the Markdown report, as cells."""
    section = report[report.index(f"### {title}") :].split("\n\n")[1]
    return [[cell.strip() for cell in line.split("|")[1:-1]] for line in section.splitlines()[2:]]


@pytest.mark.parametrize("accept", ["text/markdown", "text/html"])
def test_every_bill_of_materials_value_in_the_reports_equals_the_json(
    client: FlaskClient, seeded: Any, accept: str
) -> None:
    data = review(client, {**DEMO, "samples": 0})
    bom = data["bill_of_materials"]
    # (12.6 - 3 x 1.9 - 0.25) V across 300 ohm x 0.95 at worst: 0.155 W, doubled (common practice) 0.31 W -> 0.5 W.
    led = bom["per_channel"][0]
    assert (led["value_ohm"], led["count"], led["series"], led["tolerance"]) == (300.0, 2, "E24", 0.05)
    assert led["dissipation_max_w"] == pytest.approx(6.65**2 / 285) and led["rating_min_w"] == 0.5
    assert led["rating_min_w"] == data["stages"]["led_string"]["resistor_rating_w"]
    # The base resistor at the pin's stress corner: P = I^2 R (Joule) with R at its low end, 0.0198 W -> 0.125 W.
    base = bom["per_channel"][1]
    switch = data["stages"]["switch"]
    assert base["value_ohm"] == switch["rb_ohm"] == 360.0
    assert base["dissipation_max_w"] == pytest.approx(switch["drive_current_max_a"] ** 2 * 360 * 0.95)
    assert base["rating_min_w"] == 0.125
    whole = {entry["item"]: entry["count"] for entry in bom["whole_design"]}
    assert whole == {"led_resistor": 12, "base_resistor": 6, "switch_transistor": 6, "led": 36, "supply": 1,
                     "front_stage_opamp": 1}  # fmt: skip

    markdown = client.post("/v1/review/channel", json={**DEMO, "samples": 0}, headers={"Accept": "text/markdown"})
    report = markdown.get_data(as_text=True)
    if accept == "text/html":
        html = client.post("/v1/review/channel", json={**DEMO, "samples": 0}, headers={"Accept": accept})
        page = html.get_data(as_text=True)
        cells = re.findall(r"<td data-label='[^']*'>([^<]*)</td>", page)
    for title, entries in (("Per channel", bom["per_channel"]), ("Whole design", bom["whole_design"])):
        rows = _bom_rows(report, title)
        assert len(rows) == len(entries)
        for row, entry in zip(rows, entries, strict=True):
            assert int(row[1]) == entry["count"]
            if entry["kind"] == "resistor":
                assert row[2] == f"{entry['value_ohm']:.6g} Ω" and row[4] == f"{entry['rating_min_w']:.6g} W"
                assert row[3] == f"{entry['series']}, ±{entry['tolerance'] * 100:.3g} %"
            else:
                assert row[5] == f"{entry['part_id']} r{entry['revision']}"
            if accept == "text/html":
                assert all(cell in cells for cell in row)
    # Cautions first: right under the verdict, with the safety line, before the bill of materials.
    assert report.index("## Cautions") < report.index("## Bill of materials") < report.index("## Checks")
    assert report.index(data["cautions"][0]) < report.index(data["safety"]) < report.index("## Bill of materials")


def test_the_bill_of_materials_rates_resistors_for_the_hottest_ambient(client: FlaskClient, seeded: Any) -> None:
    cool = review(client, {**DEMO, "samples": 0})["bill_of_materials"]["per_channel"][0]
    hot = review(client, {**DEMO, "samples": 0, "ambient_max_c": 120})["bill_of_materials"]["per_channel"][0]
    # IEC 60115-1's curve (from memory): full rating to 70 °C, none at 155 °C, so (155 - 120)/(155 - 70) = 0.41 of
    # a rating is usable at 120 °C. The same worst-case dissipation, doubled (common practice) and divided by it:
    need = 2 * hot["dissipation_max_w"] / ((155 - 120) / (155 - 70))
    assert cool["rating_min_w"] == 0.5 and cool["dissipation_max_w"] * 2 <= 0.5
    assert hot["rating_min_w"] == min(r for r in (0.125, 0.25, 0.5, 1.0, 2.0, 3.0, 5.0) if r >= need) == 1.0
