"""calcsvc under gunicorn on a free loopback port, for the benchmark and load scripts.

``gunicorn()`` prepares a database (a temporary SQLite file unless a URL is given) with ``calcsvc db upgrade``
and ``calcsvc db seed``, starts gunicorn with the project's own settings (``calcsvc/gunicorn_conf.py``) and a
``--pid`` file, waits until every worker is up, and always stops the master by the PID in that file.
Traffic only ever goes to 127.0.0.1.
"""

from __future__ import annotations

import http.client
import os
import signal
import socket
import subprocess
import sys
import tempfile
import time
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
BENCHMARKS = REPO / "benchmarks"
LOOPBACK = "127.0.0.1"
START_TIMEOUT_S = 60.0
STOP_TIMEOUT_S = 40.0  # above gunicorn_conf's graceful_timeout (30 s)


def free_port() -> int:
    """A TCP port nothing listens on at the moment (the kernel's pick on loopback)."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as probe:
        probe.bind((LOOPBACK, 0))
        return int(probe.getsockname()[1])


def calcsvc(env: Mapping[str, str], *args: str) -> str:
    """Run the ``calcsvc`` command of this interpreter's environment; its standard output."""
    done = subprocess.run(
        [sys.executable, "-m", "calcsvc.cli", *args],
        env=dict(env),
        cwd=REPO,
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )
    if done.returncode != 0:
        raise RuntimeError(f"calcsvc {' '.join(args)} failed ({done.returncode}): {done.stderr.strip()}")
    return done.stdout


def prepare_database(env: Mapping[str, str]) -> None:
    """Create or upgrade the schema of ``env["DATABASE_URL"]`` and add the seed parts (never overwrites)."""
    calcsvc(env, "db", "upgrade")
    calcsvc(env, "db", "seed")


def children(pid: int) -> list[int]:
    """PIDs of the processes whose parent is ``pid`` (gunicorn's workers, for its master)."""
    found = []
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_text()
        except OSError:
            continue  # gone meanwhile
        # Field 4 is the parent; the command name (field 2) may hold spaces, so split after its ')'.
        if int(stat.rpartition(")")[2].split()[1]) == pid:
            found.append(int(entry.name))
    return sorted(found)


def peak_rss_bytes(pid: int) -> int:
    """The process's peak resident set size so far (VmHWM)."""
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) * 1024
    raise RuntimeError(f"/proc/{pid}/status has no VmHWM")


def reset_peak_rss(pid: int) -> bool:
    """Reset the process's VmHWM to its current RSS (Linux: "5" to /proc/<pid>/clear_refs); False if refused."""
    try:
        Path(f"/proc/{pid}/clear_refs").write_text("5")
    except OSError:
        return False
    return True


@dataclass(frozen=True)
class Server:
    host: str
    port: int
    master_pid: int
    env: dict[str, str]  # the environment the server and its database commands run with
    log: Path

    @property
    def url(self) -> str:
        return f"http://{self.host}:{self.port}"

    def workers(self) -> list[int]:
        return children(self.master_pid)


def _answers(port: int) -> bool:
    connection = http.client.HTTPConnection(LOOPBACK, port, timeout=2)
    try:
        connection.request("GET", "/healthz")
        return connection.getresponse().status == 200
    except OSError:
        return False
    finally:
        connection.close()


def _tail(path: Path, lines: int = 20) -> str:
    try:
        return "\n".join(path.read_text(errors="replace").splitlines()[-lines:])
    except OSError:
        return ""


def _wait_ready(process: subprocess.Popen[bytes], pidfile: Path, port: int, log: Path) -> int:
    """The master's PID once it answers and its worker count has settled; raises if it dies or stalls."""
    deadline = time.monotonic() + START_TIMEOUT_S
    master = 0
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise RuntimeError(f"gunicorn exited with {process.returncode}:\n{_tail(log)}")
        if not master and pidfile.exists() and pidfile.read_text().strip():
            master = int(pidfile.read_text())
        if master and _answers(port):
            break
        time.sleep(0.1)
    else:
        raise RuntimeError(f"gunicorn did not answer within {START_TIMEOUT_S:.0f} s:\n{_tail(log)}")
    # The master forks its workers a moment apart: wait until their number has held for half a second.
    count, since = len(children(master)), time.monotonic()
    while time.monotonic() < deadline and time.monotonic() - since < 0.5:
        time.sleep(0.05)
        now = len(children(master))
        if now != count:
            count, since = now, time.monotonic()
    return master


def _stop(process: subprocess.Popen[bytes], pidfile: Path) -> None:
    """SIGTERM to the master by the PID in its pid file (the process started here if it never wrote one)."""
    if process.poll() is not None:
        return
    text = pidfile.read_text().strip() if pidfile.exists() else ""
    master = int(text) if text else process.pid
    os.kill(master, signal.SIGTERM)
    try:
        process.wait(timeout=STOP_TIMEOUT_S)
    except subprocess.TimeoutExpired:
        os.kill(master, signal.SIGKILL)  # workers notice their parent is gone and exit
        process.wait(timeout=10)


@contextmanager
def gunicorn(
    app: str = "calcsvc.wsgi:app", database_url: str | None = None, env: Mapping[str, str] | None = None
) -> Iterator[Server]:
    """Serve ``app`` (a gunicorn app spec; modules in benchmarks/ are importable) with calcsvc's gunicorn
    settings on a free loopback port. Without ``database_url``: a fresh SQLite file in a temporary folder."""
    with tempfile.TemporaryDirectory(prefix="calcsvc-bench-") as folder:
        tmp = Path(folder)
        port = free_port()
        environment = {
            **os.environ,
            **(env or {}),
            "DATABASE_URL": database_url or f"sqlite:///{tmp / 'calcsvc.sqlite'}",
            "HOST": LOOPBACK,
            "PORT": str(port),
        }
        prepare_database(environment)
        pidfile, log = tmp / "gunicorn.pid", tmp / "server.log"
        command = [
            sys.executable, "-m", "gunicorn", "--config", "python:calcsvc.gunicorn_conf",
            "--pid", str(pidfile), "--pythonpath", str(BENCHMARKS), app,
        ]  # fmt: skip
        with log.open("wb") as output:
            process = subprocess.Popen(command, env=environment, cwd=REPO, stdout=output, stderr=subprocess.STDOUT)
            try:
                master = _wait_ready(process, pidfile, port, log)
                yield Server(LOOPBACK, port, master, environment, log)
            finally:
                _stop(process, pidfile)
