"""Engine, sessions and schema upgrades for SQLite (embedded default) and PostgreSQL (production)."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from alembic import command
from alembic.config import Config
from sqlalchemy import Engine, create_engine, event, text
from sqlalchemy.orm import Session, sessionmaker

MIGRATIONS = Path(__file__).with_name("migrations")
CONNECT_TIMEOUT_S = 5


def make_engine(url: str, pool_size: int = 5) -> Engine:
    if url.startswith("sqlite"):
        # A writer waits up to 30 s for the file lock instead of failing at once under concurrent edits.
        engine = create_engine(url, connect_args={"timeout": 30, "check_same_thread": False})

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

    def reachable(self) -> bool:
        try:
            with self.engine.connect() as connection:
                connection.execute(text("SELECT 1"))
            return True
        except Exception:
            return False

    def dispose(self) -> None:
        self.engine.dispose()


def alembic_config(url: str) -> Config:
    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS))
    config.set_main_option("sqlalchemy.url", url.replace("%", "%%"))
    return config


def upgrade(url: str, revision: str = "head") -> None:
    """Create or upgrade the schema; existing rows are kept."""
    if url.startswith("sqlite:///"):
        Path(url.removeprefix("sqlite:///")).parent.mkdir(parents=True, exist_ok=True)
    command.upgrade(alembic_config(url), revision)
