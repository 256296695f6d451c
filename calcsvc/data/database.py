"""Engine, sessions and schema upgrades for SQLite (embedded default) and PostgreSQL (production)."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from sqlalchemy import Connection, Engine, create_engine, event, text
from sqlalchemy.exc import DBAPIError, OperationalError
from sqlalchemy.orm import Session, sessionmaker

MIGRATIONS = Path(__file__).with_name("migrations")
CONNECT_TIMEOUT_S = 5
# How long a write waits for a lock another connection holds before the request is answered "busy, retry".
# A sync worker is held for the whole wait and this service's own transactions take milliseconds, so a lock
# held longer belongs to something else (a backup, an admin's open transaction): a few seconds ride out
# concurrent edits, and a quick 503 with Retry-After frees the worker and lets the client retry or report.
LOCK_WAIT_S = 5
_LOCK_NOT_AVAILABLE = "55P03"  # PostgreSQL's SQLSTATE once lock_timeout has passed


def make_engine(url: str, pool_size: int = 5) -> Engine:
    if url.startswith("sqlite"):
        # A writer waits for the file lock instead of failing at once under concurrent edits, but not for long.
        engine = create_engine(url, connect_args={"timeout": LOCK_WAIT_S, "check_same_thread": False})

        @event.listens_for(engine, "connect")
        def _sqlite_pragmas(dbapi_connection: Any, _record: Any) -> None:
            cursor = dbapi_connection.cursor()
            cursor.execute("PRAGMA foreign_keys=ON")
            cursor.execute("PRAGMA journal_mode=WAL")
            cursor.close()

        return engine
    # pre_ping replaces connections the server closed (restart, terminated backend) before they are used.
    engine = create_engine(url, pool_pre_ping=True, pool_size=pool_size, max_overflow=pool_size)

    @event.listens_for(engine, "do_connect")
    def _connect_timeout(_dialect: Any, _record: Any, _cargs: Any, cparams: dict[str, Any]) -> None:
        # libpq waits forever for a server that accepts but never answers, hanging /readyz and every request;
        # a connect_timeout given in the URL wins.
        cparams.setdefault("connect_timeout", CONNECT_TIMEOUT_S)
        # Without lock_timeout a write blocked by a lock waits until the worker is killed; options in the URL win.
        cparams.setdefault("options", f"-c lock_timeout={LOCK_WAIT_S * 1000}")

    return engine


class Database:
    def __init__(self, url: str, pool_size: int = 5) -> None:
        self.url = url
        self.engine = make_engine(url, pool_size)
        self._sessions = sessionmaker(self.engine, expire_on_commit=False)

    @contextmanager
    def transaction(self) -> Iterator[Session]:
        """A session inside one transaction: committed on success, rolled back on any exception."""
        with self._sessions() as session, session.begin():
            yield session

    @contextmanager
    def reading(self) -> Iterator[Connection]:
        """A Core connection for reads in one transaction (rolled back on close): no ORM session to set up."""
        with self.engine.connect() as connection:
            yield connection

    def read_value(self, statement: str) -> Any:
        """The first column of ``statement``'s first row (None for no row), read on a pooled DBAPI connection
        outside any transaction: a check made on every request, without SQLAlchemy's work per statement (a
        fifth of it on SQLite) nor, on PostgreSQL, the BEGIN and ROLLBACK round trips a transaction adds."""
        raw = self.engine.raw_connection()
        autocommit = self.engine.dialect.name == "postgresql"
        try:
            if autocommit:
                raw.driver_connection.autocommit = True  # type: ignore[union-attr]
            cursor = raw.cursor()
            try:
                cursor.execute(statement)
                row = cursor.fetchone()
            finally:
                cursor.close()
            if autocommit:
                raw.driver_connection.autocommit = False  # type: ignore[union-attr]
        except self.engine.dialect.loaded_dbapi.Error as exc:
            raw.invalidate()  # in an unknown state: the pool opens a new one
            # As SQLAlchemy raises it (OperationalError and so on), which the service's error mapping reads.
            raise DBAPIError.instance(statement, None, exc, self.engine.dialect.loaded_dbapi.Error) from exc
        except BaseException:
            raw.invalidate()  # interrupted, perhaps still in autocommit: never handed to a transaction
            raise
        finally:
            raw.close()
        return None if row is None else row[0]

    def ping(self) -> None:
        """Raise what connecting and asking one question raises (an OperationalError when unreachable)."""
        with self.engine.connect() as connection:
            connection.execute(text("SELECT 1"))

    def reachable(self) -> bool:
        try:
            self.ping()
            return True
        except Exception:
            return False

    def dispose(self) -> None:
        self.engine.dispose()


def is_busy(error: OperationalError) -> bool:
    """Whether the database refused because a lock stayed taken for LOCK_WAIT_S (it answers; retry soon)."""
    cause = error.orig
    return str(getattr(cause, "sqlite_errorname", "")).startswith(("SQLITE_BUSY", "SQLITE_LOCKED")) or (
        getattr(cause, "sqlstate", None) == _LOCK_NOT_AVAILABLE
    )


def alembic_config(url: str) -> Config:
    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS))
    config.set_main_option("sqlalchemy.url", url.replace("%", "%%"))
    return config


def schema_revision(url: str) -> str | None:
    """The schema revision the database is at; None for a database with no schema yet."""
    engine = create_engine(url)
    try:
        with engine.connect() as connection:
            current: str | None = MigrationContext.configure(connection).get_current_revision()
            return current
    finally:
        engine.dispose()


def upgrade(url: str, revision: str = "head") -> tuple[str | None, str | None]:
    """Create or upgrade the schema; existing rows are kept. Returns the schema revision before and after."""
    if url.startswith("sqlite:///"):
        Path(url.removeprefix("sqlite:///")).parent.mkdir(parents=True, exist_ok=True)
    before = schema_revision(url)
    command.upgrade(alembic_config(url), revision)
    return before, schema_revision(url)
