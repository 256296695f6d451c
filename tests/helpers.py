"""Small helpers shared by the HTTP tests."""

from __future__ import annotations

import threading
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import requests
from flask import Flask
from werkzeug.serving import make_server
from werkzeug.wrappers import Response

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


@contextmanager
def live_server(app: Flask) -> Iterator[str]:
    """Serve ``app`` over real HTTP on a free local port, one thread per request; yields the base URL."""
    server = make_server("127.0.0.1", 0, app, threaded=True)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{server.server_port}"
    finally:
        server.shutdown()
        server.server_close()
        thread.join()


def as_flask(response: requests.Response) -> Response:
    """A live server's answer in the shape ``assert_problem`` and the other helpers take."""
    return Response(response.content, status=response.status_code, headers=list(response.headers.items()))
