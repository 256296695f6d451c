"""A body read under the real server is watched for a trickling client by one thread per process, not one per
request (starting a thread cost about 90 µs of CPU on every request with a body)."""

from __future__ import annotations

import socket
import threading
from collections.abc import Iterator
from typing import Any

import pytest

from calcsvc.web import request_body
from calcsvc.web.problems import Problem


@pytest.fixture
def connection() -> Iterator[tuple[socket.socket, socket.socket]]:
    client, server = socket.socketpair()
    with client, server:
        yield client, server


def environ(server: socket.socket, length: int) -> dict[str, Any]:
    """What gunicorn hands the app: the body's stream, its declared length and the connection's socket."""
    return {"wsgi.input": server.makefile("rb"), "CONTENT_LENGTH": str(length), "gunicorn.socket": server}


def test_reads_start_no_thread_per_request(
    connection: tuple[socket.socket, socket.socket], monkeypatch: pytest.MonkeyPatch
) -> None:
    client, server = connection
    started: list[str] = []

    class Counted(threading.Thread):
        def start(self) -> None:
            started.append(self.name)
            super().start()

    monkeypatch.setattr(request_body.threading, "Thread", Counted)
    body = b'{"supply_v": 12.0}'
    for _ in range(20):
        client.sendall(body)
        assert request_body._read(environ(server, len(body)), 1 << 20) == body
    assert len(started) <= 1  # the process's watchdog, if no earlier read started it


def test_a_trickling_body_is_cut_off_with_408(
    connection: tuple[socket.socket, socket.socket], monkeypatch: pytest.MonkeyPatch
) -> None:
    client, server = connection
    monkeypatch.setattr(request_body, "BASE_S", 0.3)
    client.sendall(b'{"supply_v": ')  # and then nothing more
    with pytest.raises(Problem) as refused:
        request_body._read(environ(server, 100), 1 << 20)
    assert refused.value.status == 408
