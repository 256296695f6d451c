"""The revisioned parts table over HTTP: create, read, edit with ETags, approve, retire, history."""

from __future__ import annotations

from typing import Any

import pytest
from flask import Flask
from flask.testing import FlaskClient
from helpers import assert_problem, bearer

from calcsvc.data.kinds import MAX_DESCRIPTION_LENGTH, MAX_TEXT_LENGTH
from calcsvc.data.store import InvalidPart, PartStore

LED = {
    "part_id": "led-amber-3mm",
    "kind": "led",
    "description": "Amber indicator LED, 3 mm (typical values)",
    "parameters": {
        "color": "amber",
        "vf_typ_v": 2.1,
        "vf_min_v": "1.9 V",
        "vf_max_v": 2.5,
        "if_test_a": "20 mA",
        "if_max_a": 0.03,
    },
}


def create(client: FlaskClient, token: str, body: dict[str, Any] = LED) -> Any:
    return client.post("/v1/parts", json=body, headers=bearer(token))


def test_seeded_parts_are_listed_by_kind(client: FlaskClient, seeded: Any) -> None:
    response = client.get("/v1/parts?kind=opamp")
    assert response.status_code == 200
    body = response.get_json()
    assert body["total"] == len(body["items"]) >= 3
    assert {item["kind"] for item in body["items"]} == {"opamp"}
    assert all(item["status"] == "approved" and item["approved_by"] == "seed" for item in body["items"])


def test_create_converts_units_and_returns_location_and_etag(client: FlaskClient, tokens: dict[str, str]) -> None:
    response = create(client, tokens["edna"])
    assert response.status_code == 201
    assert response.headers["Location"] == "/v1/parts/led-amber-3mm"
    assert response.headers["ETag"] == '"led-amber-3mm-r1"'
    part = response.get_json()
    assert part["parameters"]["vf_min_v"] == 1.9
    assert part["parameters"]["if_test_a"] == 0.02
    assert (part["status"], part["revision"], part["updated_by"]) == ("draft", 1, "edna")
    again = create(client, tokens["edna"])
    assert_problem(again, 409, "part_id")


def test_paginates(client: FlaskClient, seeded: Any) -> None:
    first = client.get("/v1/parts?limit=5&offset=0").get_json()
    second = client.get("/v1/parts?limit=5&offset=5").get_json()
    assert len(first["items"]) == 5 and len(second["items"]) == 5
    assert not {p["part_id"] for p in first["items"]} & {p["part_id"] for p in second["items"]}
    assert first["total"] == second["total"] >= 20


def test_cross_field_rules_and_dimensions_name_the_field(client: FlaskClient, tokens: dict[str, str]) -> None:
    bad_order = {**LED, "parameters": {**LED["parameters"], "vf_min_v": 2.3, "vf_typ_v": 2.1}}
    assert_problem(create(client, tokens["edna"], bad_order), 422, "parameters.vf_typ_v")
    wrong_unit = {**LED, "parameters": {**LED["parameters"], "if_max_a": "30 mV"}}
    body = assert_problem(create(client, tokens["edna"], wrong_unit), 422, "parameters.if_max_a")
    assert "dimension" in body["errors"]["parameters.if_max_a"][0]
    missing = {**LED, "parameters": {"color": "amber"}}
    assert_problem(create(client, tokens["edna"], missing), 422, "parameters.vf_typ_v")
    unknown = {**LED, "parameters": {**LED["parameters"], "gbw_hz": 1e6}}
    assert_problem(create(client, tokens["edna"], unknown), 422, "parameters.gbw_hz")
    assert client.get("/v1/parts").get_json()["total"] == 0


def test_edit_needs_if_match_and_rejects_stale_etags(client: FlaskClient, tokens: dict[str, str]) -> None:
    etag = create(client, tokens["edna"]).headers["ETag"]
    changed = {"parameters": {**LED["parameters"], "if_max_a": 0.025}}
    assert_problem(client.put("/v1/parts/led-amber-3mm", json=changed, headers=bearer(tokens["edna"])), 428)
    first = client.put("/v1/parts/led-amber-3mm", json=changed, headers={**bearer(tokens["edna"]), "If-Match": etag})
    assert first.status_code == 200
    assert first.headers["ETag"] == '"led-amber-3mm-r2"'
    assert first.get_json()["parameters"]["if_max_a"] == 0.025
    stale = {"parameters": {**LED["parameters"], "if_max_a": 0.02}}
    response = client.put("/v1/parts/led-amber-3mm", json=stale, headers={**bearer(tokens["edna"]), "If-Match": etag})
    assert_problem(response, 412)
    stored = client.get("/v1/parts/led-amber-3mm").get_json()
    assert stored["parameters"]["if_max_a"] == 0.025 and stored["revision"] == 2


def test_revisions_keep_every_edit(client: FlaskClient, tokens: dict[str, str]) -> None:
    etag = create(client, tokens["edna"]).headers["ETag"]
    for current in (0.025, 0.028):
        params = {**LED["parameters"], "if_max_a": current}
        response = client.put(
            "/v1/parts/led-amber-3mm",
            json={"parameters": params},
            headers={**bearer(tokens["edna"]), "If-Match": etag},
        )
        etag = response.headers["ETag"]
    history = client.get("/v1/parts/led-amber-3mm/revisions").get_json()["revisions"]
    assert [r["revision"] for r in history] == [1, 2, 3]
    assert [r["parameters"]["if_max_a"] for r in history] == [0.03, 0.025, 0.028]
    assert {r["author"] for r in history} == {"edna"}


def test_review_workflow(client: FlaskClient, tokens: dict[str, str]) -> None:
    create(client, tokens["rita"])  # a reviewer may also author
    assert_problem(client.post("/v1/parts/led-amber-3mm/approve", headers=bearer(tokens["edna"])), 403)
    assert_problem(client.post("/v1/parts/led-amber-3mm/approve", headers=bearer(tokens["rita"])), 403, "revision")
    approved = client.post("/v1/parts/led-amber-3mm/approve", json={"revision": 1}, headers=bearer(tokens["ravi"]))
    assert approved.status_code == 200
    assert (approved.get_json()["status"], approved.get_json()["approved_by"]) == ("approved", "ravi")
    params = {**LED["parameters"], "if_max_a": 0.025}
    edited = client.put(
        "/v1/parts/led-amber-3mm",
        json={"parameters": params},
        headers={**bearer(tokens["edna"]), "If-Match": approved.headers["ETag"]},
    )
    assert (edited.get_json()["status"], edited.get_json()["approved_by"]) == ("draft", None)
    stale_approval = client.post(
        "/v1/parts/led-amber-3mm/approve", json={"revision": 1}, headers=bearer(tokens["ravi"])
    )
    assert_problem(stale_approval, 412)
    history = client.get("/v1/parts/led-amber-3mm/revisions").get_json()["revisions"]
    assert history[0]["approved_by"] == "ravi" and history[1]["approved_by"] is None


def test_retire_keeps_history(client: FlaskClient, tokens: dict[str, str]) -> None:
    create(client, tokens["edna"])
    assert_problem(client.delete("/v1/parts/led-amber-3mm"), 401)
    retired = client.delete("/v1/parts/led-amber-3mm", headers=bearer(tokens["edna"]))
    assert retired.status_code == 200 and retired.get_json()["status"] == "retired"
    assert client.get("/v1/parts/led-amber-3mm").get_json()["status"] == "retired"
    assert len(client.get("/v1/parts/led-amber-3mm/revisions").get_json()["revisions"]) == 1
    assert_problem(client.post("/v1/parts/led-amber-3mm/approve", headers=bearer(tokens["rita"])), 409)


def test_writes_need_a_valid_token(client: FlaskClient, tokens: dict[str, str]) -> None:
    response = client.post("/v1/parts", json=LED)
    assert_problem(response, 401)
    assert response.headers["WWW-Authenticate"].startswith("Bearer")
    assert_problem(client.post("/v1/parts", json=LED, headers=bearer("cs_not-a-token")), 401)
    assert_problem(client.post("/v1/parts", json=LED, headers={"Authorization": "Basic abc"}), 401)


def test_unknown_part_is_404_problem(client: FlaskClient) -> None:
    assert_problem(client.get("/v1/parts/no-such-part"), 404, "part_id")
    assert_problem(client.get("/v1/parts/no-such-part/revisions"), 404)


def test_a_second_approval_keeps_the_first(client: FlaskClient, tokens: dict[str, str]) -> None:
    create(client, tokens["edna"])
    client.post("/v1/parts/led-amber-3mm/approve", headers=bearer(tokens["rita"]))
    again = client.post("/v1/parts/led-amber-3mm/approve", headers=bearer(tokens["ravi"]))
    assert again.status_code == 200 and again.get_json()["approved_by"] == "rita"
    history = client.get("/v1/parts/led-amber-3mm/revisions").get_json()["revisions"]
    assert history[0]["approved_by"] == "rita"


def test_text_is_kept_only_within_its_published_length(app: Flask, client: FlaskClient, tokens: dict[str, str]) -> None:
    """Every list, page and export repeats a part's text to every reader: a colour of megabytes is refused."""
    parameters = LED["parameters"]
    for part, field in [
        ({**LED, "parameters": {**parameters, "color": "x" * (MAX_TEXT_LENGTH + 1)}}, "parameters.color"),
        ({**LED, "parameters": {**parameters, "color": "x" * 2**20}}, "parameters.color"),
        ({**LED, "description": "x" * (MAX_DESCRIPTION_LENGTH + 1)}, "description"),
    ]:
        assert_problem(create(client, tokens["edna"], part), 422, field)
    longest = {"color": "x" * MAX_TEXT_LENGTH}
    assert create(client, tokens["edna"], {**LED, "parameters": {**parameters, **longest}}).status_code == 201
    url = f"/v1/parts/{LED['part_id']}"
    edit = {"parameters": {**parameters, "color": "x" * 2**20}}
    headers = {**bearer(tokens["edna"]), "If-Match": client.get(url).headers["ETag"]}
    assert_problem(client.put(url, json=edit, headers=headers), 422, "parameters.color")
    # The store itself refuses, whatever writes to it (seed files, scripts).
    si = {"color": "amber", "vf_typ_v": 2.1, "vf_min_v": 1.9, "vf_max_v": 2.5, "if_test_a": 0.02, "if_max_a": 0.03}
    with app.extensions["calcsvc.db"].transaction() as session, pytest.raises(InvalidPart) as refused:
        PartStore(session).create("led-long", "led", "x" * (MAX_DESCRIPTION_LENGTH + 1), si, "edna")
    assert set(refused.value.errors) == {"description"}
