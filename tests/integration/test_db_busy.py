"""A write blocked by a lock another connection holds (a backup, an admin's open transaction): a quick 503
"busy" with Retry-After instead of a worker held for half a minute, reads unaffected, the write done once
the lock is gone. Runs on every configured store."""

from __future__ import annotations

import sqlite3
import time
from collections.abc import Iterator
from contextlib import contextmanager

import pytest
from flask import Flask
from helpers import assert_problem, bearer
from sqlalchemy import create_engine, text
from test_concurrency import LED
from test_review_page import OPAMP_ID, OPAMP_PARAMETERS, approve, edit, status_of

from calcsvc import create_app
from calcsvc.data import database
from calcsvc.web.problems import RETRY_BUSY_S

WAIT_S = 1  # the lock wait for these tests; the default is checked separately


@contextmanager
def write_lock(url: str) -> Iterator[None]:
    """Hold the lock a writer of the parts table needs, from a connection of our own, until leaving."""
    if url.startswith("sqlite"):
        holder = sqlite3.connect(url.removeprefix("sqlite:///"), isolation_level=None)
        holder.execute("BEGIN IMMEDIATE")  # the write lock; WAL readers go on
        try:
            yield
        finally:
            holder.rollback()
            holder.close()
        return
    engine = create_engine(url)
    try:
        with engine.connect() as connection:
            connection.execute(text("LOCK TABLE parts IN EXCLUSIVE MODE"))  # blocks writes, not reads
            try:
                yield
            finally:
                connection.rollback()
    finally:
        engine.dispose()


@pytest.fixture
def short_wait(app: Flask, monkeypatch: pytest.MonkeyPatch) -> Iterator[Flask]:
    """The app on the same store, its lock wait cut to WAIT_S so the tests stay fast."""
    monkeypatch.setattr(database, "LOCK_WAIT_S", WAIT_S)
    service = create_app({"DATABASE_URL": app.config["DATABASE_URL"], "SEED_DIR": app.config["SEED_DIR"]})
    yield service
    service.extensions["calcsvc.db"].dispose()


def test_a_write_blocked_by_a_lock_is_busy_with_retry_after(
    short_wait: Flask, database_url: str, tokens: dict[str, str]
) -> None:
    client = short_wait.test_client()
    editor = bearer(tokens["edna"])
    with write_lock(database_url):
        started = time.monotonic()
        body = assert_problem(client.post("/v1/parts", json=LED, headers=editor), 503)
        waited = time.monotonic() - started
        assert body["type"] == "urn:calcsvc:problem:database-busy" and body["title"] == "Database busy"
        assert client.post("/v1/parts", json=LED, headers=editor).headers["Retry-After"] == str(RETRY_BUSY_S)
        assert client.get("/v1/parts").status_code == 200  # readers are not held up
        assert client.get("/readyz").status_code == 200  # the database answers: it is busy, not down
    assert WAIT_S * 0.9 <= waited < WAIT_S + 5  # it waited for the lock, then gave up
    assert client.post("/v1/parts", json=LED, headers=editor).status_code == 201  # the retry lands


def test_an_approval_blocked_by_a_lock_is_a_busy_page(
    short_wait: Flask, seeded: Flask, database_url: str, tokens: dict[str, str]
) -> None:
    client = short_wait.test_client()
    edit(client, tokens["edna"], OPAMP_ID, OPAMP_PARAMETERS)
    with write_lock(database_url):
        response = approve(client, OPAMP_ID, tokens["rita"])
    assert (response.status_code, response.mimetype) == (503, "text/html")
    assert "the database is busy" in response.get_data(as_text=True)
    assert response.headers["Retry-After"] == str(RETRY_BUSY_S)
    assert status_of(client, OPAMP_ID) == "draft"
    assert approve(client, OPAMP_ID, tokens["rita"]).status_code == 303


def test_the_service_waits_a_few_seconds_for_a_lock(app: Flask) -> None:
    with app.extensions["calcsvc.db"].engine.connect() as connection:
        if connection.dialect.name == "sqlite":
            waits_ms = connection.exec_driver_sql("PRAGMA busy_timeout").scalar()
        else:
            waits_ms = connection.exec_driver_sql("SELECT setting FROM pg_settings WHERE name='lock_timeout'").scalar()
    assert int(waits_ms) == database.LOCK_WAIT_S * 1000 == 5000
