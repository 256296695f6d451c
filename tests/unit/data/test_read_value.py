"""``Database.read_value``: one value read outside a transaction, its errors raised as SQLAlchemy's, and the
connection handed back to the pool as it was taken (on PostgreSQL: not left in autocommit)."""

from __future__ import annotations

import pytest
from flask import Flask
from sqlalchemy import text
from sqlalchemy.exc import DBAPIError

from calcsvc.data.database import Database


@pytest.fixture
def database(app: Flask) -> Database:
    db: Database = app.extensions["calcsvc.db"]
    return db


def test_a_value_is_read_and_no_row_is_none(database: Database) -> None:
    assert database.read_value("SELECT 1 + 1") == 2
    assert database.read_value("SELECT part_id FROM parts WHERE part_id = 'no-such-part'") is None


def test_an_error_is_raised_as_sqlalchemy_raises_it_and_the_pool_still_serves(database: Database) -> None:
    with pytest.raises(DBAPIError):
        database.read_value("SELECT nothing FROM no_such_table")
    assert database.read_value("SELECT 1") == 1


def test_a_transaction_after_a_read_is_still_rolled_back_whole(database: Database) -> None:
    """Every pooled connection the reads used is back in transaction mode: a failed write leaves nothing."""
    for _ in range(database.engine.pool.size() + 1):
        database.read_value("SELECT 1")
    with pytest.raises(RuntimeError), database.transaction() as session:
        session.execute(
            text(
                "INSERT INTO api_tokens (name, role, token_sha256, created_at) "
                "VALUES ('half-done', 'editor', 'x', CURRENT_TIMESTAMP)"
            )
        )
        raise RuntimeError("failed after the write")
    assert database.read_value("SELECT count(*) FROM api_tokens WHERE name = 'half-done'") == 0
