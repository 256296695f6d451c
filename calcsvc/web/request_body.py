"""Every request body is read whole, within its route's size limit and a deadline, before anything parses it.

A body is either read completely or refused: with a ``Content-Length`` over the limit at once (413, nothing
read), as a chunked body as soon as more than the limit has arrived (413, never cut at the limit), and from a
client that sends too slowly with 408, so a trickling client holds one server thread for seconds, not minutes.
The limits are small for everything but batches, so a single calculation never builds millions of objects.
"""

from __future__ import annotations

import contextlib
import io
import os
import socket
import threading
import time
from typing import Any

from flask import Request, current_app

from calcsvc.web.problems import Problem

# Sized from the largest legitimate body: a duty-cycle budget with two 100,000-sample waveform arrays written
# with 17 significant digits is about 5 MB; every other single request is well under 100 kB.
SMALL_BODY_BYTES = 1 << 20
WAVEFORM_BODY_BYTES = 8 << 20
_ROUTE_LIMITS = (("/v1/batch/", None), ("/v1/calc/duty-cycle-power", WAVEFORM_BODY_BYTES))

# A client must deliver its body within BASE_S plus one second per MIN_BYTES_PER_S received: a fast upload of
# any size passes, a trickling one is cut off after seconds (common practice for request-body timeouts).
BASE_S = 10.0
MIN_BYTES_PER_S = 256 * 1024
WATCH_INTERVAL_S = 0.25
_CHUNK = 64 * 1024


def body_limit(path: str) -> int:
    """Largest body a route accepts; batches take up to ``MAX_CONTENT_LENGTH``, which caps every route."""
    ceiling = current_app.config["MAX_CONTENT_LENGTH"]
    for prefix, limit in _ROUTE_LIMITS:
        if path.startswith(prefix):
            return ceiling if limit is None else min(limit, ceiling)
    return min(SMALL_BODY_BYTES, ceiling)


def too_large(limit: int) -> Problem:
    return Problem(413, f"the request body is larger than this route accepts ({limit} bytes)", "body-too-large")


class _Progress:
    """How much of a body has arrived, watched from outside the read, which ends it once it has gone too slow.

    The server's body reader blocks until it holds the size asked for, so a trickling client is only ever
    noticed from outside the read: the watchdog shuts the socket's reading side, the read returns short, and
    the request is answered 408 (the connection is not reused).
    """

    def __init__(self, sock: socket.socket | None) -> None:
        self.sock = sock
        self.started = time.monotonic()
        self.received = 0
        self.expired = False
        self._done = False
        self._lock = threading.Lock()  # a read that just finished must not have its socket shut afterwards

    def overdue(self) -> bool:
        return time.monotonic() - self.started > BASE_S + self.received / MIN_BYTES_PER_S

    def check(self) -> None:
        """Shut the socket's reading side if the read is still going and overdue."""
        with self._lock:
            if self._done or self.expired or not self.overdue():
                return
            self.expired = True
            with contextlib.suppress(OSError):
                self.sock.shutdown(socket.SHUT_RD)  # type: ignore[union-attr]

    def __enter__(self) -> _Progress:
        if self.sock is not None:
            WATCHDOG.add(self)
        return self

    def __exit__(self, *_: object) -> None:
        with self._lock:
            self._done = True
        WATCHDOG.discard(self)


class _Watchdog:
    """One thread per process checks every body read in progress each ``WATCH_INTERVAL_S``: a thread started
    per request cost about 90 µs of CPU on every request with a body."""

    def __init__(self) -> None:
        self._reads: set[_Progress] = set()
        self._lock = threading.Lock()
        self._pending = threading.Event()  # set while some read is watched, so an idle worker never wakes
        self._pid = 0  # threads do not survive a fork: each worker process starts its own

    def add(self, progress: _Progress) -> None:
        with self._lock:
            if self._pid != os.getpid():
                self._pid = os.getpid()
                threading.Thread(target=self._run, name="calcsvc-body-watch", daemon=True).start()
            self._reads.add(progress)
            self._pending.set()

    def discard(self, progress: _Progress) -> None:
        with self._lock:
            self._reads.discard(progress)

    def _run(self) -> None:
        while True:
            self._pending.wait()
            time.sleep(WATCH_INTERVAL_S)
            with self._lock:
                reads = list(self._reads)
                if not reads:
                    self._pending.clear()
            for progress in reads:
                progress.check()


WATCHDOG = _Watchdog()


def _slow() -> Problem:
    return Problem(408, "the request body arrived too slowly; send it again", "body-timeout")


def _read(environ: dict[str, Any], limit: int) -> bytes:
    stream = environ["wsgi.input"]
    declared = environ.get("CONTENT_LENGTH", "")
    remaining = int(declared) if declared.isascii() and declared.isdigit() else None
    parts: list[bytes] = []
    with _Progress(environ.get("gunicorn.socket")) as progress:
        while remaining is None or progress.received < remaining:
            want = _CHUNK if remaining is None else min(_CHUNK, remaining - progress.received)
            try:
                chunk = stream.read(want)
            except Exception as exc:  # the server's reader fails in its own ways when its socket is shut
                if progress.expired:
                    raise _slow() from exc
                raise Problem(400, "the request body could not be read to its end", "malformed-body") from exc
            if not chunk:
                break
            parts.append(chunk)
            progress.received += len(chunk)
            if progress.received > limit:
                raise too_large(limit)
            if progress.overdue():
                raise _slow()
        if progress.expired:
            raise _slow()
    if remaining is not None and progress.received < remaining:
        raise Problem(400, "the request body ended before its declared length", "malformed-body")
    return b"".join(parts)


def buffer_body(req: Request) -> None:
    """Replace the request's input stream by the whole body, read under the route's limit and deadline."""
    environ = req.environ
    limit = body_limit(req.path)
    if req.content_length is not None and req.content_length > limit:
        raise too_large(limit)
    chunked = "chunked" in environ.get("HTTP_TRANSFER_ENCODING", "").lower()
    if not req.content_length and not chunked:
        return
    body = _read(environ, limit)
    environ["wsgi.input"] = io.BytesIO(body)
    environ["CONTENT_LENGTH"] = str(len(body))
    environ.pop("HTTP_TRANSFER_ENCODING", None)
    environ["wsgi.input_terminated"] = True
    for cached in ("stream", "content_length"):  # werkzeug caches both on first access
        req.__dict__.pop(cached, None)
    req._cached_data = body  # get_data() then hands out this body instead of reading a second copy
