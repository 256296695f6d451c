"""The ``calcsvc`` command: serve, manage the database and tokens."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from calcsvc.config import ConfigError


def _app_database() -> tuple[str, str]:
    """The database URL and seed folder the server would use, so commands and server always agree."""
    from calcsvc import create_app

    app = create_app()
    return app.config["DATABASE_URL"], app.config["SEED_DIR"]


def _db_upgrade(_args: argparse.Namespace) -> int:
    from calcsvc.data.database import upgrade

    url, _ = _app_database()
    upgrade(url)
    print(f"database schema is current ({_redact(url)})")
    return 0


def _db_seed(args: argparse.Namespace) -> int:
    from calcsvc.data.database import Database
    from calcsvc.data.seed import load_seed

    url, seed_dir = _app_database()
    database = Database(url)
    with database.transaction() as session:
        if args.if_empty and _has_parts(session):
            print("the parts table already holds parts; seed skipped")
            return 0
        added = load_seed(session, Path(seed_dir))
    print(f"seeded {added} new part(s) from {seed_dir}")
    return 0


def _has_parts(session: object) -> bool:
    from sqlalchemy import select
    from sqlalchemy.orm import Session

    from calcsvc.data.models import Part

    assert isinstance(session, Session)
    return session.scalar(select(Part.part_id).limit(1)) is not None


def _token_create(args: argparse.Namespace) -> int:
    from calcsvc.data.database import Database
    from calcsvc.data.tokens import create_token

    url, _ = _app_database()
    with Database(url).transaction() as session:
        token = create_token(session, args.name, args.role)
    print(token)
    print(f"token '{args.name}' ({args.role}) created; it is shown only this once", file=sys.stderr)
    return 0


def _token_revoke(args: argparse.Namespace) -> int:
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


def _serve(_args: argparse.Namespace) -> int:
    _app_database()  # fail here, with a clear message, on a bad setting
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


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="calcsvc", description="calcsvc service and database commands")
    commands = parser.add_subparsers(dest="command", required=True)

    commands.add_parser("serve", help="serve the API with gunicorn (HOST, PORT)").set_defaults(run=_serve)

    db = commands.add_parser("db", help="database schema and seed parts").add_subparsers(
        dest="db", required=True
    )
    db.add_parser("upgrade", help="create or upgrade the schema, keeping data").set_defaults(run=_db_upgrade)
    seed = db.add_parser("seed", help="add the seed parts not yet in the table (never overwrites)")
    seed.add_argument("--if-empty", action="store_true", help="only seed a table that holds no parts")
    seed.set_defaults(run=_db_seed)

    token = commands.add_parser("token", help="API tokens").add_subparsers(dest="token", required=True)
    create = token.add_parser("create", help="make a token; prints it once")
    create.add_argument("--name", required=True)
    create.add_argument("--role", required=True, choices=("editor", "reviewer"))
    create.set_defaults(run=_token_create)
    revoke = token.add_parser("revoke", help="remove a token")
    revoke.add_argument("name")
    revoke.set_defaults(run=_token_revoke)
    return parser


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    try:
        return int(args.run(args))
    except (ConfigError, ValueError) as exc:
        print(f"calcsvc: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())
