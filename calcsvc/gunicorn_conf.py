"""gunicorn settings; every value can be overridden from the environment."""

import multiprocessing
import os

bind = f"{os.environ.get('HOST', '127.0.0.1')}:{os.environ.get('PORT', '8000')}"
# The work is CPU-bound numpy and short database transactions: one process per core plus one.
workers = int(os.environ.get("WEB_CONCURRENCY", multiprocessing.cpu_count() + 1))
worker_class = "sync"
timeout = int(os.environ.get("GUNICORN_TIMEOUT", "60"))
graceful_timeout = 30
keepalive = 5
# The app writes its own JSON request log; gunicorn's access log stays off unless asked for.
accesslog = os.environ.get("GUNICORN_ACCESS_LOG") or None
errorlog = "-"
loglevel = os.environ.get("CALCSVC_LOG_LEVEL", "info").lower()
control_socket_disable = True
# Load the app before forking so a bad setting stops the master with one clear message.
preload_app = True
