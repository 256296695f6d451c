"""A bounded HTTP load generator for the benchmark and load scripts.

``drive()`` forks client processes, each running threads that repeat an *action* (one or more requests through
a ``Client``) until a deadline, after a warm-up whose requests are not counted. Every loop stops by itself: at
the deadline or after ``max_actions`` actions per thread, whichever comes first. Only 127.0.0.1 is contacted.
"""

from __future__ import annotations

import http.client
import multiprocessing
import queue
import random
import threading
import time
from collections import Counter
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

from server import LOOPBACK

MAX_ACTIONS_PER_THREAD = 1_000_000
_RESULT_TIMEOUT_S = 60.0  # past the deadline, for a child process to hand in its tally


@dataclass
class Tally:
    """What the clients saw inside the measuring window."""

    statuses: Counter[tuple[str, int]] = field(default_factory=Counter)  # (label, status) → count; status 0: no answer
    latencies: dict[str, list[float]] = field(default_factory=dict)  # label → seconds per request
    seconds: float = 0.0  # length of the measuring window
    client_cpu_s: float = 0.0  # CPU time the client processes used inside the window

    @property
    def requests(self) -> int:
        return sum(self.statuses.values())

    def all_latencies(self) -> list[float]:
        return [x for values in self.latencies.values() for x in values]

    def merge(self, other: Tally) -> None:
        self.statuses.update(other.statuses)
        for label, values in other.latencies.items():
            self.latencies.setdefault(label, []).extend(values)
        self.client_cpu_s += other.client_cpu_s


def percentile(values: list[float], fraction: float) -> float:
    """Nearest-rank percentile; NaN for no values."""
    if not values:
        return float("nan")
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, max(0, round(fraction * len(ordered)) - 1))]


class Client:
    """One HTTP/1.1 connection to the server, kept alive where the server allows (gunicorn's sync workers close
    it after every answer, so then each request opens a new one). With a ``tally``, records the requests made
    between ``start`` and ``end`` (``time.monotonic()``)."""

    def __init__(self, port: int, tally: Tally | None = None, start: float = 0.0, end: float = 0.0) -> None:
        self.connection = http.client.HTTPConnection(LOOPBACK, port, timeout=60)
        self.tally, self.start, self.end = tally, start, end

    def request(
        self, label: str, method: str, path: str, body: bytes | None = None, headers: Mapping[str, str] | None = None
    ) -> tuple[int, http.client.HTTPMessage, bytes]:
        """Status, headers and body; status 0 when the server gave no (whole) answer."""
        began = time.monotonic()
        try:
            answer = self._exchange(method, path, body, headers)
        except (http.client.RemoteDisconnected, ConnectionResetError, BrokenPipeError):
            # A connection the server closed while idle: one fresh try.
            self.connection.close()
            try:
                answer = self._exchange(method, path, body, headers)
            except (OSError, http.client.HTTPException):
                answer = None
        except (OSError, http.client.HTTPException):
            answer = None
        if answer is None:
            self.connection.close()
        ended = time.monotonic()
        status = answer[0] if answer else 0
        if self.tally is not None and self.start <= began and ended <= self.end:
            self.tally.statuses[(label, status)] += 1
            self.tally.latencies.setdefault(label, []).append(ended - began)
        return answer or (0, http.client.HTTPMessage(), b"")

    def _exchange(
        self, method: str, path: str, body: bytes | None, headers: Mapping[str, str] | None
    ) -> tuple[int, http.client.HTTPMessage, bytes]:
        self.connection.request(method, path, body=body, headers=dict(headers or {}))
        response = self.connection.getresponse()
        return response.status, response.headers, response.read()


Action = Callable[[Client, random.Random], Any]


def _client_process(
    port: int, action: Action, threads: int, seed: int, start: float, end: float, results: Any, max_actions: int
) -> None:
    tallies = [Tally() for _ in range(threads)]

    def run(index: int) -> None:
        client = Client(port, tallies[index], start, end)
        rng = random.Random(seed * 1000 + index)
        for _ in range(max_actions):
            if time.monotonic() >= end:
                break
            action(client, rng)
        client.connection.close()

    workers = [threading.Thread(target=run, args=(k,), daemon=True) for k in range(threads)]
    for worker in workers:
        worker.start()
    # CPU time of this process inside the measuring window: read at its start and at its end.
    time.sleep(max(0.0, start - time.monotonic()))
    cpu_start = time.process_time()
    time.sleep(max(0.0, end - time.monotonic()))
    cpu_used = time.process_time() - cpu_start
    for worker in workers:
        worker.join(timeout=_RESULT_TIMEOUT_S)
    total = Tally(client_cpu_s=cpu_used)
    for tally in tallies:
        total.merge(tally)
    results.put(total)


def drive(
    port: int,
    action: Action,
    seconds: float,
    warmup: float = 1.0,
    processes: int = 2,
    threads: int = 2,
    seed: int = 0,
    max_actions: int = MAX_ACTIONS_PER_THREAD,
) -> Tally:
    """Repeat ``action`` from ``processes`` × ``threads`` clients for ``warmup`` + ``seconds``; count the last
    ``seconds``. Client processes are forked, so ``action`` may be any callable (no pickling)."""
    context = multiprocessing.get_context("fork")
    results = context.Queue()
    start = time.monotonic() + warmup
    end = start + seconds
    children = [
        context.Process(
            target=_client_process, args=(port, action, threads, seed + k, start, end, results, max_actions)
        )
        for k in range(processes)
    ]
    for child in children:
        child.start()
    total = Tally(seconds=seconds)
    try:
        for _ in children:
            total.merge(results.get(timeout=max(0.0, end - time.monotonic()) + _RESULT_TIMEOUT_S))
    except queue.Empty as exc:
        raise RuntimeError("a client process handed in no result") from exc
    finally:
        for child in children:
            child.join(timeout=_RESULT_TIMEOUT_S)
            if child.is_alive():
                child.kill()  # only the client processes forked just above
                child.join()
    return total
