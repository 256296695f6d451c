"""Batch CSV as spreadsheets save and read it: label columns, a byte-order mark, ';' with decimal commas, rows
numbered as the sheet numbers them, whether each design passes, its failing checks and cautions, no float noise."""

from __future__ import annotations

import csv
import io
from typing import Any

import pytest
from flask.testing import FlaskClient

SHEET = "design,supply,led,leds_in_series,current_a\nbench A,supply-adapter-12v-2a,led-red-5mm,3,20 mA\n\n"
SHEET += "bench B,supply-adapter-12v-2a,led-red-5mm,3,200 mA\nbench C,supply-adapter-12v-2a,led-red-5mm,3,20 ma\n"


def post(client: FlaskClient, table: str | bytes, query: str = "") -> list[dict[str, str]]:
    answer = client.post(
        f"/v1/batch/led-string{query}", data=table, content_type="text/csv", headers={"Accept": "text/csv"}
    )
    assert answer.status_code == 200, answer.get_data(as_text=True)
    text = answer.get_data(as_text=True)
    return list(csv.DictReader(io.StringIO(text), delimiter=";" if text.startswith("row;") else ","))


def test_labels_rows_passes_failing_checks_and_cautions(client: FlaskClient, seeded: Any) -> None:
    good, failing, refused = post(client, SHEET, "?labels=design")
    # The header is row 1 and the blank line 3 still counts, as in the sheet the file was saved from.
    assert [line["row"] for line in (good, failing, refused)] == ["2", "4", "5"]
    assert [line["design"] for line in (good, failing, refused)] == ["bench A", "bench B", "bench C"]
    assert (good["computed"], good["passes"], good["resistor_ohm"], good["failing_checks"]) == (
        "true",
        "true",
        "300.0",
        "",
    )
    assert (failing["computed"], failing["passes"]) == ("true", "false")
    # 200 mA: (12 - 3 × 2.1) V / 0.2 A = 28.5 Ω → E24 30 Ω; the worst string (12.6 V, 3 × 1.9 V, 28.5 Ω) runs away
    # thermally, so its current is taken at the LED's Tj,max of 100 °C, where each forward voltage has fallen by
    # 2 mV/K × 75 K: (12.6 - 3 × 1.75) V / 28.5 Ω = 0.258 A.
    assert (
        failing["failing_checks"].startswith("led_current_rating 0.2578")
        and "> limit 0.03" in failing["failing_checks"]
    )
    assert "led_thermal_runaway" in failing["failing_checks"]
    assert "W" in failing["cautions"]  # the resistor's dissipation
    assert (refused["computed"], refused["passes"]) == ("false", "")
    assert "did you mean 'mA'?" in refused["problem"]
    # Without the label declared, it is an unknown field, as a misspelt input must be.
    assert {line["computed"] for line in post(client, SHEET)} == {"false"}


def test_json_rows_carry_passes_and_labels(client: FlaskClient, seeded: Any) -> None:
    design = {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "leds_in_series": 3}
    rows = [{"design": "A", **design, "current_a": 0.02}, {"design": "B", **design, "current_a": 0.2}]
    body = client.post("/v1/batch/led-string?labels=design", json=rows).get_json()
    assert [(r["labels"], r["ok"], r["passes"]) for r in body["rows"]] == [({"design": "A"}, True, True),
                                                                            ({"design": "B"}, True, False)]  # fmt: skip
    columns = client.post("/v1/batch/led-string?labels=design&layout=columns", json=rows).get_json()
    assert columns["passes"] == [True, False] and columns["labels"] == {"design": ["A", "B"]}


def test_a_byte_order_mark_and_semicolons_with_decimal_commas(client: FlaskClient, seeded: Any) -> None:
    table = "design;supply_v;vf_typ_v;vf_min_v;vf_max_v;if_max_a;leds_in_series;current_a\n"
    table += "A;12;2;1,8;2,4;0,03;3;19,5 mA\nB;12;2;1.8;2,4;0,03;3;0,02\n"
    first, second = post(client, "\ufeff".encode() + table.encode(), "?labels=design")
    assert first["design"] == "A" and first["computed"] == "true", first
    assert first["current_max_a"].count(",") == 1 and "." not in first["current_max_a"]
    assert second["computed"] == "false" and "decimal mark is ','" in second["problem"]
    point = post(client, "\ufeff" + table.replace(",", ".").replace(";", ","), "?labels=design")
    assert [line["computed"] for line in point] == ["true", "true"] and point[0]["design"] == "A"


def test_csv_numbers_carry_no_float_noise(client: FlaskClient) -> None:
    table = "supply_v,vf_typ_v,vf_min_v,vf_max_v,if_max_a,leds_in_series,current_a\n9.3,2.1,1.9,2.4,0.03,3,10 mA\n"
    (line,) = post(client, table)
    (row,) = client.post("/v1/batch/led-string", json=[dict(zip(*csv.reader(io.StringIO(table)), strict=True))]).json[
        "rows"
    ]
    noisy = {name: v for name, v in row["results"].items() if "0000000" in repr(v) or "9999999" in repr(v)}
    assert noisy, "JSON keeps full precision, noise included (0.019500000000000003)"
    for name, value in row["results"].items():
        assert float(line[name]) == pytest.approx(value, rel=1e-11), (name, line)
    for name in noisy:  # headroom 9.3 - 3 x 2.1 = 2.999999999999999 in JSON
        assert "0000000" not in line[name] and "9999999" not in line[name], (name, line[name])
