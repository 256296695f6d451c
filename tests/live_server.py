"""A real HTTP server on loopback for tests that go over the wire (the Python client, the command line).

Use the fixture by naming this module in a test module's ``pytest_plugins``; ``live_url`` serves the per-test
``app`` (so it runs on every configured store) and stops the server when the test ends. ``serving`` is the
same as a context manager, for any WSGI app.
"""

from __future__ import annotations

import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any

import pytest
from flask import Flask
from werkzeug.serving import WSGIRequestHandler, make_server


class _QuietHandler(WSGIRequestHandler):
    """No access-log line per request: they would land in the output the command-line tests capture."""

    def log_request(self, code: int | str = "-", size: int | str = "-") -> None:
        pass


@contextmanager
def serving(app: Callable[..., Any]) -> Iterator[str]:
    """Serve ``app`` threaded on 127.0.0.1 at a free port; yields the base URL."""
    server = make_server("127.0.0.1", 0, app, threaded=True, request_handler=_QuietHandler)
    # A short poll interval keeps shutdown (which waits for the serving loop to notice) fast.
    thread = threading.Thread(target=server.serve_forever, kwargs={"poll_interval": 0.02}, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{server.server_port}"
    finally:
        server.shutdown()
        server.server_close()
        thread.join(timeout=5)


@pytest.fixture
def live_url(app: Flask) -> Iterator[str]:
    with serving(app) as url:
        yield url
