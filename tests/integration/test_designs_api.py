"""Saved designs over HTTP: saved with the revisions they used, re-reviewed reproducibly, and the impact of a
part edit on them shown before anyone approves it."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest
from flask.testing import FlaskClient
from helpers import assert_problem, bearer

DEMO = json.loads((Path(__file__).resolve().parents[2] / "examples" / "greenhouse-channel.json").read_text())
# A new reel of the demo's red LEDs binned higher: 2.9 V typical, 2.6 to 3.4 V (invented, class-typical values).
HIGH_VF_BATCH = {"color": "red", "vf_typ_v": 2.9, "vf_min_v": 2.6, "vf_max_v": 3.4, "if_test_a": 0.02, "if_max_a": 0.03}


def save_demo(client: FlaskClient, tokens: dict[str, str], design_id: str = "greenhouse-demo") -> dict[str, Any]:
    body = {"design_id": design_id, "description": "six grow-light channels", "request": DEMO}
    response = client.post("/v1/designs", json=body, headers=bearer(tokens["edna"]))
    assert response.status_code == 201, response.get_json()
    assert response.headers["ETag"] == f'"{design_id}-r1"'
    return response.get_json()


def edit_led(client: FlaskClient, tokens: dict[str, str], parameters: dict[str, Any]) -> None:
    current = client.get("/v1/parts/led-red-5mm")
    headers = {**bearer(tokens["edna"]), "If-Match": current.headers["ETag"]}
    # A new reel of the same LED: only the changed parameters differ, its thermal data stay.
    changed = {**current.get_json()["parameters"], **parameters}
    response = client.put("/v1/parts/led-red-5mm", json={"parameters": changed}, headers=headers)
    assert response.status_code == 200, response.get_json()


def test_a_saved_design_keeps_its_request_revisions_and_review(
    client: FlaskClient, seeded: Any, tokens: dict[str, str]
) -> None:
    saved = save_demo(client, tokens)
    assert saved["owner"] == "edna" and saved["calculation"] == "channel"
    assert saved["body"] == DEMO  # as given, "20 mA" and all
    assert saved["inputs"]["current_a"] == pytest.approx(0.02)
    assert {(p["role"], p["part_id"], p["revision"]) for p in saved["parts"]} >= {("led", "led-red-5mm", 1)}
    direct = client.post("/v1/review/channel", json=DEMO).get_json()
    assert saved["review"]["verdict"] == direct["verdict"] == "pass"
    assert saved["review"]["fingerprint"] == direct["fingerprint"]
    assert client.get("/v1/designs/greenhouse-demo").get_json() == saved
    listed = client.get("/v1/designs").get_json()
    assert [d["design_id"] for d in listed["items"]] == ["greenhouse-demo"] and listed["total"] == 1


def test_pinned_rereview_reproduces_the_fingerprint(client: FlaskClient, seeded: Any, tokens: dict[str, str]) -> None:
    saved = save_demo(client, tokens)
    edit_led(client, tokens, {**HIGH_VF_BATCH, "vf_typ_v": 3.0})  # a draft: today's approved parts are unchanged
    again = client.get("/v1/designs/greenhouse-demo/review").get_json()
    assert again["pinned"]["fingerprint"] == saved["review"]["fingerprint"]
    assert again["pinned"]["verdict"] == "pass" and again["pinned"]["reproduced"] is True
    assert again["pinned"]["checks"] == saved["review"]["checks"]
    assert again["differs"] is False and again["current"]["fingerprint"] == saved["review"]["fingerprint"]


def test_a_higher_forward_voltage_turns_the_design_from_pass_to_fail(
    client: FlaskClient, seeded: Any, tokens: dict[str, str]
) -> None:
    save_demo(client, tokens)
    save_demo(client, tokens, "greenhouse-spare")
    edit_led(client, tokens, HIGH_VF_BATCH)  # revision 2, a draft
    impact = client.get("/v1/parts/led-red-5mm/impact").get_json()
    assert (impact["revision"], impact["status"]) == (2, "draft")
    assert impact["summary"]["pass_to_fail"] == 2 and impact["summary"]["using"] == 2
    assert impact["summary"]["text"].startswith("approving revision 2 of led-red-5mm turns 2 saved designs from pass")
    first = impact["designs"][0]
    assert first["design_id"] == "greenhouse-demo"
    assert (first["before"]["verdict"], first["after"]["verdict"]) == ("pass", "fail")
    # The new reel's low end (3 x 2.6 V) draws more than the LED's rating, its high end leaves no headroom.
    assert {"headroom", "led_current_rating"} <= set(first["after"]["failing"]) and "verdict" in first["changes"]
    headroom = next(c for c in first["check_changes"] if c["name"] == "headroom")
    # Headroom at the worst corner: the adapter's low end 12 V x 0.95 = 11.4 V, less three LEDs at their highest
    # forward voltage and the transistor's saturation voltage: 11.4 - 3 x 3.4 - 0.25 = 0.95 V (was 3.65 V) with
    # the LEDs at the air's temperature; their own few kelvin of self-heating lower each Vf by 4 mV/K (under
    # 0.1 V for the three at this corner's current).
    assert 0.95 < headroom["after"]["value"] < 0.95 + 0.1
    assert 3.65 < headroom["before"]["value"] < 3.65 + 0.1
    assert headroom["after"]["ok"] is False and headroom["after"]["value"] < headroom["after"]["limit"]
    assert client.get("/v1/parts/led-red-5mm/revisions/2/impact").get_json() == impact
    # The approved revision put back in changes nothing.
    assert client.get("/v1/parts/led-red-5mm/revisions/1/impact").get_json()["designs"] == []

    watch = client.get("/v1/designs?affected_by_draft=true").get_json()
    assert [d["design_id"] for d in watch["items"]] == ["greenhouse-demo", "greenhouse-spare"]
    assert watch["items"][0]["drafts"][0]["part_id"] == "led-red-5mm"
    assert client.get("/v1/designs?fails_at_current=true").get_json()["items"] == []

    approve = {**bearer(tokens["rita"]), "If-Match": '"led-red-5mm-r2"'}
    assert client.post("/v1/parts/led-red-5mm/approve", headers=approve).status_code == 200
    failing = client.get("/v1/designs?fails_at_current=true").get_json()
    assert failing["total"] == 2 and "headroom" in failing["items"][0]["current"]["failing"]
    again = client.get("/v1/designs/greenhouse-demo/review").get_json()
    assert (again["pinned"]["verdict"], again["current"]["verdict"]) == ("pass", "fail")
    assert again["pinned"]["reproduced"] is True and again["differs"] is True


def test_revisions_need_if_match_and_retiring_keeps_them(
    client: FlaskClient, seeded: Any, tokens: dict[str, str]
) -> None:
    save_demo(client, tokens)
    changed = {"description": "eight channels", "request": {**DEMO, "channels": 8}}
    assert_problem(client.put("/v1/designs/greenhouse-demo", json=changed, headers=bearer(tokens["edna"])), 428)
    headers = {**bearer(tokens["edna"]), "If-Match": '"greenhouse-demo-r1"'}
    response = client.put("/v1/designs/greenhouse-demo", json=changed, headers=headers)
    assert response.status_code == 200 and response.headers["ETag"] == '"greenhouse-demo-r2"'
    assert_problem(client.put("/v1/designs/greenhouse-demo", json=changed, headers=headers), 412)
    headers["If-Match"] = '"greenhouse-demo-r2"'
    assert client.delete("/v1/designs/greenhouse-demo", headers=headers).get_json()["status"] == "retired"
    history = client.get("/v1/designs/greenhouse-demo/revisions").get_json()["revisions"]
    assert [(r["revision"], r["inputs"]["channels"]) for r in history] == [(1, 6), (2, 8)]
    assert client.get("/v1/designs?status=active").get_json()["total"] == 0


def test_writes_need_an_editor_and_a_valid_request(client: FlaskClient, seeded: Any, tokens: dict[str, str]) -> None:
    body = {"design_id": "bad", "request": {**DEMO, "current_a": "20 parsecs"}}
    assert_problem(client.post("/v1/designs", json=body), 401)
    assert_problem(client.post("/v1/designs", json=body, headers=bearer(tokens["edna"])), 422, "request.current_a")
    body["request"] = {**DEMO, "led": "led-none"}
    assert_problem(client.post("/v1/designs", json=body, headers=bearer(tokens["edna"])), 404, "led")
    save_demo(client, tokens)
    assert_problem(client.post("/v1/designs", json={"design_id": "greenhouse-demo", "request": DEMO},
                               headers=bearer(tokens["edna"])), 409)  # fmt: skip
    assert_problem(client.get("/v1/designs/none-such"), 404)
    assert_problem(client.get("/v1/parts/none-such/impact"), 404)
    # A revision number beyond what a store can hold is no revision, not a server error.
    assert_problem(client.get("/v1/parts/led-red-5mm/revisions/6229233006003852673024/impact"), 404, "revision")


def test_a_single_calculation_is_a_design_too(client: FlaskClient, seeded: Any, tokens: dict[str, str]) -> None:
    request = {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "leds_in_series": 3, "current_a": "20 mA"}
    body = {"design_id": "indicator", "calculation": "led-string", "request": request}
    response = client.post("/v1/designs", json=body, headers=bearer(tokens["edna"]))
    assert response.status_code == 201, response.get_json()
    direct = client.post("/v1/calc/led-string", json=request).get_json()
    assert response.get_json()["review"]["fingerprint"] == direct["fingerprint"]
    edit_led(client, tokens, HIGH_VF_BATCH)
    impact = client.get("/v1/parts/led-red-5mm/impact").get_json()
    assert [d["design_id"] for d in impact["designs"]] == ["indicator"]
