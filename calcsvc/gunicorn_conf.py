"""gunicorn settings, from the environment through calcsvc.config (HOST, PORT, WEB_CONCURRENCY, ...).

``GUNICORN_CMD_ARGS`` overrides any of them for a one-off run."""

import math
import os
import shutil
import sys
import tempfile
from pathlib import Path
from typing import Any

from gunicorn import glogging

from calcsvc.config import ConfigError, load_config
from calcsvc.web.request_log import JsonFormatter

try:
    _settings = load_config()
except ConfigError as exc:
    # gunicorn would print a page of traceback from loading the app; one line naming the variable instead.
    print(f"calcsvc: {exc}", file=sys.stderr)
    sys.exit(2)


def _cpu_count() -> int:
    """CPUs this process may use: its CPU set, capped by a cgroup v2 quota (a container's --cpus)."""
    affinity = getattr(os, "sched_getaffinity", None)
    count = len(affinity(0)) if affinity else os.cpu_count() or 1
    try:
        quota, period = Path("/sys/fs/cgroup/cpu.max").read_text().split()
        if quota != "max":
            count = min(count, max(1, math.ceil(int(quota) / int(period))))
    except (OSError, ValueError):
        pass
    return count


def _metrics_dir() -> tuple[str, bool]:
    """The folder where each worker keeps its metric samples, and whether this server made it.

    Set here, before the app (and so prometheus_client) is imported, as the client picks its storage at import.
    """
    configured = os.environ.get("PROMETHEUS_MULTIPROC_DIR", "")
    if not configured:
        made = tempfile.mkdtemp(prefix="calcsvc-metrics-")
        os.environ["PROMETHEUS_MULTIPROC_DIR"] = made
        return made, True
    folder = Path(configured)
    folder.mkdir(parents=True, exist_ok=True)
    for stale in folder.glob("*.db"):
        stale.unlink()  # an earlier run's counts would otherwise be added to this one's
    return configured, False


METRICS_DIR, _OWN_METRICS_DIR = _metrics_dir()

bind = f"{_settings['HOST']}:{_settings['PORT']}"
# The work is CPU-bound numpy and short database transactions: one process per core plus one. Each process
# serves several connections on threads, and the app reads every body under a deadline
# (calcsvc.web.request_body), so a few slow or silent clients hold threads for seconds while the other
# threads keep answering; gunicorn's threaded worker also parks connections that have sent no request yet.
workers = _settings["WORKERS"] or _cpu_count() + 1
worker_class = "gthread"
threads = _settings["THREADS"]
timeout = _settings["WORKER_TIMEOUT"]
graceful_timeout = 30
keepalive = 5
# Worker heartbeats on a container's overlay file system can stall long enough to look like a hang.
worker_tmp_dir = "/dev/shm" if os.path.isdir("/dev/shm") else None
# The app writes its own JSON request log; gunicorn's access log stays off unless asked for.
accesslog = _settings["ACCESS_LOG"] or None
# %(U)s is the path without its query string, which may hold values.
access_log_format = '%(h)s "%(m)s %(U)s" %(s)s %(B)s %(M)sms'
errorlog = "-"
loglevel = _settings["LOG_LEVEL"].lower()
control_socket_disable = True
# Load the app before forking so a bad setting stops the master with one clear message.
preload_app = True


class JsonLogger(glogging.Logger):
    """gunicorn's own lines (start-up, worker timeouts, access log) as JSON, like the app's."""

    def setup(self, cfg: Any) -> None:
        super().setup(cfg)
        for logger in (self.error_log, self.access_log):
            for handler in logger.handlers:
                handler.setFormatter(JsonFormatter())


logger_class = JsonLogger


def child_exit(_server: Any, worker: Any) -> None:
    from prometheus_client import multiprocess  # imported late: after PROMETHEUS_MULTIPROC_DIR is set

    multiprocess.mark_process_dead(worker.pid)


def on_exit(_server: Any) -> None:
    if _OWN_METRICS_DIR:
        shutil.rmtree(METRICS_DIR, ignore_errors=True)
