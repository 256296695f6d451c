"""The commands that run on the server's own machine, with the server's settings: serve, and manage the
database and the API tokens."""

from __future__ import annotations

import argparse
import os
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any


def _app_settings() -> dict[str, Any]:
    """The settings the server would use, so commands and server always agree."""
    from calcsvc import create_app

    return dict(create_app().config)


def _app_database() -> tuple[str, str]:
    """The database URL and seed folder the server would use."""
    settings = _app_settings()
    return settings["DATABASE_URL"], settings["SEED_DIR"]


def _cause(error: Exception) -> str:
    """The first line of what the database driver said (its later lines are hints for another audience)."""
    cause = getattr(error, "orig", None) or error
    return (str(cause).strip().splitlines() or [type(cause).__name__])[0]


def on_database(command: Callable[[argparse.Namespace], int]) -> Callable[[argparse.Namespace], int]:
    """A command that uses the database: when it cannot reach it (or a lock stays taken), one line naming the
    cause and exit 2."""

    def run(args: argparse.Namespace) -> int:
        from sqlalchemy.exc import OperationalError

        from calcsvc.data.database import is_busy

        try:
            return command(args)
        except OperationalError as exc:
            url, _ = _app_database()
            state = "busy" if is_busy(exc) else "not reachable"
            print(f"calcsvc: the database is {state} ({_redact(url)}): {_cause(exc)}", file=sys.stderr)
            return 2

    return run


def db_wait(_args: argparse.Namespace) -> int:
    """Wait up to CALCSVC_DB_WAIT_S for a database server that is still starting (containers start together)."""
    from sqlalchemy.exc import OperationalError

    from calcsvc.data.database import Database

    settings = _app_settings()
    url, patience = settings["DATABASE_URL"], settings["DB_WAIT_S"]
    if url.startswith("sqlite"):
        print("the database is a SQLite file: no server to wait for")
        return 0
    database = Database(url, pool_size=1)
    deadline = time.monotonic() + patience
    waiting = False
    try:
        while True:
            try:
                database.ping()
            except OperationalError as exc:
                if time.monotonic() >= deadline:
                    message = f"the database did not answer within {patience} s ({_redact(url)}): {_cause(exc)}"
                    print(f"calcsvc: {message}", file=sys.stderr)
                    return 2
                if not waiting:
                    print(f"waiting up to {patience} s for the database ({_redact(url)}): {_cause(exc)}", flush=True)
                    waiting = True
                time.sleep(min(1.0, max(0.0, deadline - time.monotonic())))
                continue
            print(f"the database answers ({_redact(url)})")
            return 0
    finally:
        database.dispose()


def db_upgrade(_args: argparse.Namespace) -> int:
    from calcsvc.data.database import upgrade

    url, _ = _app_database()
    before, after = upgrade(url)
    if before is None:
        print(f"database created at schema {after} ({_redact(url)})")
    elif before != after:
        print(f"database schema upgraded from {before} to {after} ({_redact(url)})")
    else:
        print(f"database schema is current at {after} ({_redact(url)})")
    return 0


def db_seed(args: argparse.Namespace) -> int:
    from calcsvc.data.database import Database
    from calcsvc.data.seed import SEED_AUTHOR, load_seed
    from calcsvc.service.designs import DEMO_DESIGN_ID, seed_demo_design

    url, seed_dir = _app_database()
    database = Database(url)
    with database.transaction() as session:
        if args.if_empty and _has_parts(session):
            print("the parts table already holds parts; seed skipped")
            return 0
        added = load_seed(session, Path(seed_dir))
    print(f"seeded {added} new part(s) from {seed_dir}")
    if seed_demo_design(database, SEED_AUTHOR):
        print(f"saved the demo channel as the design '{DEMO_DESIGN_ID}'")
    return 0


def db_check(args: argparse.Namespace) -> int:
    """Report stored part_ids that break the id rule (no request can reach them); ``--fix`` renames them."""
    from calcsvc.data.database import Database
    from calcsvc.data.part_ids import RULE, suggest
    from calcsvc.data.store import PartStore
    from calcsvc.data.store_errors import StoreError

    url, _ = _app_database()
    database = Database(url)
    with database.transaction() as session:
        store = PartStore(session)
        bad = store.malformed_ids()
        if not bad:
            print("every stored part_id follows the rule")
            return 0
        print(f"{len(bad)} stored part_id(s) break the rule ({RULE}); requests cannot reach them:")
        left = 0
        for part_id in bad:
            new = suggest(part_id)
            if not args.fix:
                hint = f"rename to '{new}' with: calcsvc db check --fix" if new else "no valid id can be derived"
                print(f"  {part_id!r}: {hint}")
                left += 1
                continue
            try:
                if new is None:
                    raise StoreError("no valid id can be derived")
                store.rename(part_id, new, "calcsvc db check --fix")
                print(f"  {part_id!r}: renamed to '{new}' (its revisions and history follow; the rename is recorded)")
            except StoreError as exc:
                print(f"  {part_id!r}: not renamed: {exc}")
                left += 1
    database.dispose()
    if left:
        print(f"{left} part_id(s) left to fix", file=sys.stderr)
    return 1 if left else 0


def _has_parts(session: object) -> bool:
    from sqlalchemy import select
    from sqlalchemy.orm import Session

    from calcsvc.data.models import Part

    assert isinstance(session, Session)
    return session.scalar(select(Part.part_id).limit(1)) is not None


def token_create(args: argparse.Namespace) -> int:
    from calcsvc.data.database import Database
    from calcsvc.data.tokens import create_token

    url, _ = _app_database()
    with Database(url).transaction() as session:
        token = create_token(session, args.name, args.role)
    print(token)
    print(f"token '{args.name}' ({args.role}) created; it is shown only this once", file=sys.stderr)
    return 0


def token_list(_args: argparse.Namespace) -> int:
    from calcsvc.data.database import Database
    from calcsvc.data.tokens import list_tokens

    url, _ = _app_database()
    with Database(url).transaction() as session:
        tokens = list_tokens(session)
    width = max([len("NAME")] + [len(t.name) for t in tokens])
    print(f"{'NAME':<{width}}  ROLE      CREATED")
    for t in tokens:
        print(f"{t.name:<{width}}  {t.role:<8}  {t.created_at:%Y-%m-%d %H:%M}")
    print(f"{len(tokens)} token(s); a token itself is shown only when it is created", file=sys.stderr)
    return 0


def token_revoke(args: argparse.Namespace) -> int:
    from calcsvc.data.database import Database
    from calcsvc.data.tokens import revoke_token

    url, _ = _app_database()
    with Database(url).transaction() as session:
        removed = revoke_token(session, args.name)
    if not removed:
        print(f"no token named '{args.name}'", file=sys.stderr)
        return 1
    print(f"token '{args.name}' revoked")
    return 0


def serve(_args: argparse.Namespace) -> int:
    _app_database()  # fail here, with a clear message, on a bad setting
    if not os.environ.get("WEB_CONCURRENCY", "x").strip():
        del os.environ["WEB_CONCURRENCY"]  # empty means "the default" here; gunicorn would fail to read it
    command = [
        sys.executable, "-m", "gunicorn", "--config", "python:calcsvc.gunicorn_conf", "calcsvc.wsgi:app",
    ]  # fmt: skip
    os.execv(sys.executable, command)
    return 0  # not reached


def _redact(url: str) -> str:
    scheme, sep, rest = url.partition("://")
    credentials, at, host = rest.rpartition("@")
    if at and ":" in credentials:
        return f"{scheme}{sep}{credentials.split(':')[0]}:***@{host}"
    return url
