"""Sending a draft back with a reason and commenting on revisions over HTTP: kept with the revision's history,
visible to its author in the revisions API."""

from __future__ import annotations

from typing import Any

from flask.testing import FlaskClient
from helpers import assert_problem, bearer

LED = {
    "part_id": "led-amber-3mm",
    "kind": "led",
    "description": "Amber indicator LED, 3 mm (typical values)",
    "parameters": {"color": "amber", "vf_typ_v": 2.1, "vf_min_v": 1.9, "vf_max_v": 2.5, "if_test_a": 0.02,
                   "if_max_a": 0.03},
}  # fmt: skip


def send_back(client: FlaskClient, token: str, etag: str | None, reason: Any = "vf_max_v is the 10 mA figure") -> Any:
    headers = {**bearer(token), **({"If-Match": etag} if etag else {})}
    return client.post("/v1/parts/led-amber-3mm/send-back", json={"reason": reason}, headers=headers)


def events(client: FlaskClient, revision: int) -> list[dict[str, Any]]:
    revisions = client.get("/v1/parts/led-amber-3mm/revisions").get_json()["revisions"]
    return next(r for r in revisions if r["revision"] == revision)["events"]


def test_a_reviewer_sends_a_draft_back_and_its_author_reads_why(client: FlaskClient, tokens: dict[str, str]) -> None:
    etag = client.post("/v1/parts", json=LED, headers=bearer(tokens["edna"])).headers["ETag"]
    returned = send_back(client, tokens["rita"], etag)
    assert returned.status_code == 200, returned.get_json()
    assert returned.get_json()["status"] == "draft" and returned.headers["ETag"] == etag  # still a draft, same revision
    sent = [e for e in events(client, 1) if e["action"] == "returned"]
    assert [(e["actor"], e["reason"]) for e in sent] == [("rita", "vf_max_v is the 10 mA figure")]
    # The author answers with an edit: a new draft revision; the reason stays with revision 1.
    edited = client.put(
        "/v1/parts/led-amber-3mm",
        json={"parameters": {**LED["parameters"], "vf_max_v": 2.6}},
        headers={**bearer(tokens["edna"]), "If-Match": etag},
    )
    assert edited.get_json()["revision"] == 2
    assert [e["action"] for e in events(client, 1)] == ["created", "returned"]
    assert [e["action"] for e in events(client, 2)] == ["edited"]


def test_send_back_refusals(client: FlaskClient, tokens: dict[str, str]) -> None:
    etag = client.post("/v1/parts", json=LED, headers=bearer(tokens["edna"])).headers["ETag"]
    assert_problem(send_back(client, tokens["edna"], etag), 403)  # an editor may not
    assert_problem(send_back(client, tokens["rita"], None), 428, "If-Match")
    assert_problem(send_back(client, tokens["rita"], '"led-amber-3mm-r2"'), 412, "If-Match")
    assert_problem(send_back(client, tokens["rita"], etag, ""), 422, "reason")
    assert_problem(send_back(client, tokens["rita"], etag, "x" * 2001), 422, "reason")
    missing = client.post(
        "/v1/parts/led-amber-3mm/send-back", json={}, headers={**bearer(tokens["rita"]), "If-Match": etag}
    )
    assert_problem(missing, 422, "reason")
    approved = client.post("/v1/parts/led-amber-3mm/approve", headers={**bearer(tokens["rita"]), "If-Match": etag})
    assert approved.get_json()["status"] == "approved"
    assert_problem(send_back(client, tokens["ravi"], etag), 409)  # only a draft goes back
    assert [e["action"] for e in events(client, 1)] == ["created", "approved"]


def test_comments_are_part_of_a_revisions_history(client: FlaskClient, tokens: dict[str, str]) -> None:
    client.post("/v1/parts", json=LED, headers=bearer(tokens["edna"]))
    url = "/v1/parts/led-amber-3mm/revisions/1/comments"
    answer = client.post(url, json={"comment": "bench-measured at 20 mA"}, headers=bearer(tokens["edna"]))
    assert answer.status_code == 200
    assert answer.get_json()["revisions"][0]["events"][-1] | {"at": None} == {
        "action": "commented", "actor": "edna", "reason": "bench-measured at 20 mA", "at": None,
    }  # fmt: skip
    assert events(client, 1)[-1]["reason"] == "bench-measured at 20 mA"
    assert_problem(client.post(url, json={"comment": "x"}), 401)
    assert_problem(client.post(url, json={"comment": ""}, headers=bearer(tokens["rita"])), 422, "comment")
    unknown = client.post(
        "/v1/parts/led-amber-3mm/revisions/9/comments", json={"comment": "x"}, headers=bearer(tokens["rita"])
    )
    assert_problem(unknown, 404, "revision")
    # A revision number beyond what a store can hold (past a 32-bit integer) is no revision, not a server error.
    beyond = client.post(
        "/v1/parts/led-amber-3mm/revisions/3956203962/comments", json={"comment": "x"}, headers=bearer(tokens["rita"])
    )
    assert_problem(beyond, 404, "revision")
