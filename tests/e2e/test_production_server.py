"""Hostile traffic against the production server, started as the container and ``make serve`` start it
(gunicorn with calcsvc's configuration), where worker time-outs, slow clients and chunked bodies show.

Each test is bounded in time and sends traffic to loopback only.
"""

from __future__ import annotations

import json
import socket
import threading
import time
from collections.abc import Iterable, Iterator
from pathlib import Path
from typing import Any

import pytest
import requests
from helpers import HOSTILE_UNIT_STRINGS
from test_entrypoint import Server, entrypoint

from calcsvc.web.request_body import BASE_S, SMALL_BODY_BYTES, WAVEFORM_BODY_BYTES

BATCH_LIMIT = 2 << 20  # the server under test takes batches up to 2 MiB, so oversized ones stay quick to send
HEALTH_BUDGET_S = 1.0


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Server]:
    folder = tmp_path_factory.mktemp("production")
    database = f"sqlite:///{folder / 'calcsvc.sqlite'}"
    with entrypoint(folder, database, "hostile", CALCSVC_MAX_CONTENT_LENGTH=str(BATCH_LIMIT), WEB_CONCURRENCY="") as s:
        yield s


def _raw(url: str, head: str, body: Iterable[bytes] = (), timeout: float = 30.0) -> tuple[int, bytes]:
    """Send a request head and then ``body`` piece by piece; the status and body of the answer.

    Sending stops when the server has answered (or closed), as a client that reads while it writes would.
    """
    host, port = url.removeprefix("http://").split(":")
    with socket.create_connection((host, int(port)), timeout=timeout) as sock:
        sock.sendall(head.encode())
        for piece in body:
            try:
                sock.sendall(piece)
            except (BrokenPipeError, ConnectionResetError):
                break
        answer = b""
        try:
            while chunk := sock.recv(65536):
                answer += chunk
                if b"\r\n\r\n" in answer and _complete(answer):
                    break
        except (ConnectionResetError, TimeoutError):
            pass
    assert answer, "the server closed the connection without an answer"
    status = int(answer.split(b" ", 2)[1])
    head, body = answer.split(b"\r\n\r\n", 1)
    return status, _dechunked(body) if _chunked_answer(head) else body


def _chunked_answer(head: bytes) -> bool:
    return any(line.lower().replace(b" ", b"") == b"transfer-encoding:chunked" for line in head.split(b"\r\n"))


def _dechunked(body: bytes) -> bytes:
    """A streamed (chunked) answer's body as the bytes it carries."""
    out = []
    while True:
        size_line, _, rest = body.partition(b"\r\n")
        size = int(size_line.split(b";")[0], 16)
        if size == 0:
            return b"".join(out)
        out.append(rest[:size])
        body = rest[size + 2 :]


def _complete(answer: bytes) -> bool:
    head, body = answer.split(b"\r\n\r\n", 1)
    if _chunked_answer(head):
        return body.startswith(b"0\r\n") or body.endswith(b"\r\n0\r\n\r\n")
    for line in head.split(b"\r\n"):
        if line.lower().startswith(b"content-length:"):
            return len(body) >= int(line.split(b":")[1])
    return False


def _health_latencies(url: str, seconds: float) -> list[float]:
    latencies = []
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        started = time.monotonic()
        answer = requests.get(f"{url}/healthz", timeout=10)
        latencies.append(time.monotonic() - started)
        assert answer.status_code == 200
        time.sleep(0.2)
    return latencies


def test_hostile_unit_strings_are_refused_at_once_while_health_answers(server: Server) -> None:
    """Every hostile quantity string, three at a time, through the JSON body, the query string and a CSV batch:
    422 naming the field in well under a second each, and /healthz answering throughout."""
    ways = [
        lambda text: requests.post(
            f"{server.url}/v1/calc/led-string",
            json={"supply_v": text, "led": "led-red-5mm", "leds_in_series": 3, "current_a": 0.02},
            timeout=30,
        ),
        lambda text: requests.get(
            f"{server.url}/v1/calc/led-string",
            params={"supply_v": text, "led": "led-red-5mm", "leds_in_series": 3, "current_a": 0.02},
            timeout=30,
        ),
        lambda text: requests.post(
            f"{server.url}/v1/batch/led-string",
            data=f"supply_v,led,leds_in_series,current_a\n{text},led-red-5mm,3,0.02\n".encode(),
            headers={"Content-Type": "text/csv"},
            timeout=30,
        ),
    ]
    worst = 0.0
    for text in [t for t in HOSTILE_UNIT_STRINGS if len(t) > 60]:
        answers: list[tuple[float, requests.Response]] = []

        def send(way: Any, text: str = text, answers: list[tuple[float, requests.Response]] = answers) -> None:
            started = time.monotonic()
            answer = way(text)
            answers.append((time.monotonic() - started, answer))

        senders = [threading.Thread(target=send, args=(way,)) for way in ways]
        for sender in senders:
            sender.start()
        health = requests.get(f"{server.url}/healthz", timeout=HEALTH_BUDGET_S)
        for sender in senders:
            sender.join(30)
        assert health.status_code == 200 and len(answers) == 3
        for elapsed, answer in answers:
            worst = max(worst, elapsed)
            if answer.request.method == "GET" and answer.status_code == 414:
                continue  # a query string of 100,000 characters is over the server's request-line limit
            body = answer.json()
            if answer.request.url.endswith("/v1/batch/led-string"):
                assert answer.status_code == 200 and body["rows"][0]["ok"] is False
                assert "supply_v" in body["rows"][0]["problem"]["errors"]
            else:
                assert answer.status_code == 422 and "supply_v" in body["errors"], body
    assert worst < 1.0


def test_slow_clients_leave_the_service_answering(server: Server) -> None:
    """Eight clients trickling a body one byte every two seconds hold a thread each, never a whole worker,
    and are cut off with 408 once the body is overdue."""
    statuses: list[int] = []

    def trickle() -> None:
        body = json.dumps({"supply_v": 12, "led": "led-red-5mm", "leds_in_series": 3, "current_a": 0.02}).encode()
        head = (
            "POST /v1/calc/led-string HTTP/1.1\r\nHost: t\r\nContent-Type: application/json\r\n"
            f"Content-Length: {len(body)}\r\n\r\n"
        )

        def slowly() -> Iterator[bytes]:
            for byte in body:
                yield bytes([byte])
                time.sleep(2.0)

        statuses.append(_raw(server.url, head, slowly(), timeout=BASE_S + 20)[0])

    clients = [threading.Thread(target=trickle) for _ in range(8)]
    for client in clients:
        client.start()
    time.sleep(1.0)
    latencies = _health_latencies(server.url, BASE_S + 2)
    for client in clients:
        client.join(BASE_S + 30)
    assert max(latencies) < HEALTH_BUDGET_S, latencies
    assert statuses == [408] * 8


def test_a_silent_client_is_answered_408(server: Server) -> None:
    head = (
        "POST /v1/calc/led-string HTTP/1.1\r\nHost: t\r\nContent-Type: application/json\r\nContent-Length: 500\r\n\r\n"
    )
    started = time.monotonic()
    status, body = _raw(server.url, head + "{", timeout=BASE_S + 20)
    assert status == 408 and json.loads(body)["status"] == 408
    assert time.monotonic() - started < BASE_S + 2


def _chunked(pieces: Iterator[bytes]) -> Iterator[bytes]:
    for piece in pieces:
        yield f"{len(piece):x}\r\n".encode() + piece + b"\r\n"
    yield b"0\r\n\r\n"


def _csv_rows(count: int) -> Iterator[bytes]:
    yield b"supply_v,led,leds_in_series,current_a\n"
    for index in range(count):
        yield f"{12 + index % 7},led-red-5mm,3,0.0{10 + index % 9}\n".encode()


def _batch_head(content_type: str = "text/csv") -> str:
    return (
        "POST /v1/batch/led-string?layout=columns HTTP/1.1\r\nHost: t\r\nTransfer-Encoding: chunked\r\n"
        f"Content-Type: {content_type}\r\n\r\n"
    )


def test_chunked_batch_over_the_limit_is_refused_not_cut(server: Server) -> None:
    rows = 120_000
    assert sum(map(len, _csv_rows(rows))) > 1.3 * BATCH_LIMIT
    status, body = _raw(server.url, _batch_head(), _chunked(_csv_rows(rows)))
    assert status == 413, body[:300]
    assert json.loads(body)["status"] == 413


def test_chunked_batch_within_the_limit_is_read_whole(server: Server) -> None:
    rows = 20_000
    status, body = _raw(server.url, _batch_head(), _chunked(_csv_rows(rows)))
    assert status == 200, body[:300]
    answer = json.loads(body)
    assert answer["count"] == answer["ok_count"] == rows


def test_chunked_json_over_the_limit_says_413_not_bad_json(server: Server) -> None:
    head = (
        "POST /v1/calc/led-string HTTP/1.1\r\nHost: t\r\nTransfer-Encoding: chunked\r\n"
        "Content-Type: application/json\r\n\r\n"
    )
    filler = (b'{"supply_v": 12, "name": "' + b"x" * 65536 for _ in range(SMALL_BODY_BYTES // 65536 + 2))
    status, body = _raw(server.url, head, _chunked(filler))
    assert status == 413 and json.loads(body)["status"] == 413


def _worker_rss_kib(server: Server) -> dict[int, int]:
    master = int(server.pidfile.read_text())
    sizes = {}
    for task in Path(f"/proc/{master}/task").iterdir():
        for child in (task / "children").read_text().split():
            status = Path(f"/proc/{child}/status").read_text()
            sizes[int(child)] = int(next(line for line in status.splitlines() if line.startswith("VmRSS")).split()[1])
    return sizes


@pytest.mark.parametrize("chunked", [False, True], ids=["content-length", "chunked"])
def test_oversized_waveform_body_is_refused_without_growing_the_workers(server: Server, chunked: bool) -> None:
    """60 MiB of waveform samples to the duty-cycle budget: 413 at once, no worker grows by more than 8 MiB
    (the route's own limit is all it ever buffers)."""
    size = 60 << 20
    piece = b"0.5, " * 13107  # 64 KiB of samples
    pieces = (piece for _ in range(size // len(piece)))
    before = _worker_rss_kib(server)
    framing = "Transfer-Encoding: chunked" if chunked else f"Content-Length: {size}"
    head = f"POST /v1/calc/duty-cycle-power HTTP/1.1\r\nHost: t\r\n{framing}\r\nContent-Type: application/json\r\n\r\n"
    started = time.monotonic()
    status, body = _raw(server.url, head, _chunked(pieces) if chunked else pieces)
    elapsed = time.monotonic() - started
    assert status == 413 and json.loads(body)["status"] == 413
    assert elapsed < 5.0
    after = _worker_rss_kib(server)
    growth = max(after.get(pid, 0) - rss for pid, rss in before.items())
    assert growth < WAVEFORM_BODY_BYTES // 1024 + 8 * 1024, (before, after)
