"""Request logs (one JSON line per request, request ids, no credentials or bodies) and Prometheus metrics."""

from __future__ import annotations

import json
import re
from typing import Any

import pytest
from flask import Flask, request
from flask.testing import FlaskClient
from helpers import assert_problem, bearer
from prometheus_client.parser import text_string_to_metric_families

from calcsvc import create_app
from calcsvc.web.metrics import record_calculation

PART_RULE = "/v1/parts/<string:part_id>"
# Stands for something a caller would not want stored in logs (a customer's design note, say).
BODY_SECRET = "greenhouse-controller-body-7f3a"
FAKE_TOKEN = "cs_not-a-real-token-but-long-enough-1234567890"
NEW_PART = {
    "part_id": "led-deep-red-5mm",
    "kind": "led",
    "description": f"Deep red grow LED {BODY_SECRET}",
    "parameters": {
        "color": "deep red",
        "vf_typ_v": 2.0,
        "vf_min_v": 1.8,
        "vf_max_v": 2.4,
        "if_test_a": 0.02,
        "if_max_a": 0.03,
    },
}


def json_lines(capsys: pytest.CaptureFixture[str]) -> list[dict[str, Any]]:
    return [json.loads(line) for line in capsys.readouterr().err.splitlines() if line.startswith("{")]


def request_lines(capsys: pytest.CaptureFixture[str]) -> list[dict[str, Any]]:
    return [entry for entry in json_lines(capsys) if entry["logger"] == "calcsvc.request"]


def scrape(client: FlaskClient) -> Samples:
    """Every sample of ``GET /metrics`` by name and labels."""
    response = client.get("/metrics")
    assert response.status_code == 200
    assert response.mimetype == "text/plain"
    return {
        (sample.name, frozenset(sample.labels.items())): sample.value
        for family in text_string_to_metric_families(response.get_data(as_text=True))
        for sample in family.samples
    }


Samples = dict[tuple[str, frozenset[tuple[str, str]]], float]


def value(samples: Samples, name: str, **labels: str) -> float:
    return samples.get((name, frozenset(labels.items())), 0.0)


def delta(before: Samples, after: Samples, name: str, **labels: str) -> float:
    """How much a counter moved; counters live as long as the test process, so tests compare."""
    return value(after, name, **labels) - value(before, name, **labels)


def test_a_request_logs_one_json_line_without_query_values(
    client: FlaskClient, seeded: Flask, capsys: pytest.CaptureFixture[str]
) -> None:
    capsys.readouterr()
    response = client.get("/v1/parts?kind=opamp&limit=2")
    assert response.status_code == 200
    lines = request_lines(capsys)
    assert len(lines) == 1
    line = lines[0]
    assert line["level"] == "INFO"
    assert (line["method"], line["path"], line["status"]) == ("GET", "/v1/parts", 200)
    assert line["query_keys"] == ["kind", "limit"]
    assert "opamp" not in json.dumps(line)
    assert line["duration_ms"] >= 0
    assert line["remote_addr"] == "127.0.0.1"
    assert re.fullmatch(r"[0-9a-f]{32}", line["request_id"])
    assert line["request_id"] == response.headers["X-Request-ID"]


def test_a_sane_incoming_request_id_is_kept(client: FlaskClient, capsys: pytest.CaptureFixture[str]) -> None:
    capsys.readouterr()
    response = client.get("/healthz", headers={"X-Request-ID": "grow-light.Run_42"})
    assert response.headers["X-Request-ID"] == "grow-light.Run_42"
    assert response.status_code == 200


@pytest.mark.parametrize("incoming", ["two words", "x" * 65, "a;b", "../etc/passwd", ""])
def test_an_insane_incoming_request_id_is_replaced(
    client: FlaskClient, capsys: pytest.CaptureFixture[str], incoming: str
) -> None:
    capsys.readouterr()
    response = client.get("/v1/parts", headers={"X-Request-ID": incoming})
    issued = response.headers["X-Request-ID"]
    assert re.fullmatch(r"[0-9a-f]{32}", issued)
    assert [line["request_id"] for line in request_lines(capsys)] == [issued]


def test_errors_and_unknown_routes_carry_the_request_id(
    client: FlaskClient, capsys: pytest.CaptureFixture[str]
) -> None:
    capsys.readouterr()
    missing_part = client.get("/v1/parts/no-such-part", headers={"X-Request-ID": "req-404"})
    assert_problem(missing_part, 404)
    no_route = client.get("/v1/no-such-route")
    assert_problem(no_route, 404)
    lines = request_lines(capsys)
    assert [(line["status"], line["request_id"]) for line in lines] == [
        (404, "req-404"),
        (404, no_route.headers["X-Request-ID"]),
    ]
    assert missing_part.headers["X-Request-ID"] == "req-404"


def test_probe_successes_log_at_debug_only(client: FlaskClient, capsys: pytest.CaptureFixture[str]) -> None:
    capsys.readouterr()
    client.get("/healthz")
    client.get("/metrics")
    assert request_lines(capsys) == []


def test_the_log_level_setting_silences_request_lines(database_url: str, capsys: pytest.CaptureFixture[str]) -> None:
    quiet = create_app({"DATABASE_URL": database_url, "LOG_LEVEL": "WARNING"})
    capsys.readouterr()
    assert quiet.test_client().get("/v1/parts").status_code == 200
    assert request_lines(capsys) == []
    quiet.extensions["calcsvc.db"].dispose()


def test_credentials_and_bodies_stay_out_of_the_log_on_401_and_422(
    client: FlaskClient, tokens: dict[str, str], capsys: pytest.CaptureFixture[str]
) -> None:
    capsys.readouterr()
    unauthorized = client.post("/v1/parts", json=NEW_PART, headers=bearer(FAKE_TOKEN))
    assert_problem(unauthorized, 401)
    invalid = dict(NEW_PART, part_id=f"Not Valid {BODY_SECRET}")
    rejected = client.post("/v1/parts", json=invalid, headers=bearer(tokens["edna"]))
    assert_problem(rejected, 422, "part_id")
    logged = capsys.readouterr().err
    assert [json.loads(line)["status"] for line in logged.splitlines()] == [401, 422]
    for secret in (FAKE_TOKEN, tokens["edna"], BODY_SECRET, "Bearer"):
        assert secret not in logged


def _fail_quoting_the_credential() -> None:
    raise RuntimeError(f"lost while handling {request.headers['Authorization']}")


def test_an_unhandled_error_logs_json_with_the_request_id_and_no_credential(
    app: Flask, tokens: dict[str, str], capsys: pytest.CaptureFixture[str]
) -> None:
    app.add_url_rule("/v1/fails", "fails", _fail_quoting_the_credential, methods=["POST"])
    capsys.readouterr()
    response = app.test_client().post("/v1/fails", json=NEW_PART, headers=bearer(tokens["edna"]))
    assert_problem(response, 500)
    logged = capsys.readouterr().err
    error, request_line = (json.loads(line) for line in logged.splitlines())
    assert error["level"] == "ERROR" and error["logger"] == "calcsvc"
    assert "RuntimeError: lost while handling Bearer [redacted]" in error["exception"]
    assert error["request_id"] == request_line["request_id"] == response.headers["X-Request-ID"]
    assert (request_line["status"], request_line["level"]) == (500, "WARNING")
    assert tokens["edna"] not in logged and BODY_SECRET not in logged


def test_metrics_count_requests_by_url_rule(client: FlaskClient, seeded: Flask) -> None:
    before = scrape(client)
    part_id = client.get("/v1/parts?limit=1").get_json()["items"][0]["part_id"]
    for _ in range(2):
        assert client.get(f"/v1/parts/{part_id}").status_code == 200
    client.get(f"/v1/no-such-route/{part_id}")
    after = scrape(client)
    assert delta(before, after, "calcsvc_requests_total", method="GET", endpoint=PART_RULE, status="200") == 2
    assert delta(before, after, "calcsvc_request_duration_seconds_count", method="GET", endpoint=PART_RULE) == 2
    assert delta(before, after, "calcsvc_requests_total", method="GET", endpoint="unmatched", status="404") == 1
    # The scrape before this one was counted too.
    assert value(after, "calcsvc_requests_total", method="GET", endpoint="/metrics", status="200") >= 1
    assert not any(part_id in str(labels) for _, labels in after)


def test_parts_writes_are_counted_once_committed(client: FlaskClient, tokens: dict[str, str]) -> None:
    before = scrape(client)
    created = client.post("/v1/parts", json=NEW_PART, headers=bearer(tokens["edna"]))
    assert created.status_code == 201
    assert client.post("/v1/parts", json=NEW_PART, headers=bearer(tokens["edna"])).status_code == 409
    path = f"/v1/parts/{NEW_PART['part_id']}"
    edit = {"parameters": dict(NEW_PART["parameters"], vf_typ_v=2.1)}
    headers = {**bearer(tokens["edna"]), "If-Match": created.headers["ETag"]}
    edited = client.put(path, json=edit, headers=headers)
    assert edited.status_code == 200
    revision_2 = {"If-Match": edited.headers["ETag"]}
    assert client.post(f"{path}/approve", headers={**bearer(tokens["rita"]), **revision_2}).status_code == 200
    assert client.delete(path, headers={**bearer(tokens["edna"]), **revision_2}).status_code == 200
    assert client.post(f"{path}/restore", headers={**bearer(tokens["edna"]), **revision_2}).status_code == 200
    after = scrape(client)
    for action in ("create", "update", "approve", "retire", "restore"):
        assert delta(before, after, "calcsvc_parts_writes_total", action=action) == 1, action


def test_record_calculation_counts_calls_and_rows(client: FlaskClient) -> None:
    before = scrape(client)
    record_calculation("led-string", 1)
    record_calculation("led-string", 250)
    after = scrape(client)
    assert delta(before, after, "calcsvc_calculations_total", calculation="led-string") == 2
    assert delta(before, after, "calcsvc_calculation_rows_total", calculation="led-string") == 251


def test_metrics_stay_out_of_the_api_document_and_need_no_token(database_url: str) -> None:
    guarded = create_app({"DATABASE_URL": database_url, "READ_REQUIRES_TOKEN": True})
    client = guarded.test_client()
    assert "/metrics" not in client.get("/openapi.json").get_json()["paths"]
    assert_problem(client.get("/v1/parts"), 401)
    assert client.get("/metrics").status_code == 200
    guarded.extensions["calcsvc.db"].dispose()
