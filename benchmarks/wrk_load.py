"""Endpoint load from a C load generator, with the CPU each side spent.

Python clients starve for CPU on a small machine: the load generator then measures itself. Debian's ``wrk``
(``apt-get install -y wrk``) drives a route with a few kept-alive connections at a fraction of the CPU. Every
window also reads the server's own CPU time (master and workers, from /proc), so CPU seconds per request can be
compared between routes whether or not wrk is installed, and the load generator's CPU share is reported.
"""

from __future__ import annotations

import os
import re
import resource
import shutil
import subprocess
import tempfile
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from server import Server

TICKS_PER_S = os.sysconf("SC_CLK_TCK")
WRK_INSTALL = "apt-get install -y wrk"


def wrk_path() -> str | None:
    return shutil.which("wrk")


def process_cpu_s(pid: int) -> float:
    """User + system CPU seconds the process has used (0 when it is gone)."""
    try:
        fields = Path(f"/proc/{pid}/stat").read_text().rpartition(")")[2].split()
    except OSError:
        return 0.0
    return (int(fields[11]) + int(fields[12])) / TICKS_PER_S  # utime, stime (fields 14 and 15)


def server_cpu_s(server: Server) -> float:
    return sum(process_cpu_s(pid) for pid in (server.master_pid, *server.workers()))


@dataclass
class Window:
    """One measuring window of one route."""

    requests: int = 0
    seconds: float = 0.0
    server_cpu_s: float = 0.0
    client_cpu_s: float = 0.0
    errors: int = 0  # non-2xx answers and socket errors

    def add(self, other: Window) -> None:
        self.requests += other.requests
        self.seconds += other.seconds
        self.server_cpu_s += other.server_cpu_s
        self.client_cpu_s += other.client_cpu_s
        self.errors += other.errors

    @property
    def per_s(self) -> float:
        return self.requests / self.seconds

    @property
    def server_cpu_per_request_s(self) -> float:
        return self.server_cpu_s / self.requests

    @property
    def client_share(self) -> float:
        """The load generator's CPU, as a share of all CPU the client and the server used in the window."""
        return self.client_cpu_s / (self.client_cpu_s + self.server_cpu_s)


def _lua(path: str, body: bytes, content_type: str) -> str:
    text = body.decode()
    if "]==]" in text:
        raise ValueError("the body would end the Lua long string")
    return (
        f'wrk.method = "POST"\nwrk.path = "{path}"\nwrk.headers["Content-Type"] = "{content_type}"\n'
        f"wrk.body = [==[{text}]==]\n"
    )


_REQUESTS = re.compile(r"(\d+) requests in ([0-9.]+)(us|ms|s|m)\b")
_ERRORS = re.compile(
    r"Non-2xx or 3xx responses: (\d+)|Socket errors: connect (\d+), read (\d+), write (\d+), timeout (\d+)"
)
_SCALE = {"us": 1e-6, "ms": 1e-3, "s": 1.0, "m": 60.0}


def run_wrk(server: Server, path: str, body: bytes, seconds: float, connections: int, threads: int = 1) -> Window:
    """``wrk`` against ``path`` for ``seconds``; its own CPU from the children's rusage."""
    with tempfile.NamedTemporaryFile("w", suffix=".lua", delete=False) as script:
        script.write(_lua(path, body, "application/json"))
    try:
        before_server = server_cpu_s(server)
        before_children = resource.getrusage(resource.RUSAGE_CHILDREN)
        done = subprocess.run(
            [
                wrk_path() or "wrk", "-t", str(threads), "-c", str(connections), "-d", f"{max(1, round(seconds))}s",
                "-s", script.name, server.url,
            ],
            capture_output=True, text=True, timeout=seconds + 60, check=True,
        )  # fmt: skip
        after_children = resource.getrusage(resource.RUSAGE_CHILDREN)
        used_server = server_cpu_s(server) - before_server
    finally:
        os.unlink(script.name)
    found = _REQUESTS.search(done.stdout)
    if found is None:
        raise RuntimeError(f"wrk printed no request count:\n{done.stdout}\n{done.stderr}")
    errors = sum(int(x) for match in _ERRORS.finditer(done.stdout) for x in match.groups() if x)
    client = (after_children.ru_utime - before_children.ru_utime) + (after_children.ru_stime - before_children.ru_stime)
    return Window(int(found[1]), float(found[2]) * _SCALE[found[3]], used_server, client, errors)


def measured(server: Server, run: Callable[[], tuple[int, float, float, int]]) -> Window:
    """A window of another load generator (``run`` gives requests, seconds, its CPU seconds, errors), with the
    server's CPU read around it."""
    before = server_cpu_s(server)
    requests, seconds, client_cpu, errors = run()
    return Window(requests, seconds, server_cpu_s(server) - before, client_cpu, errors)
