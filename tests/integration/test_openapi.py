"""The committed OpenAPI document is valid and is exactly what the code generates and serves."""

from __future__ import annotations

import json
from pathlib import Path

from flask.testing import FlaskClient
from openapi_spec_validator import validate

from calcsvc.openapi_spec import generated_spec, render

COMMITTED = Path(__file__).resolve().parents[2] / "openapi" / "openapi.json"


def test_committed_spec_is_valid() -> None:
    validate(json.loads(COMMITTED.read_text()))


def test_committed_spec_matches_the_code() -> None:
    assert COMMITTED.read_text() == render(generated_spec()), "openapi/openapi.json is stale: run `make openapi`"


def test_served_spec_matches_the_committed_one(client: FlaskClient) -> None:
    served = client.get("/openapi.json")
    assert served.status_code == 200
    assert served.get_json() == json.loads(COMMITTED.read_text())


def test_errors_are_documented_as_problems() -> None:
    spec = json.loads(COMMITTED.read_text())
    for path, item in spec["paths"].items():
        for method, operation in item.items():
            if method == "parameters":
                continue
            assert "default" in operation["responses"], (method, path)
            for status, response in operation["responses"].items():
                if status.startswith(("4", "5")) and "content" in response:
                    # text/plain only where a spreadsheet cell asked for it (pick=) on the query form.
                    allowed = {"application/problem+json", "text/plain"} if method == "get" else set()
                    assert "application/problem+json" in response["content"], (method, path, status)
                    assert set(response["content"]) <= allowed | {"application/problem+json"}, (method, path)
