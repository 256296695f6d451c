"""Concurrent writers over real HTTP: of editors holding the same ETag exactly one wins, whole, and an
approval or a retirement racing an edit never lands on a revision it was not aimed at. Runs on every
configured store."""

from __future__ import annotations

import threading
from collections import Counter
from collections.abc import Callable, Iterator
from functools import partial
from typing import Any

import pytest
import requests
from flask import Flask
from flask.testing import FlaskClient
from helpers import as_flask, assert_problem, bearer, live_server
from sqlalchemy import select

from calcsvc.data.models import Part, PartRevision

WRITERS = 20
RACES = 20
TIMEOUT_S = 60  # a guard against a hung request, far above any normal answer

LED = {
    "part_id": "led-race",
    "kind": "led",
    "description": "Grow-light LED string element (typical values)",
    "parameters": {
        "color": "deep red",
        "vf_typ_v": 2.1,
        "vf_min_v": 1.9,
        "vf_max_v": 2.5,
        "if_test_a": 0.02,
        "if_max_a": 0.03,
    },
}


def writer_edit(k: int) -> dict[str, Any]:
    """Writer k's edit: every field it sends carries k, so a stored mix of two writers shows."""
    return {
        "description": f"writer {k}",
        "parameters": {
            "color": f"deep red {k}",
            "vf_typ_v": 2.1 + k / 1000,
            "vf_min_v": 1.9 + k / 1000,
            "vf_max_v": 2.5 + k / 1000,
            "if_test_a": 0.02,
            "if_max_a": 0.021 + k / 1000,
        },
    }


def run_together(calls: list[Callable[[], requests.Response]]) -> list[requests.Response]:
    """Run each call on its own thread, released at once by a barrier; answers in the calls' order."""
    barrier = threading.Barrier(len(calls))
    answers: list[Any] = [None] * len(calls)

    def run(index: int) -> None:
        barrier.wait()
        try:
            answers[index] = calls[index]()
        except Exception as exc:  # kept, so the assertion below names it instead of a silent thread death
            answers[index] = exc

    threads = [threading.Thread(target=run, args=(i,)) for i in range(len(calls))]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    failures = [a for a in answers if not isinstance(a, requests.Response)]
    assert not failures, failures
    return answers


def server_errors(responses: list[requests.Response]) -> list[str]:
    """Bodies of 5xx answers: "database is locked" and the like would show up here."""
    return [r.text for r in responses if r.status_code >= 500]


@pytest.fixture
def base_url(app: Flask) -> Iterator[str]:
    with live_server(app) as url:
        yield url


def assert_store_consistent(app: Flask) -> None:
    """Every part's current row equals its revision row at the current revision, approval included."""
    with app.extensions["calcsvc.db"].transaction() as session:
        for part in session.scalars(select(Part)):
            row = session.get(PartRevision, (part.part_id, part.revision))
            assert row is not None, part.part_id
            assert (row.description, row.parameters) == (part.description, part.parameters)
            if part.status == "approved":
                assert part.approved_by is not None and row.approved_by == part.approved_by, part.part_id


def test_one_of_twenty_editors_with_the_same_etag_wins_whole(
    app: Flask, client: FlaskClient, tokens: dict[str, str], base_url: str
) -> None:
    created = client.post("/v1/parts", json=LED, headers=bearer(tokens["edna"]))
    assert created.status_code == 201
    etag = created.headers["ETag"]
    url = f"{base_url}/v1/parts/{LED['part_id']}"
    headers = {**bearer(tokens["edna"]), "If-Match": etag}

    answers = run_together(
        [partial(requests.put, url, json=writer_edit(k), headers=headers, timeout=TIMEOUT_S) for k in range(WRITERS)]
    )

    assert not server_errors(answers)
    assert Counter(r.status_code for r in answers) == {200: 1, 412: WRITERS - 1}
    for answer in answers:
        if answer.status_code == 412:
            assert_problem(as_flask(answer), 412, "If-Match")
    (winner,) = [k for k, r in enumerate(answers) if r.status_code == 200]
    expected = writer_edit(winner)

    stored = client.get(url.removeprefix(base_url))
    assert stored.headers["ETag"] == '"led-race-r2"'
    part = stored.get_json()
    assert (part["revision"], part["status"], part["updated_by"]) == (2, "draft", "edna")
    assert (part["description"], part["parameters"]) == (expected["description"], expected["parameters"])
    assert answers[winner].json() == part

    history = client.get(f"/v1/parts/{LED['part_id']}/revisions").get_json()["revisions"]
    assert [r["revision"] for r in history] == [1, 2]
    assert (history[1]["description"], history[1]["parameters"]) == (expected["description"], expected["parameters"])
    assert (history[0]["description"], history[0]["parameters"]) == (LED["description"], LED["parameters"])
    assert_store_consistent(app)


def test_approval_racing_an_edit_never_lands_on_another_revision(
    app: Flask, client: FlaskClient, tokens: dict[str, str], base_url: str
) -> None:
    outcomes: Counter[str] = Counter()
    for race in range(RACES):
        part_id = f"led-race-{race}"
        response = client.post("/v1/parts", json={**LED, "part_id": part_id}, headers=bearer(tokens["edna"]))
        for k in range(race % 3):  # races at revisions 1, 2 and 3
            response = client.put(
                f"/v1/parts/{part_id}",
                json=writer_edit(k),
                headers={**bearer(tokens["edna"]), "If-Match": response.headers["ETag"]},
            )
        assert response.status_code in (200, 201)
        aimed = response.get_json()["revision"]
        url = f"{base_url}/v1/parts/{part_id}"

        approve, edit = run_together(
            [
                partial(
                    requests.post,
                    f"{url}/approve",
                    headers={**bearer(tokens["rita"]), "If-Match": response.headers["ETag"]},
                    timeout=TIMEOUT_S,
                ),
                partial(
                    requests.put,
                    url,
                    json=writer_edit(WRITERS),
                    headers={**bearer(tokens["edna"]), "If-Match": response.headers["ETag"]},
                    timeout=TIMEOUT_S,
                ),
            ]
        )

        assert not server_errors([approve, edit])
        assert edit.status_code == 200, edit.text  # an approval never moves the revision, so the edit stands
        current = client.get(f"/v1/parts/{part_id}").get_json()
        assert (current["revision"], current["status"], current["approved_by"]) == (aimed + 1, "draft", None)
        history = client.get(f"/v1/parts/{part_id}/revisions").get_json()["revisions"]
        assert [r["revision"] for r in history] == list(range(1, aimed + 2))
        assert history[-1]["approved_by"] is None
        if approve.status_code == 200:
            outcomes["approved, then edited"] += 1
            assert (approve.json()["revision"], approve.json()["status"]) == (aimed, "approved")
            assert history[aimed - 1]["approved_by"] == "rita"
        else:
            outcomes["edited, approval refused"] += 1
            assert_problem(as_flask(approve), 412, "If-Match")
            assert history[aimed - 1]["approved_by"] is None
    assert outcomes.total() == RACES
    print(f"approve/edit race outcomes: {dict(outcomes)}")
    assert_store_consistent(app)


def test_a_retirement_racing_an_edit_never_retires_a_revision_it_was_not_aimed_at(
    app: Flask, client: FlaskClient, tokens: dict[str, str], base_url: str
) -> None:
    outcomes: Counter[str] = Counter()
    for race in range(RACES // 2):
        part_id = f"led-retire-race-{race}"
        created = client.post("/v1/parts", json={**LED, "part_id": part_id}, headers=bearer(tokens["edna"]))
        aimed = {"If-Match": created.headers["ETag"]}
        url = f"{base_url}/v1/parts/{part_id}"
        retire, edit = run_together(
            [
                partial(
                    requests.delete,
                    url,
                    json={"reason": "race"},
                    headers={**bearer(tokens["edna"]), **aimed},
                    timeout=TIMEOUT_S,
                ),
                partial(
                    requests.put,
                    url,
                    json=writer_edit(race),
                    headers={**bearer(tokens["ravi"]), **aimed},
                    timeout=TIMEOUT_S,
                ),
            ]
        )
        assert not server_errors([retire, edit])
        current = client.get(f"/v1/parts/{part_id}").get_json()
        events = [
            (r["revision"], e["action"])
            for r in client.get(f"/v1/parts/{part_id}/revisions").get_json()["revisions"]
            for e in r["events"]
        ]
        if retire.status_code == 200:  # retired first: the edit of a retired part is refused
            outcomes["retired, edit refused"] += 1
            assert_problem(as_flask(edit), 409)
            assert (current["revision"], current["status"]) == (1, "retired")
            assert events == [(1, "created"), (1, "retired")]
        else:  # edited first: the retirement named revision 1, which is no longer current
            outcomes["edited, retirement refused"] += 1
            assert edit.status_code == 200, edit.text
            assert_problem(as_flask(retire), 412, "If-Match")
            assert (current["revision"], current["status"]) == (2, "draft")
            assert events == [(1, "created"), (2, "edited")]
    print(f"retire/edit race outcomes: {dict(outcomes)}")
    assert_store_consistent(app)
