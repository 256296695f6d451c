"""Ambient temperature in the single power-carrying calculations over HTTP: batches (JSON and CSV) give the single
requests' numbers at every ambient, and the candidate search excludes parts that pass only in cool air."""

from __future__ import annotations

import csv
import io
from typing import Any

import pytest
from flask.testing import FlaskClient

RED_STRING = {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "leds_in_series": 3, "current_a": "20 mA"}
SWITCH = {"transistor": "npn-small-signal", "collector_current_a": 0.15, "drive_high_v": 3.3}


def comparable(answer: dict[str, Any]) -> tuple[Any, ...]:
    checks = [{k: c[k] for k in ("name", "ok", "value", "limit")} for c in answer["checks"]]
    return answer["results"], checks, answer["warnings"], answer["cautions"]


def test_batch_rows_at_several_ambients_equal_the_single_requests(client: FlaskClient, seeded: Any) -> None:
    for name, body in (("led-string", RED_STRING), ("bjt-switch", SWITCH)):
        rows = [{**body, "ambient_c": ambient} for ambient in (-10, 25, "45 degC", 70)]
        batch = client.post(f"/v1/batch/{name}", json=rows).get_json()
        assert batch["ok_count"] == len(rows)
        for index, row in enumerate(rows):
            single = client.post(f"/v1/calc/{name}", json=row).get_json()
            assert comparable(batch["rows"][index]) == comparable(single), (name, row)
        hot = [entry["results"]["led_junction_c" if name == "led-string" else "junction_c"] for entry in batch["rows"]]
        assert hot == sorted(hot)  # warmer air, warmer junction


def test_a_csv_batch_with_an_ambient_column(client: FlaskClient, seeded: Any) -> None:
    table = "supply,led,leds_in_series,current_a,ambient_c\n"
    table += "supply-adapter-12v-2a,led-red-5mm,3,20 mA,25\nsupply-adapter-12v-2a,led-red-5mm,3,20 mA,75 degC\n"
    answer = client.post("/v1/batch/led-string", data=table, content_type="text/csv", headers={"Accept": "text/csv"})
    assert answer.status_code == 200
    cool, hot = csv.DictReader(io.StringIO(answer.get_data(as_text=True)))
    assert (cool["computed"], cool["passes"], hot["computed"], hot["passes"]) == ("true", "true", "true", "false")
    # At 75 °C the red LED's junction (Tj,max 100 °C, kept 20 K below) and its current line from the 60 °C knee
    # both fail.
    assert "led_junction_temperature" in hot["failing_checks"] and "led_current_rating" in hot["failing_checks"]
    single = client.post("/v1/calc/led-string", json={**RED_STRING, "ambient_c": 75}).get_json()
    assert float(hot["led_junction_c"]) == pytest.approx(single["results"]["led_junction_c"], rel=1e-11)


def search(client: FlaskClient, calculation: str, body: dict[str, Any]) -> dict[str, dict[str, Any]]:
    answer = client.post(f"/v1/select/{calculation}", json=body)
    assert answer.status_code == 200, answer.get_json()
    return {c["part_id"]: c for c in answer.get_json()["candidates"]}


def test_the_transistor_search_excludes_a_part_that_passes_only_in_cool_air(client: FlaskClient, seeded: Any) -> None:
    # 300 mA from 5 V logic. The Darlington drops 1.1 V: P = 1.1 V × 0.3 A + 1.7 V × Ib = 0.33 W plus its base,
    # 140 K/W: about 47 K above the air; kept 20 K below its 150 °C Tj,max (common practice) the air may reach
    # about 83 °C. The others dissipate far less through lower thermal resistances.
    body = {"transistor": {}, "collector_current_a": 0.3, "drive_high_v": 5}
    cool = search(client, "bjt-switch", {**body, "ambient_c": 25})
    hot = search(client, "bjt-switch", {**body, "ambient_c": "85 degC"})
    assert all(c["ok"] for c in cool.values())
    darlington = hot["npn-darlington-1a"]
    assert not darlington["ok"] and darlington["failing"] == ["transistor_junction_temperature"]
    assert darlington["limiting_check"] == "transistor_junction_temperature"
    assert 130.0 < darlington["results"]["junction_c"] < 135.0
    assert [p for p, c in hot.items() if not c["ok"]] == ["npn-darlington-1a"]
    passing = search(client, "bjt-switch", {**body, "ambient_c": 85, "only_passing": True})
    assert "npn-darlington-1a" not in passing and len(passing) == 3


def test_the_led_search_excludes_a_part_that_passes_only_in_cool_air(client: FlaskClient, seeded: Any) -> None:
    # Three red 5 mm LEDs at 20 mA on 12 V: about 15 K of self-heating through 350 K/W, so at 85 °C the junction
    # exceeds the 80 °C limit (100 °C − 20 K), and the current line from the 60 °C knee leaves 15/40 of 30 mA.
    body = {"led": {}, "supply_v": 12, "leds_in_series": 3, "current_a": "20 mA"}
    cool = search(client, "led-string", {**body, "ambient_c": 25})
    hot = search(client, "led-string", {**body, "ambient_c": 85})
    assert cool["led-red-5mm"]["ok"]
    red = hot["led-red-5mm"]
    assert not red["ok"] and red["failing"] == ["led_current_rating", "led_junction_temperature"]
    assert red["results"]["led_current_limit_a"] == pytest.approx(0.03 * 15 / 40)
    assert hot["led-deep-red-grow-1w"]["ok"]  # a star-board LED barely warms at 20 mA
