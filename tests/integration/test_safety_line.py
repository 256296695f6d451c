"""Every JSON answer carries the standing safety line as a field of its own, every page and report shows it, and
the supply's kind brings its standing cautions whether or not the design overloads it."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from flask.testing import FlaskClient
from helpers import bearer

from calcsvc.service.safety import SAFETY_LINE, SUPPLY_CAUTIONS

DEMO = json.loads((Path(__file__).resolve().parents[2] / "examples" / "greenhouse-channel.json").read_text())
LED_ON_ADAPTER = {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "leds_in_series": 3, "current_a": 0.02}
ANY_LED = {k: v for k, v in LED_ON_ADAPTER.items() if k != "led"}
BUDGET_ON_BATTERY = {
    "supply": "supply-battery-9v-6aa",
    "loads": [{"name": "grow channel", "peak_current_a": 0.04, "duty_cycle": 0.5, "count": 6}],
}


def test_every_json_answer_carries_the_safety_line(client: FlaskClient, seeded: Any, tokens: dict[str, str]) -> None:
    answers = [
        client.post("/v1/calc/led-string", json=LED_ON_ADAPTER),
        client.get("/v1/calc/led-string", query_string=LED_ON_ADAPTER),
        client.post("/v1/calc/duty-cycle-power", json=BUDGET_ON_BATTERY),
        client.post("/v1/batch/led-string", json=[LED_ON_ADAPTER]),
        client.post("/v1/batch/led-string?layout=columns", json=[LED_ON_ADAPTER]),
        client.post("/v1/review/channel", json={**DEMO, "samples": 100}),
        client.post("/v1/select/led-string", json={**ANY_LED, "search": "led"}),
        client.post("/v1/select/channel", json={**DEMO, "samples": 0, "led": ["led-red-5mm"]}),
        client.get("/v1/parts"),
        client.get("/v1/parts/led-red-5mm"),
        client.get("/v1/parts/led-red-5mm/revisions"),
        client.post(
            "/v1/parts/led-red-5mm/revisions/1/comments", json={"comment": "ok"}, headers=bearer(tokens["edna"])
        ),
        client.get("/review/channel.json", query_string={k: str(v) for k, v in DEMO.items() if k != "configuration"}),
        client.get("/v1/parts/no-such-part"),
        client.post("/v1/calc/led-string", json={**LED_ON_ADAPTER, "current_a": "20 furlongs"}),
    ]
    for answer in answers:
        assert answer.is_json, (answer.request.path, answer.status_code)
        assert answer.get_json()["safety"] == SAFETY_LINE, answer.request.path


def test_pages_and_reports_show_the_safety_line(client: FlaskClient, seeded: Any) -> None:
    for url in ("/", "/review/", "/review/parts/led-red-5mm", "/review/channel", "/review/parts/no-such-part"):
        assert SAFETY_LINE.replace("'", "&#39;") in client.get(url).get_data(as_text=True), url
    for accept in ("text/markdown", "text/html"):
        report = client.post("/v1/review/channel", json={**DEMO, "samples": 0}, headers={"Accept": accept})
        assert SAFETY_LINE.replace("'", "&#39;" if accept == "text/html" else "'") in report.get_data(as_text=True)


def test_a_mains_adapter_and_a_battery_pack_carry_standing_cautions(client: FlaskClient, seeded: Any) -> None:
    # The demo stays far inside every rating, yet it runs from a mains adapter in a damp greenhouse.
    review = client.post("/v1/review/channel", json={**DEMO, "samples": 0}).get_json()
    assert review["verdict"] == "pass" and SUPPLY_CAUTIONS["mains_adapter"] in review["cautions"]
    budget = client.post("/v1/calc/duty-cycle-power", json=BUDGET_ON_BATTERY).get_json()
    assert budget["checks"] and all(c["ok"] for c in budget["checks"])
    assert budget["cautions"] == [SUPPLY_CAUTIONS["battery"]]
    # Values given by hand: a capacity says battery; a bare voltage says nothing about the source.
    by_hand = {"supply_v": 9.0, "current_max_a": 1.0, "loads": BUDGET_ON_BATTERY["loads"]}
    assert client.post("/v1/calc/duty-cycle-power", json=by_hand).get_json()["cautions"] == []
    with_capacity = client.post("/v1/calc/duty-cycle-power", json={**by_hand, "capacity_ah": 2.0}).get_json()
    assert with_capacity["cautions"] == [SUPPLY_CAUTIONS["battery"]]
    rows = client.post("/v1/batch/led-string", json=[LED_ON_ADAPTER]).get_json()["rows"]
    assert SUPPLY_CAUTIONS["mains_adapter"] in rows[0]["cautions"]
    # A search carries them per candidate: the fixed adapter's, or each searched supply's own.
    leds = client.post("/v1/select/led-string", json={**ANY_LED, "search": "led"}).get_json()["candidates"]
    assert leds and all(SUPPLY_CAUTIONS["mains_adapter"] in c["cautions"] for c in leds)
    any_supply = {k: v for k, v in LED_ON_ADAPTER.items() if k != "supply"}
    supplies = client.post("/v1/select/led-string", json={**any_supply, "search": "supply"}).get_json()["candidates"]
    by_id = {c["part_id"]: c["cautions"] for c in supplies}
    assert SUPPLY_CAUTIONS["battery"] in by_id["supply-battery-9v-6aa"]
    assert SUPPLY_CAUTIONS["mains_adapter"] in by_id["supply-adapter-12v-2a"]
