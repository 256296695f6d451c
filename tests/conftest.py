"""Fixtures: every test that touches the store runs once on SQLite and, when
CALCSVC_TEST_DATABASE_URL is set, again on PostgreSQL."""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from flask import Flask
from flask.testing import FlaskClient
from sqlalchemy import create_engine, text

from calcsvc import create_app
from calcsvc.data.database import upgrade
from calcsvc.data.seed import load_seed
from calcsvc.data.tokens import create_token

REPO = Path(__file__).resolve().parent.parent
POSTGRES_URL = os.environ.get("CALCSVC_TEST_DATABASE_URL", "")
BACKENDS = ["sqlite", "postgresql"] if POSTGRES_URL else ["sqlite"]
TABLES = ("design_parts", "design_revisions", "designs", "part_events", "part_revisions", "parts", "api_tokens")


def reset_postgres(url: str) -> None:
    """Start from an empty schema so migrations run from the first one, as on a new lab server."""
    engine = create_engine(url, isolation_level="AUTOCOMMIT")
    with engine.connect() as connection:
        connection.execute(text("DROP SCHEMA public CASCADE"))
        connection.execute(text("CREATE SCHEMA public"))
    engine.dispose()


@pytest.fixture(scope="session", params=BACKENDS)
def database_url(request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory) -> str:
    if request.param == "sqlite":
        url = f"sqlite:///{tmp_path_factory.mktemp('db') / 'calcsvc.sqlite'}"
    else:
        url = POSTGRES_URL
        reset_postgres(url)  # fails loudly when the configured PostgreSQL is unreachable
    upgrade(url)
    return url


@pytest.fixture
def app(database_url: str) -> Iterator[Flask]:
    app = create_app({"DATABASE_URL": database_url, "SEED_DIR": str(REPO / "seed_parts")})
    database = app.extensions["calcsvc.db"]
    with database.transaction() as session:
        for table in TABLES:
            session.execute(text(f"DELETE FROM {table}"))
    yield app
    database.dispose()


@pytest.fixture
def client(app: Flask) -> FlaskClient:
    return app.test_client()


@pytest.fixture
def tokens(app: Flask) -> dict[str, str]:
    """Bearer tokens by name: an editor and two reviewers."""
    made = {}
    with app.extensions["calcsvc.db"].transaction() as session:
        for name, role in (("edna", "editor"), ("rita", "reviewer"), ("ravi", "reviewer")):
            made[name] = create_token(session, name, role)
    return made


@pytest.fixture
def seeded(app: Flask) -> Flask:
    with app.extensions["calcsvc.db"].transaction() as session:
        load_seed(session, Path(app.config["SEED_DIR"]))
    return app


def pytest_terminal_summary(terminalreporter: Any) -> None:
    """Say how many tests ran on each store, so a CI log shows both were proven."""
    counts: dict[str, int] = {}
    for outcome in ("passed", "failed"):
        for report in terminalreporter.stats.get(outcome, []):
            if getattr(report, "when", "call") != "call":
                continue
            for store in BACKENDS:
                if f"[{store}" in report.nodeid:
                    counts[store] = counts.get(store, 0) + 1
    terminalreporter.write_sep("=", "stores")
    for store in BACKENDS:
        terminalreporter.write_line(f"{store}: {counts.get(store, 0)} tests ran on this store")
