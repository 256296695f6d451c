"""Who may do what: bearer tokens and roles, tokens kept only as digests, protected reads, CORS, and the
token commands of the CLI. Runs on every configured store."""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
from collections.abc import Iterator
from typing import Any

import pytest
from flask import Flask
from flask.testing import FlaskClient
from helpers import assert_problem, bearer
from sqlalchemy import text
from test_concurrency import LED, writer_edit

from calcsvc import create_app
from calcsvc.data.tokens import revoke_token

BROWSER_ORIGIN = "https://parts.greenhouse.example"
READS = ("/v1/parts", f"/v1/parts/{LED['part_id']}", f"/v1/parts/{LED['part_id']}/revisions")


def assert_challenged(response: Any) -> None:
    assert_problem(response, 401)
    assert response.headers["WWW-Authenticate"].startswith("Bearer ")


@pytest.fixture
def part(client: FlaskClient, tokens: dict[str, str]) -> Any:
    """LED at revision 1, written by edna."""
    created = client.post("/v1/parts", json=LED, headers=bearer(tokens["edna"]))
    assert created.status_code == 201
    return created


def configured_app(database_url: str, **settings: Any) -> Iterator[Flask]:
    app = create_app({"DATABASE_URL": database_url, **settings})
    yield app
    app.extensions["calcsvc.db"].dispose()


@pytest.fixture
def protected(app: Flask, database_url: str) -> Iterator[Flask]:
    """An app on the same database whose reads need a token."""
    yield from configured_app(database_url, READ_REQUIRES_TOKEN=True)


@pytest.fixture
def cors(app: Flask, database_url: str) -> Iterator[Flask]:
    """An app on the same database that lets one browser origin call it."""
    yield from configured_app(database_url, CORS_ORIGINS=[BROWSER_ORIGIN])


def test_every_write_without_a_token_is_challenged(client: FlaskClient, part: Any) -> None:
    url = f"/v1/parts/{LED['part_id']}"
    etag = {"If-Match": part.headers["ETag"]}
    assert_challenged(client.post("/v1/parts", json={**LED, "part_id": "led-other"}))
    assert_challenged(client.put(url, json=writer_edit(1), headers=etag))
    assert_challenged(client.post(f"{url}/approve", headers=etag))
    assert_challenged(client.delete(url, headers=etag))
    assert_challenged(client.post(f"{url}/restore", headers=etag))
    assert_challenged(client.put(url, json=writer_edit(1), headers={**etag, **bearer("cs_not-a-token")}))
    stored = client.get(url).get_json()
    assert (stored["revision"], stored["status"]) == (1, "draft")
    assert client.get("/v1/parts").get_json()["total"] == 1


def test_approval_needs_a_reviewer_who_did_not_write_the_revision(
    client: FlaskClient, tokens: dict[str, str], part: Any
) -> None:
    url = f"/v1/parts/{LED['part_id']}"
    body = assert_problem(
        client.post(f"{url}/approve", headers={**bearer(tokens["edna"]), "If-Match": part.headers["ETag"]}), 403
    )
    assert "reviewer" in body["detail"]
    # ravi, a reviewer, edits: revision 2 is his, so he may not approve it, while rita may.
    edited = client.put(url, json=writer_edit(1), headers={**bearer(tokens["ravi"]), "If-Match": part.headers["ETag"]})
    assert edited.status_code == 200
    revision_2 = {"If-Match": edited.headers["ETag"]}
    refused = client.post(f"{url}/approve", headers={**bearer(tokens["ravi"]), **revision_2})
    assert_problem(refused, 403, "revision")
    assert client.get(url).get_json()["status"] == "draft"
    approved = client.post(f"{url}/approve", headers={**bearer(tokens["rita"]), **revision_2})
    assert approved.status_code == 200
    assert (approved.get_json()["status"], approved.get_json()["approved_by"]) == ("approved", "rita")


def test_a_revoked_token_stops_working_at_once(app: Flask, client: FlaskClient, tokens: dict[str, str]) -> None:
    other = {**LED, "part_id": "led-other"}
    assert client.post("/v1/parts", json=LED, headers=bearer(tokens["edna"])).status_code == 201
    with app.extensions["calcsvc.db"].transaction() as session:
        assert revoke_token(session, "edna")
    assert_challenged(client.post("/v1/parts", json=other, headers=bearer(tokens["edna"])))
    assert client.post("/v1/parts", json=other, headers=bearer(tokens["rita"])).status_code == 201


def test_tokens_are_stored_only_as_sha256_digests(app: Flask, tokens: dict[str, str]) -> None:
    with app.extensions["calcsvc.db"].transaction() as session:
        rows = [dict(row) for row in session.execute(text("SELECT * FROM api_tokens")).mappings()]
    assert {row["name"] for row in rows} == set(tokens)
    for row in rows:
        token = tokens[row["name"]]
        assert row["token_sha256"] == hashlib.sha256(token.encode()).hexdigest()
        stored = " ".join(str(value) for value in row.values())
        assert token not in stored and token.removeprefix("cs_") not in stored


def test_reads_are_open_by_default(client: FlaskClient, part: Any) -> None:
    for url in READS:
        assert client.get(url).status_code == 200, url


def test_reads_need_a_token_when_configured_but_probes_stay_open(
    protected: Flask, tokens: dict[str, str], part: Any
) -> None:
    client = protected.test_client()
    for url in READS:
        assert_challenged(client.get(url))
        assert_challenged(client.get(url, headers=bearer("cs_not-a-token")))
        assert client.get(url, headers=bearer(tokens["edna"])).status_code == 200, url
        assert client.get(url, headers=bearer(tokens["rita"])).status_code == 200, url
    assert client.get("/healthz").status_code == 200
    assert client.get("/readyz").status_code == 200


def test_cors_is_off_by_default(client: FlaskClient) -> None:
    response = client.get("/v1/parts", headers={"Origin": BROWSER_ORIGIN})
    assert response.status_code == 200
    assert not any(name.startswith("Access-Control-") for name in response.headers.keys())


def test_cors_answers_only_the_configured_origin(cors: Flask, tokens: dict[str, str]) -> None:
    client = cors.test_client()
    allowed = client.get("/v1/parts", headers={"Origin": BROWSER_ORIGIN})
    assert allowed.headers["Access-Control-Allow-Origin"] == BROWSER_ORIGIN
    assert "Origin" in allowed.headers["Vary"]
    assert "ETag" in allowed.headers["Access-Control-Expose-Headers"]
    preflight = client.options(
        "/v1/parts",
        headers={
            "Origin": BROWSER_ORIGIN,
            "Access-Control-Request-Method": "POST",
            "Access-Control-Request-Headers": "authorization, content-type",
        },
    )
    assert preflight.headers["Access-Control-Allow-Origin"] == BROWSER_ORIGIN
    assert {"Authorization", "If-Match"} <= set(preflight.headers["Access-Control-Allow-Headers"].split(", "))
    # A refusal reaches the browser's script too, so it can show why.
    refused = client.post("/v1/parts", json=LED, headers={"Origin": BROWSER_ORIGIN})
    assert_challenged(refused)
    assert refused.headers["Access-Control-Allow-Origin"] == BROWSER_ORIGIN
    for origin in ("https://elsewhere.example", "https://parts.greenhouse.example.evil.example", "null"):
        response = client.get("/v1/parts", headers={"Origin": origin})
        assert "Access-Control-Allow-Origin" not in response.headers, origin


def calcsvc_cli(database_url: str, *args: str) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "DATABASE_URL": database_url}
    return subprocess.run(
        [sys.executable, "-m", "calcsvc.cli", *args], env=env, capture_output=True, text=True, timeout=120
    )


def test_cli_tokens_work_against_the_service_until_revoked(client: FlaskClient, database_url: str) -> None:
    made = calcsvc_cli(database_url, "token", "create", "--name", "cli-edna", "--role", "editor")
    assert made.returncode == 0, made.stderr
    token = made.stdout.strip()
    assert token.startswith("cs_") and "\n" not in token
    created = client.post("/v1/parts", json=LED, headers=bearer(token))
    assert created.status_code == 201 and created.get_json()["updated_by"] == "cli-edna"
    revision_1 = {"If-Match": created.headers["ETag"]}
    assert_problem(client.post(f"/v1/parts/{LED['part_id']}/approve", headers={**bearer(token), **revision_1}), 403)

    revoked = calcsvc_cli(database_url, "token", "revoke", "cli-edna")
    assert revoked.returncode == 0, revoked.stderr
    assert_challenged(client.post("/v1/parts", json={**LED, "part_id": "led-other"}, headers=bearer(token)))
