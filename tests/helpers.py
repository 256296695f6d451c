"""Small helpers shared by the HTTP tests."""

from __future__ import annotations

from typing import Any

PROBLEM = "application/problem+json"


def bearer(token: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {token}"}


def assert_problem(response: Any, status: int, field: str | None = None) -> dict[str, Any]:
    """The response is an RFC 9457 problem with ``status``, naming ``field`` when given."""
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.mimetype == PROBLEM
    body = response.get_json(force=True)
    assert {"type", "title", "status", "detail"} <= body.keys()
    assert body["status"] == status
    assert "Traceback" not in response.get_data(as_text=True)
    if field is not None:
        assert field in body.get("errors", {}), body
    return body
