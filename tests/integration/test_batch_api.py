"""Batches: JSON arrays and CSV tables through the vectorized core, bad rows isolated, same numbers as single rows."""

from __future__ import annotations

import csv
import io
from typing import Any

import numpy as np
import pytest
from flask import Flask
from flask.testing import FlaskClient
from helpers import assert_problem

from calcsvc import create_app

LED = {"vf_typ_v": 2.0, "vf_min_v": 1.8, "vf_max_v": 2.4, "if_max_a": 0.03, "leds_in_series": 3}


def test_rows_match_the_single_endpoint(client: FlaskClient, seeded: Any) -> None:
    rng = np.random.default_rng(7)
    rows: list[dict[str, Any]] = [
        {**LED, "supply_v": float(v), "current_a": float(i), "strings": int(s), "e_series": e}
        for v, i, s, e in zip(
            rng.uniform(7.5, 24, 40),
            rng.uniform(0.004, 0.025, 40),
            rng.integers(1, 4, 40),
            rng.choice(["E12", "E24", "E96"], 40),
            strict=True,
        )
    ]
    rows.append({"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "leds_in_series": 3, "current_a": "20 mA"})
    batch = client.post("/v1/batch/led-string", json=rows).get_json()
    assert batch["count"] == batch["ok_count"] == len(rows)
    for index in (0, 13, 27, 39, 40):
        single = client.post("/v1/calc/led-string", json=rows[index]).get_json()
        entry = batch["rows"][index]
        assert entry["row"] == index and entry["ok"] is True
        assert entry["results"] == single["results"]
        assert [{k: c[k] for k in ("name", "ok", "value", "limit")} for c in single["checks"]] == [
            {k: c[k] for k in ("name", "ok", "value", "limit")} for c in entry["checks"]
        ]
        assert entry["warnings"] == single["warnings"] and entry["cautions"] == single["cautions"]
    assert batch["rows"][40]["parts"][0]["part_id"] == "supply-adapter-12v-2a"


def test_a_bad_row_does_not_fail_the_batch(client: FlaskClient, seeded: Any) -> None:
    good = {**LED, "supply_v": 12, "current_a": 0.02}
    rows = [
        good,
        {**good, "supply_v": 5},  # below the string's forward voltage
        {**good, "supply_v": "12 A"},  # wrong dimension
        {**good, "colour": "red"},  # unknown field
        {**good, "led": "led-missing"},  # unknown part
        {**good, "current_a": "NaN"},
        good,
    ]
    body = client.post("/v1/batch/led-string", json=rows).get_json()
    assert [r["ok"] for r in body["rows"]] == [True, False, False, False, False, False, True]
    fields = [set(r["problem"]["errors"]) for r in body["rows"] if not r["ok"]]
    assert fields[0] == {"supply_v"} and fields[1] >= {"supply_v"} and fields[2] == {"colour"}
    assert "led" in fields[3] and "current_a" in fields[4]
    assert "forward voltage" in body["rows"][1]["problem"]["errors"]["supply_v"][0]
    # A NaN literal is not JSON at all (RFC 8259), so that body is refused whole.
    nan_body = '[{"supply_v": NaN}]'
    assert_problem(client.post("/v1/batch/led-string", data=nan_body, content_type="application/json"), 400)


def test_csv_in_and_out_with_units(client: FlaskClient, seeded: Any) -> None:
    table = "supply_v,led,leds_in_series,current_a,strings\n9 V,led-red-5mm,3,15 mA,\n12 V,led-red-5mm,3,20 mA,2\n"
    response = client.post("/v1/batch/led-string", data=table, content_type="text/csv", headers={"Accept": "text/csv"})
    assert response.status_code == 200 and response.mimetype == "text/csv"
    lines = list(csv.DictReader(io.StringIO(response.get_data(as_text=True))))
    assert [line["computed"] for line in lines] == ["true", "true"]
    # (9 - 3 x 2.1) V / 15 mA = 180 ohm, an E24 value (IEC 60063).
    assert float(lines[0]["resistor_ohm"]) == 180.0
    # (12 - 6.3) V / 20 mA = 285 ohm, up to the E24 300 ohm: 2 strings of 5.7 V / 300 ohm = 19 mA.
    assert float(lines[1]["total_current_a"]) == pytest.approx(0.038)


def test_closed_loop_sweep_rows(client: FlaskClient) -> None:
    rows = [{"gain": g, "gbw_hz": 1e6, "sweep_start_hz": 10, "sweep_stop_hz": 1e6, "sweep_points": 5} for g in (2, 10)]
    body = client.post("/v1/batch/closed-loop-bandwidth", json=rows).get_json()
    assert [len(r["results"]["sweep"]["gain_db"]) for r in body["rows"]] == [5, 5]
    assert body["rows"][0]["results"]["bandwidth_hz"] > body["rows"][1]["results"]["bandwidth_hz"]


def test_limits_and_shape(client: FlaskClient, database_url: str) -> None:
    small: Flask = create_app({"DATABASE_URL": database_url, "BATCH_MAX_ROWS": 3})
    rows = [{**LED, "supply_v": 12, "current_a": 0.02}] * 4
    assert_problem(small.test_client().post("/v1/batch/led-string", json=rows), 413)
    assert_problem(client.post("/v1/batch/led-string", json={"supply_v": 12}), 422, "body")
    assert_problem(client.post("/v1/batch/led-string", json=[]), 422)
    assert_problem(client.post("/v1/batch/led-string", data="[{", content_type="application/json"), 400)
    assert_problem(client.post("/v1/batch/no-such-calculation", json=rows), 404)


def test_query_form_answers_a_cell(client: FlaskClient, seeded: Any) -> None:
    query = "supply=supply-adapter-12v-2a&led=led-red-5mm&leds_in_series=3&current_a=20 mA"
    full = client.get(f"/v1/calc/led-string?{query}")
    assert full.status_code == 200
    picked = client.get(f"/v1/calc/led-string?{query}&pick=resistor_ohm")
    assert picked.mimetype == "text/plain"
    assert float(picked.get_data(as_text=True)) == full.get_json()["results"]["resistor_ohm"]
    flag = client.get(
        "/v1/calc/slew-limit?slew_rate_v_per_s=0.5 V/us&frequency_hz=20 kHz&amplitude_v=1&pick=slew_limited"
    )
    assert flag.get_data(as_text=True) == "false"  # a slew-limited design fails its check: 409, not "true"
    table = client.get(f"/v1/calc/led-string?{query}&format=csv")
    header, values = table.get_data(as_text=True).splitlines()
    assert header.split(",")[1] == "resistor_ohm" and float(values.split(",")[1]) == 300.0


def test_query_form_errors_are_one_line_for_cells(client: FlaskClient) -> None:
    response = client.get("/v1/calc/led-string?supply_v=12 A&leds_in_series=3&pick=resistor_ohm")
    assert response.status_code == 422 and response.mimetype == "text/plain"
    text = response.get_data(as_text=True)
    assert "\n" not in text and text.startswith("error:") and "supply_v" in text
    assert_problem(client.get("/v1/calc/led-string?supply_v=12 A&leds_in_series=3"), 422, "supply_v")


def test_column_layout_carries_the_same_numbers(client: FlaskClient) -> None:
    rows = [{**LED, "supply_v": 12, "current_a": 0.02}, {**LED, "supply_v": 5, "current_a": 0.02}]
    by_row = client.post("/v1/batch/led-string", json=rows).get_json()
    by_column = client.post("/v1/batch/led-string?layout=columns", json=rows).get_json()
    assert by_column["layout"] == "columns" and by_column["ok"] == [True, False]
    for name, value in by_row["rows"][0]["results"].items():
        assert by_column["results"][name][0] == value
        assert by_column["results"][name][1] is None  # the bad row has no results
    first_check = by_row["rows"][0]["checks"][0]
    assert by_column["checks"][first_check["name"]]["value"][0] == first_check["value"]
    assert by_column["problems"]["1"]["errors"].keys() == by_row["rows"][1]["problem"]["errors"].keys()


def test_each_sweep_row_gets_its_own_points_at_the_single_endpoints_frequencies(client: FlaskClient) -> None:
    base = {"gain": 10, "gbw_hz": 1e6, "sweep_start_hz": 10, "sweep_stop_hz": 1e6}
    rows = [{**base, "sweep_points": 3}, {**base, "sweep_points": 7}, {"gain": 2, "gbw_hz": 1e6}]
    body = client.post("/v1/batch/closed-loop-bandwidth", json=rows).get_json()
    columns = client.post("/v1/batch/closed-loop-bandwidth?layout=columns", json=rows).get_json()
    for index in (0, 1):
        single = client.post("/v1/calc/closed-loop-bandwidth", json=rows[index]).get_json()["results"]["sweep"]
        swept = body["rows"][index]["results"]["sweep"]
        for key in ("frequency_hz", "gain_db", "phase_deg"):
            assert len(swept[key]) == rows[index]["sweep_points"]
            assert swept[key] == pytest.approx(single[key], rel=1e-12)
            assert columns["results"]["sweep"][key][index] == swept[key]
    assert "sweep" not in body["rows"][2]["results"] and columns["results"]["sweep"]["gain_db"][2] is None


def test_sweep_points_beyond_the_cap_are_refused_before_computing(database_url: str) -> None:
    capped = create_app({"DATABASE_URL": database_url, "BATCH_MAX_SWEEP_POINTS": 1000}).test_client()
    row = {"gain": 10, "gbw_hz": 1e6, "sweep_start_hz": 10, "sweep_stop_hz": 1e6, "sweep_points": 500}
    assert capped.post("/v1/batch/closed-loop-bandwidth", json=[row, row]).status_code == 200
    body = assert_problem(capped.post("/v1/batch/closed-loop-bandwidth", json=[row, row, row]), 413, "sweep_points")
    assert "1,500" in body["detail"] and "1,000" in body["detail"]
    # A row refused for its own inputs asks for nothing.
    assert capped.post("/v1/batch/closed-loop-bandwidth", json=[row, row, {**row, "gain": -1}]).status_code == 200


@pytest.mark.parametrize("lead", ["=", "+", "-", "@"])
def test_csv_answer_cells_never_start_a_formula(client: FlaskClient, lead: str) -> None:
    header = f'"{lead}HYPERLINK(""http://example.invalid"",""x"")"'
    table = f"{header},supply_v\n1,-12 V\n"
    response = client.post("/v1/batch/led-string", data=table, content_type="text/csv", headers={"Accept": "text/csv"})
    (line,) = csv.DictReader(io.StringIO(response.get_data(as_text=True)))
    assert line["computed"] == "false" and line["problem"].startswith(f"'{lead}HYPERLINK(")
    cells = [cell for row in csv.reader(io.StringIO(response.get_data(as_text=True))) for cell in row]
    assert not [cell for cell in cells if cell[:1] in ("=", "+", "-", "@", "\t", "\r")]


def test_a_bad_row_is_refused_as_the_single_request_would_be(client: FlaskClient, seeded: Any) -> None:
    good = {**LED, "supply_v": 12, "current_a": 0.02}
    cases = [{**good, "supply_v": 5}, {**good, "current_a": 0}, {**good, "led": "led-missing"}]
    body = client.post("/v1/batch/led-string", json=cases).get_json()
    for case, entry in zip(cases, body["rows"], strict=True):
        single = client.post("/v1/calc/led-string", json=case).get_json()
        row = entry["problem"]
        assert (row["type"], row["title"], row["status"]) == (single["type"], single["title"], single["status"])
        assert row["errors"] == single["errors"]
