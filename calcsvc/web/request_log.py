"""JSON logs: one line per request on ``calcsvc.request``, and every ``calcsvc`` line (unhandled errors
included) as JSON carrying the request id. Never a body; the caller's credential is scrubbed."""

from __future__ import annotations

import json
import logging
import re
import sys
import uuid
from datetime import UTC, datetime
from typing import Any, TextIO

from flask import g, has_request_context, request

REQUEST_ID_HEADER = "X-Request-ID"
_SANE_ID = re.compile(r"[A-Za-z0-9._-]{1,64}")
# Health probes and scrapes arrive every few seconds; their successes are logged at DEBUG so they
# don't drown the requests people make (they are still counted in the metrics).
_PROBES = frozenset({"/healthz", "/readyz", "/metrics"})
# No token this service issues is shorter; scrubbing a shorter junk value would garble the log line.
_MIN_SECRET_LENGTH = 8
_HANDLER_NAME = "calcsvc-json"

log = logging.getLogger("calcsvc.request")


def request_id() -> str:
    """The current request's id: the caller's X-Request-ID when it is a sane token, else a new one."""
    if "request_id" not in g:
        incoming = request.headers.get(REQUEST_ID_HEADER, "")
        g.request_id = incoming if _SANE_ID.fullmatch(incoming) else uuid.uuid4().hex
    return str(g.request_id)


def _credential() -> str | None:
    """What the Authorization header carries after its scheme, whatever the scheme."""
    header = request.headers.get("Authorization", "").strip()
    secret = header.partition(" ")[2].strip() or header
    return secret if len(secret) >= _MIN_SECRET_LENGTH else None


def _scrub(value: Any, secret: str) -> Any:
    if isinstance(value, str):
        return value.replace(secret, "[redacted]")
    if isinstance(value, list):
        return [_scrub(item, secret) for item in value]
    return value


class JsonFormatter(logging.Formatter):
    """One JSON object per record; inside a request it names the request id and never holds the credential."""

    def format(self, record: logging.LogRecord) -> str:
        entry: dict[str, Any] = {
            "time": datetime.fromtimestamp(record.created, UTC).isoformat(timespec="milliseconds"),
            "level": record.levelname,
            "logger": record.name,
            "message": record.getMessage(),
        }
        entry.update(getattr(record, "fields", {}))
        if record.exc_info:
            entry["exception"] = self.formatException(record.exc_info)
        if record.stack_info:
            entry["stack"] = self.formatStack(record.stack_info)
        if has_request_context():
            if "request_id" not in entry:
                entry["request_id"] = request_id()
            secret = _credential()
            if secret:
                # An exception message or a mistyped URL may quote the token; it must not reach log storage.
                entry = {key: _scrub(value, secret) for key, value in entry.items()}
        return json.dumps(entry, default=str)


class _StderrHandler(logging.StreamHandler[TextIO]):
    """Writes to whatever ``sys.stderr`` is now: servers and test runners may swap it after start-up."""

    def __init__(self) -> None:
        logging.Handler.__init__(self)  # not StreamHandler's, which would pin today's stream

    @property  # type: ignore[override]
    def stream(self) -> TextIO:
        return sys.stderr


def configure_logging() -> None:
    """Send ``calcsvc`` logs to stderr as JSON; safe to call for every app built in one process."""
    logger = logging.getLogger("calcsvc")
    if any(handler.name == _HANDLER_NAME for handler in logger.handlers):
        return
    handler = _StderrHandler()
    handler.name = _HANDLER_NAME
    handler.setFormatter(JsonFormatter())
    logger.addHandler(handler)


def log_request(status: int, seconds: float) -> None:
    """The request's one log line: what was asked and how it ended, never a value the caller sent."""
    current = request._get_current_object()  # type: ignore[attr-defined]  # once, not through the proxy each time
    method, path = current.method, current.path
    level = logging.DEBUG if path in _PROBES and status < 400 else logging.INFO
    if status >= 500:
        level = logging.WARNING
    if not log.isEnabledFor(level):
        return
    fields = {
        "method": method,
        "path": path,
        # Query values may be secret or personal; the keys alone say what kind of request it was.
        "query_keys": sorted(current.args.keys()) if current.query_string else [],
        "status": status,
        "duration_ms": round(seconds * 1000, 2),
        "request_id": request_id(),
        "remote_addr": current.remote_addr,
    }
    # The record made directly: Logger.log would also walk the stack for a caller this JSON line never names.
    record = log.makeRecord(
        log.name, level, __file__, 0, "%s %s %d", (method, path, status), None, "log_request", {"fields": fields}
    )
    log.handle(record)
