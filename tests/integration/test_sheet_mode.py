"""The GET form as a spreadsheet cell and a script read it: failing designs never answer a bare number, refusals
reach the cell, numbers in the caller's decimal mark without float noise, and a HEAD computes nothing."""

from __future__ import annotations

import csv
import io
from typing import Any

import pytest
from flask.testing import FlaskClient

import calcsvc.web.calc_api as calc_api

LED = "/v1/calc/led-string?supply=supply-adapter-12v-2a&led=led-red-5mm&leds_in_series=3"
GOOD = f"{LED}&current_a=20 mA&pick=resistor_ohm"
FAILING = f"{LED}&current_a=200 mA&pick=resistor_ohm"  # 200 mA through a 30 mA LED, the resistor near 15 W


def text(response: Any) -> str:
    assert response.mimetype == "text/plain"
    return str(response.get_data(as_text=True))


def test_a_failing_design_never_answers_a_bare_number(client: FlaskClient, seeded: Any) -> None:
    assert text(client.get(GOOD)) == "300.0"
    script = client.get(FAILING)
    assert script.status_code == 409
    line = text(script)
    # Its worst-case current (the LEDs' lowest forward voltage) against the rating, as the JSON's check has them.
    check = next(c for c in client.get(FAILING.replace("&pick=resistor_ohm", "")).get_json()["checks"] if not c["ok"])
    assert line.startswith(f"fails: led_current_rating: {check['value']:.12g} > limit 0.03") and "\n" not in line
    cell = client.get(f"{FAILING}&sheet=true")
    assert (cell.status_code, text(cell)) == (200, line)
    # The JSON envelope keeps the number beside its failing check, for callers who read the checks.
    assert client.get(FAILING.replace("&pick=resistor_ohm", "")).get_json()["results"]["resistor_ohm"] == 30.0


def test_csv_tells_whether_the_design_passes(client: FlaskClient, seeded: Any) -> None:
    good = next(csv.DictReader(io.StringIO(client.get(f"{LED}&current_a=20 mA&format=csv").get_data(as_text=True))))
    assert (good["passes"], good["failing_checks"], good["resistor_ohm"]) == ("true", "", "300.0")
    answer = client.get(f"{LED}&current_a=200 mA&format=csv").get_data(as_text=True)
    failing = next(csv.DictReader(io.StringIO(answer)))
    # The worst string (12.6 V, 3 × 1.9 V, 28.5 Ω) runs away thermally: its current at the LEDs' Tj,max of 100 °C,
    # each forward voltage 2 mV/K × 75 K lower, is (12.6 - 3 × 1.75) V / 28.5 Ω = 0.258 A against 0.03 A.
    assert failing["passes"] == "false" and failing["failing_checks"].startswith("led_current_rating 0.2578")
    assert failing["cautions"]  # the resistor's dissipation


def test_sheet_mode_shows_a_refusal_in_the_cell(client: FlaskClient, seeded: Any) -> None:
    for query, field in (
        (f"{LED}&current_a=20 ma&pick=resistor_ohm", "current_a"),
        (f"{LED}&current_a=20 mA&pick=resistor_ohm".replace("led-red-5mm", "led-missing"), "led"),
        (f"{LED}&current_a=20 mA&pick=no_such_result", "pick"),
        (f"{LED}&current_a=20 mA", "pick"),  # a cell shows one result
    ):
        refused = client.get(f"{query}&sheet=1")
        line = text(refused)
        assert refused.status_code == 200 and line.startswith(f"error: {field}") and "\n" not in line, line
    unit = text(client.get(f"{LED}&current_a=20 ma&pick=resistor_ohm&sheet=1"))
    assert unit == "error: current_a: unknown unit 'ma'; did you mean 'mA'?"
    assert client.get(f"{LED}&current_a=20 ma&pick=resistor_ohm").status_code == 422  # scripts keep the status


@pytest.mark.parametrize(
    ("query", "expected"),
    [
        ("current_a=0,02&decimal=comma", "300,0"),
        ("current_a=20 mA&decimal=comma", "300,0"),
        ("current_a=0.02&decimal=point", "300.0"),
    ],
)
def test_the_decimal_mark_in_and_out(client: FlaskClient, seeded: Any, query: str, expected: str) -> None:
    assert text(client.get(f"{LED}&{query}&pick=resistor_ohm&sheet=1")) == expected


def test_decimal_comma_refuses_a_point_and_writes_csv_with_semicolons(client: FlaskClient, seeded: Any) -> None:
    refused = text(client.get(f"{LED}&current_a=0.02&decimal=comma&pick=resistor_ohm&sheet=1"))
    assert refused.startswith("error: current_a:") and "decimal mark is ','" in refused
    assert text(client.get(f"{LED}&current_a=0,02&pick=resistor_ohm&sheet=1")).startswith("error: current_a:")
    header, row = client.get(f"{LED}&current_a=19,5 mA&decimal=comma&format=csv").get_data(as_text=True).splitlines()
    cells = dict(zip(header.split(";"), row.split(";"), strict=True))
    assert cells["current_max_a"].count(",") == 1 and "." not in cells["current_max_a"]


def test_text_numbers_carry_no_float_noise(client: FlaskClient) -> None:
    query = "supply_v=12&vf_typ_v=2&vf_max_v=2.4&vf_min_v=1.8&if_max_a=0.03&leds_in_series=3&current_a=19.5 mA"
    full = client.get(f"/v1/calc/led-string?{query}").get_json()["results"]
    picked = {name: text(client.get(f"/v1/calc/led-string?{query}&pick={name}")) for name, v in full.items()
              if isinstance(v, float)}  # fmt: skip
    for name, shown in picked.items():
        assert float(shown) == pytest.approx(full[name], rel=1e-11), name
        assert len(shown.replace("-", "").replace("e", "").lstrip("0.")) <= 15, shown


def test_head_checks_the_inputs_without_computing(
    client: FlaskClient, seeded: Any, monkeypatch: pytest.MonkeyPatch
) -> None:
    computed: list[str] = []
    run = calc_api.run_calculation
    monkeypatch.setattr(calc_api, "run_calculation", lambda *a: computed.append("x") or run(*a))
    assert client.head(f"{GOOD}&sheet=1").status_code == 200
    assert client.head(GOOD).status_code == 200
    assert client.head(f"{LED}&current_a=20 ma&pick=resistor_ohm").status_code == 422
    assert client.head(GOOD.replace("led-red-5mm", "led-missing")).status_code == 404
    assert client.head(GOOD.replace("supply=supply-adapter-12v-2a", "supply_v=5")).status_code == 422  # too low
    assert computed == []
    assert client.get(GOOD).status_code == 200 and computed == ["x"]
