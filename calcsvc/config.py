"""Settings, read from the environment (or a mapping in tests) and checked once at start-up."""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

REPO_SEED_DIR = Path(__file__).resolve().parent.parent / "seed_parts"


class ConfigError(ValueError):
    """A setting has a value the service cannot run with; the message names the variable."""


@dataclass(frozen=True)
class Setting:
    env: str
    default: str
    description: str
    shown_default: str | None = None  # the README's words for a default that depends on the machine


# One table drives parsing, validation and the README's settings table.
SETTINGS: dict[str, Setting] = {
    "DATABASE_URL": Setting(
        "DATABASE_URL",
        "",
        "SQLAlchemy URL; empty means the SQLite file `calcsvc.sqlite` in the instance folder. "
        "Production: `postgresql+psycopg://user@host:5432/db`",
    ),
    "READ_REQUIRES_TOKEN": Setting(
        "CALCSVC_READ_REQUIRES_TOKEN", "false", "`true`: every /v1 read also needs a bearer token"
    ),
    "CORS_ORIGINS": Setting(
        "CALCSVC_CORS_ORIGINS", "", "comma-separated origins allowed to call from a browser; empty: CORS off"
    ),
    "MAX_CONTENT_LENGTH": Setting(
        "CALCSVC_MAX_CONTENT_LENGTH",
        "67108864",
        "largest batch request body, bytes; every other route takes at most 1 MiB "
        "(a duty-cycle budget with waveforms 8 MiB), or this value if smaller",
    ),
    "BATCH_MAX_ROWS": Setting("CALCSVC_BATCH_MAX_ROWS", "100000", "most rows in one batch request"),
    "BATCH_MAX_SWEEP_POINTS": Setting(
        "CALCSVC_BATCH_MAX_SWEEP_POINTS", "200000", "most sweep points (summed over rows) in one batch answer"
    ),
    "SELECT_MAX_COMBINATIONS": Setting(
        "CALCSVC_SELECT_MAX_COMBINATIONS",
        "100000",
        "most candidates (or combinations of candidates, for a channel) one /v1/select request evaluates",
    ),
    "DB_POOL_SIZE": Setting(
        "CALCSVC_DB_POOL_SIZE", "5", "database connections a worker keeps open; under load it may open as many again"
    ),
    "DB_WAIT_S": Setting(
        "CALCSVC_DB_WAIT_S",
        "60",
        "seconds `calcsvc db wait` (the container's first start-up step) waits for a database server to answer; "
        "0: one try",
    ),
    "LOG_LEVEL": Setting("CALCSVC_LOG_LEVEL", "INFO", "DEBUG, INFO, WARNING or ERROR"),
    "SEED_DIR": Setting(
        "CALCSVC_SEED_DIR", str(REPO_SEED_DIR), "folder of seed part files", "the checkout's `seed_parts/`"
    ),
    # The server process around the app, read by calcsvc.gunicorn_conf (`calcsvc serve`).
    "HOST": Setting("HOST", "127.0.0.1", "address the server listens on; the container image sets 0.0.0.0"),
    "PORT": Setting("PORT", "8000", "port the server listens on"),
    "WORKERS": Setting("WEB_CONCURRENCY", "", "gunicorn worker processes; empty: the CPUs this process may use + 1"),
    "THREADS": Setting("GUNICORN_THREADS", "8", "threads per worker process, each serving one connection at a time"),
    "WORKER_TIMEOUT": Setting(
        "GUNICORN_TIMEOUT", "60", "seconds a worker process may stop answering its heartbeat before it is replaced"
    ),
    "ACCESS_LOG": Setting(
        "GUNICORN_ACCESS_LOG", "", "gunicorn access log file, `-` for stdout; empty: off (the JSON request log has it)"
    ),
}

_TRUE = {"1", "true", "yes", "on"}
_FALSE = {"0", "false", "no", "off", ""}


def _integer(name: str, text: str, low: int, high: int | None = None) -> int:
    try:
        value = int(text)
    except ValueError as exc:
        raise ConfigError(f"{SETTINGS[name].env}={text!r} is not a whole number") from exc
    if value < low:
        raise ConfigError(f"{SETTINGS[name].env}={value} must be at least {low}")
    if high is not None and value > high:
        raise ConfigError(f"{SETTINGS[name].env}={value} must be at most {high}")
    return value


def _boolean(name: str, text: str) -> bool:
    lowered = text.strip().lower()
    if lowered in _TRUE:
        return True
    if lowered in _FALSE:
        return False
    raise ConfigError(f"{SETTINGS[name].env}={text!r} must be true or false")


def load_config(overrides: Mapping[str, Any] | None = None, environ: Mapping[str, str] | None = None) -> dict[str, Any]:
    """Settings as Flask config keys; ``overrides`` (already typed) win over the environment."""
    environ = os.environ if environ is None else environ
    overrides = dict(overrides or {})
    raw = {key: environ.get(s.env, s.default) for key, s in SETTINGS.items()}
    config: dict[str, Any] = {
        "DATABASE_URL": raw["DATABASE_URL"].strip(),
        "READ_REQUIRES_TOKEN": _boolean("READ_REQUIRES_TOKEN", raw["READ_REQUIRES_TOKEN"]),
        "CORS_ORIGINS": [o.strip() for o in raw["CORS_ORIGINS"].split(",") if o.strip()],
        "MAX_CONTENT_LENGTH": _integer("MAX_CONTENT_LENGTH", raw["MAX_CONTENT_LENGTH"], 1024),
        "BATCH_MAX_ROWS": _integer("BATCH_MAX_ROWS", raw["BATCH_MAX_ROWS"], 1),
        "BATCH_MAX_SWEEP_POINTS": _integer("BATCH_MAX_SWEEP_POINTS", raw["BATCH_MAX_SWEEP_POINTS"], 2),
        "SELECT_MAX_COMBINATIONS": _integer("SELECT_MAX_COMBINATIONS", raw["SELECT_MAX_COMBINATIONS"], 1),
        "DB_POOL_SIZE": _integer("DB_POOL_SIZE", raw["DB_POOL_SIZE"], 1),
        "DB_WAIT_S": _integer("DB_WAIT_S", raw["DB_WAIT_S"], 0),
        "LOG_LEVEL": raw["LOG_LEVEL"].strip().upper(),
        "SEED_DIR": raw["SEED_DIR"],
        "HOST": raw["HOST"].strip() or SETTINGS["HOST"].default,
        "PORT": _integer("PORT", raw["PORT"], 1, 65535),
        "WORKERS": _integer("WORKERS", raw["WORKERS"], 1) if raw["WORKERS"].strip() else None,
        "THREADS": _integer("THREADS", raw["THREADS"], 1, 64),
        "WORKER_TIMEOUT": _integer("WORKER_TIMEOUT", raw["WORKER_TIMEOUT"], 1),
        "ACCESS_LOG": raw["ACCESS_LOG"].strip(),
    }
    config.update(overrides)
    if config["LOG_LEVEL"] not in {"DEBUG", "INFO", "WARNING", "ERROR"}:
        raise ConfigError(f"CALCSVC_LOG_LEVEL={config['LOG_LEVEL']!r} must be DEBUG, INFO, WARNING or ERROR")
    url = config["DATABASE_URL"]
    if url and not url.startswith(("sqlite:///", "postgresql+psycopg://", "postgresql://")):
        raise ConfigError(
            "DATABASE_URL must start with sqlite:/// or postgresql+psycopg:// (got a URL of another scheme)"
        )
    if url.startswith("postgresql://"):
        config["DATABASE_URL"] = "postgresql+psycopg://" + url.removeprefix("postgresql://")
    for origin in config["CORS_ORIGINS"]:
        if not origin.startswith(("http://", "https://")) or origin.endswith("/"):
            raise ConfigError(f"CALCSVC_CORS_ORIGINS entry {origin!r} must look like https://host[:port]")
    return config


def settings_table() -> str:
    """The README's settings table (Markdown), from SETTINGS."""
    rows = ["| Variable | Default | Meaning |", "| --- | --- | --- |"]
    for setting in SETTINGS.values():
        default = setting.shown_default or (f"`{setting.default}`" if setting.default else "(empty)")
        rows.append(f"| `{setting.env}` | {default} | {setting.description} |")
    return "\n".join(rows)
