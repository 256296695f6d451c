"""Every error is an RFC 9457 problem document without internals."""

from __future__ import annotations

from flask import Flask
from flask.testing import FlaskClient
from helpers import assert_problem, bearer


def test_unknown_route_and_method(client: FlaskClient) -> None:
    assert_problem(client.get("/v2/nothing"), 404)
    response = client.delete("/healthz")
    assert_problem(response, 405)
    assert "GET" in response.headers["Allow"]


def test_bad_json_wrong_type_and_unknown_fields(client: FlaskClient, tokens: dict[str, str]) -> None:
    headers = bearer(tokens["edna"])
    assert_problem(client.post("/v1/parts", data="{not json", content_type="application/json", headers=headers), 400)
    assert_problem(client.post("/v1/parts", data="a=1", content_type="text/plain", headers=headers), 415)
    body = {"part_id": "x", "kind": "led", "parameters": {}, "colour": "red"}
    assert_problem(client.post("/v1/parts", json=body, headers=headers), 422, "colour")
    assert_problem(client.post("/v1/parts", json={**body, "kind": 5}, headers=headers), 422, "kind")


def test_deeply_nested_json_is_a_client_error(client: FlaskClient, tokens: dict[str, str]) -> None:
    deep = "[" * 100_000 + "]" * 100_000
    response = client.post("/v1/parts", data=deep, content_type="application/json", headers=bearer(tokens["edna"]))
    assert_problem(response, 400)


def test_oversized_body_is_413(database_url: str) -> None:
    from calcsvc import create_app

    app = create_app({"DATABASE_URL": database_url, "MAX_CONTENT_LENGTH": 2048})
    response = app.test_client().post("/v1/parts", data="x" * 4096, content_type="application/json")
    assert_problem(response, 413)


def test_internal_errors_hide_details(app: Flask) -> None:
    @app.get("/boom")
    def boom() -> str:
        raise RuntimeError("secret internals")

    response = app.test_client().get("/boom")
    body = assert_problem(response, 500)
    assert "secret" not in response.get_data(as_text=True) and body["type"] == "urn:calcsvc:problem:internal"
