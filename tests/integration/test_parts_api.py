"""The revisioned parts table over HTTP: create, read, edit with ETags, approve, retire, history."""

from __future__ import annotations

from typing import Any

import pytest
from flask import Flask
from flask.testing import FlaskClient
from helpers import assert_problem, bearer

from calcsvc.data.kinds import MAX_DESCRIPTION_LENGTH, MAX_TEXT_LENGTH
from calcsvc.data.store import PartStore
from calcsvc.data.store_errors import InvalidPart

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


def approve(client: FlaskClient, token: str, etag: str | None, part_id: str = "led-amber-3mm") -> Any:
    headers = bearer(token) | ({"If-Match": etag} if etag else {})
    return client.post(f"/v1/parts/{part_id}/approve", headers=headers)


def retire(client: FlaskClient, token: str, etag: str | None, reason: str | None = None) -> Any:
    headers = bearer(token) | ({"If-Match": etag} if etag else {})
    return client.delete(
        "/v1/parts/led-amber-3mm", json=None if reason is None else {"reason": reason}, headers=headers
    )


def edit(client: FlaskClient, token: str, etag: str, if_max_a: float) -> Any:
    body = {"parameters": {**LED["parameters"], "if_max_a": if_max_a}}
    return client.put("/v1/parts/led-amber-3mm", json=body, headers={**bearer(token), "If-Match": etag})


def test_review_workflow(client: FlaskClient, tokens: dict[str, str]) -> None:
    etag = create(client, tokens["rita"]).headers["ETag"]  # a reviewer may also author
    assert_problem(approve(client, tokens["edna"], etag), 403)
    assert_problem(approve(client, tokens["rita"], etag), 403, "revision")
    approved = approve(client, tokens["ravi"], etag)
    assert approved.status_code == 200 and approved.headers["ETag"] == etag
    assert (approved.get_json()["status"], approved.get_json()["approved_by"]) == ("approved", "ravi")
    edited = edit(client, tokens["edna"], approved.headers["ETag"], 0.025)
    assert (edited.get_json()["status"], edited.get_json()["approved_by"]) == ("draft", None)
    assert_problem(approve(client, tokens["ravi"], etag), 412, "If-Match")
    history = client.get("/v1/parts/led-amber-3mm/revisions").get_json()["revisions"]
    assert history[0]["approved_by"] == "ravi" and history[1]["approved_by"] is None
    assert [[(e["action"], e["actor"]) for e in r["events"]] for r in history] == [
        [("created", "rita"), ("approved", "ravi")],
        [("edited", "edna")],
    ]


def test_approval_names_the_revision_it_approves(client: FlaskClient, tokens: dict[str, str]) -> None:
    etag = create(client, tokens["edna"]).headers["ETag"]
    etag = edit(client, tokens["edna"], etag, 0.025).headers["ETag"]
    read_by_reviewer = edit(client, tokens["edna"], etag, 0.028).headers["ETag"]  # revision 3, what rita reads
    edit(client, tokens["edna"], read_by_reviewer, 0.05)  # revision 4, which rita has not seen
    assert_problem(approve(client, tokens["rita"], None), 428, "If-Match")
    assert_problem(approve(client, tokens["rita"], read_by_reviewer), 412, "If-Match")
    for not_an_etag in ('"led-amber-3mm-r4" x', '"other-part-r4"', "*", '"led-amber-3mm-r99999999999"'):
        assert_problem(approve(client, tokens["rita"], not_an_etag), 412)
    stored = client.get("/v1/parts/led-amber-3mm")
    assert (stored.get_json()["status"], stored.get_json()["revision"]) == ("draft", 4)
    assert all(
        r["approved_by"] is None for r in client.get("/v1/parts/led-amber-3mm/revisions").get_json()["revisions"]
    )
    assert approve(client, tokens["rita"], stored.headers["ETag"]).get_json()["approved_by"] == "rita"


def test_retire_needs_if_match_is_in_the_history_and_is_undone_by_review(
    client: FlaskClient, tokens: dict[str, str]
) -> None:
    etag = create(client, tokens["edna"]).headers["ETag"]
    etag = approve(client, tokens["rita"], etag).headers["ETag"]
    assert_problem(client.delete("/v1/parts/led-amber-3mm"), 401)
    assert_problem(retire(client, tokens["edna"], None), 428, "If-Match")
    assert_problem(retire(client, tokens["edna"], '"led-amber-3mm-r2"'), 412, "If-Match")
    assert_problem(retire(client, tokens["edna"], etag, reason="x" * 501), 422, "reason")
    assert client.get("/v1/parts/led-amber-3mm").get_json()["status"] == "approved"

    retired = retire(client, tokens["edna"], etag, reason="replaced by a brighter amber")
    assert retired.status_code == 200 and retired.get_json()["status"] == "retired"
    assert retire(client, tokens["edna"], etag).get_json()["status"] == "retired"  # a repeat changes nothing
    (revision,) = client.get("/v1/parts/led-amber-3mm/revisions").get_json()["revisions"]
    assert [(e["action"], e["actor"], e["reason"]) for e in revision["events"]] == [
        ("created", "edna", None),
        ("approved", "rita", None),
        ("retired", "edna", "replaced by a brighter amber"),
    ]
    assert revision["approved_by"] == "rita"  # the approval of what was retired is kept
    assert_problem(approve(client, tokens["rita"], etag), 409)
    assert_problem(edit(client, tokens["edna"], etag, 0.025), 409)
    calc = {"led": "led-amber-3mm", "supply_v": 12, "leds_in_series": 3, "current_a": 0.02}
    assert_problem(client.post("/v1/calc/led-string", json=calc), 422, "led")

    assert_problem(client.post("/v1/parts/led-amber-3mm/restore", headers=bearer(tokens["edna"])), 428)
    assert_problem(client.post("/v1/parts/led-amber-3mm/restore", headers={"If-Match": etag}), 401)
    restored = client.post(
        "/v1/parts/led-amber-3mm/restore",
        json={"reason": "still stocked"},
        headers=bearer(tokens["edna"]) | {"If-Match": etag},
    )
    assert restored.status_code == 200 and restored.headers["ETag"] == '"led-amber-3mm-r2"'
    assert (restored.get_json()["status"], restored.get_json()["parameters"]) == (
        "draft",
        retired.get_json()["parameters"],
    )
    assert_problem(
        client.post("/v1/parts/led-amber-3mm/restore", headers=bearer(tokens["edna"]) | {"If-Match": etag}), 412
    )
    used = client.post("/v1/calc/led-string", json=calc).get_json()
    assert used["warnings"] == ["led 'led-amber-3mm' revision 2 is draft, not approved"]
    assert_problem(approve(client, tokens["edna"], restored.headers["ETag"]), 403)
    assert approve(client, tokens["rita"], restored.headers["ETag"]).get_json()["status"] == "approved"
    history = client.get("/v1/parts/led-amber-3mm/revisions").get_json()["revisions"]
    assert [[(e["action"], e["reason"]) for e in r["events"]] for r in history] == [
        [("created", None), ("approved", None), ("retired", "replaced by a brighter amber")],
        [("restored", "still stocked"), ("approved", None)],
    ]


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
    etag = create(client, tokens["edna"]).headers["ETag"]
    approve(client, tokens["rita"], etag)
    again = approve(client, tokens["ravi"], etag)
    assert again.status_code == 200 and again.get_json()["approved_by"] == "rita"
    history = client.get("/v1/parts/led-amber-3mm/revisions").get_json()["revisions"]
    assert history[0]["approved_by"] == "rita"
    assert [e["action"] for e in history[0]["events"]] == ["created", "approved"]


def test_text_is_kept_only_within_its_published_length(app: Flask, client: FlaskClient, tokens: dict[str, str]) -> None:
    """Every list, page and export repeats a part's text to every reader: a colour of megabytes is refused."""
    parameters = LED["parameters"]
    for part, field in [
        ({**LED, "parameters": {**parameters, "color": "x" * (MAX_TEXT_LENGTH + 1)}}, "parameters.color"),
        ({**LED, "parameters": {**parameters, "color": "x" * 2**19}}, "parameters.color"),
        ({**LED, "description": "x" * (MAX_DESCRIPTION_LENGTH + 1)}, "description"),
    ]:
        assert_problem(create(client, tokens["edna"], part), 422, field)
    longest = {"color": "x" * MAX_TEXT_LENGTH}
    assert create(client, tokens["edna"], {**LED, "parameters": {**parameters, **longest}}).status_code == 201
    url = f"/v1/parts/{LED['part_id']}"
    edit = {"parameters": {**parameters, "color": "x" * 2**19}}
    headers = {**bearer(tokens["edna"]), "If-Match": client.get(url).headers["ETag"]}
    assert_problem(client.put(url, json=edit, headers=headers), 422, "parameters.color")
    # A body of megabytes is over the route's limit before any field is read.
    too_big = {**LED, "parameters": {**parameters, "color": "x" * 2**20}}
    assert create(client, tokens["edna"], too_big).status_code == 413
    # The store itself refuses, whatever writes to it (seed files, scripts).
    si = {"color": "amber", "vf_typ_v": 2.1, "vf_min_v": 1.9, "vf_max_v": 2.5, "if_test_a": 0.02, "if_max_a": 0.03}
    with app.extensions["calcsvc.db"].transaction() as session, pytest.raises(InvalidPart) as refused:
        PartStore(session).create("led-long", "led", "x" * (MAX_DESCRIPTION_LENGTH + 1), si, "edna")
    assert set(refused.value.errors) == {"description"}
