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

from calcsvc.service.safety import SAFETY_LINE

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
    assert body["safety"] == SAFETY_LINE  # every answer carries the standing safety line
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


# Unit strings a parser must refuse at once, whatever its pattern: long runs a backtracking matcher could split
# in many ways (digits, spaces, unit characters, each next to a repetition that also takes them), ending in a
# character nothing accepts; and digits of other scripts, which float() and \d would read as numbers.
HOSTILE_UNIT_STRINGS: list[str] = [
    "1" * 900 + "!",
    "1" * 1_500 + "!",
    "1" * 2_500 + "!",
    "1" * 100_000 + "!",
    "1" * 100_000 + " V",
    "1" + " " * 100_000 + "!",
    "1 " * 50_000 + "!",
    "1." + "1" * 100_000 + "!",
    "1e" + "1" * 100_000 + "!",
    "1 V" + "1" * 100_000 + "!",
    "1 V" + " 1" * 50_000 + "!",
    "1 V" + " /" * 50_000 + "!",
    " " * 100_000 + "1 V!",
    "\u0662\u0660 mA",  # Arabic-Indic 20
    "\uff12\uff10 mA",  # full-width 20
    "2\u0660 mA",
    "1e\u0663 V",
    "\u00b2 V",  # a superscript two: str.isdigit() takes it, int() does not
]
