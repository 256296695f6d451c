"""The ``calcsvc`` command: serve, manage the database and tokens (locally, with the server's settings), and
work with the parts table and the calculations of a running server over HTTP."""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any, TextIO

from calcsvc.client import DEFAULT_URL, CalcsvcError, Client
from calcsvc.config import ConfigError
from calcsvc.data.kinds import KINDS


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


def _on_database(command: Callable[[argparse.Namespace], int]) -> Callable[[argparse.Namespace], int]:
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


def _db_wait(_args: argparse.Namespace) -> int:
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


def _db_check(args: argparse.Namespace) -> int:
    """Report stored part_ids that break the id rule (no request can reach them); ``--fix`` renames them."""
    from calcsvc.data.database import Database
    from calcsvc.data.part_ids import RULE, suggest
    from calcsvc.data.store import PartStore, StoreError

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
    if not os.environ.get("WEB_CONCURRENCY", "x").strip():
        del os.environ["WEB_CONCURRENCY"]  # empty means "the default" here; gunicorn would fail to read it
    command = [
        sys.executable, "-m", "gunicorn", "--config", "python:calcsvc.gunicorn_conf", "calcsvc.wsgi:app",
    ]  # fmt: skip
    os.execv(sys.executable, command)
    return 0  # not reached


# --- commands that talk HTTP to a server -----------------------------------------------------------------------


def _client(args: argparse.Namespace) -> Client:
    url = args.url or os.environ.get("CALCSVC_URL") or DEFAULT_URL
    return Client(url, args.token or os.environ.get("CALCSVC_TOKEN") or None)


def _cell(value: Any) -> str:
    """A value for people: 6 significant digits, '-' where a result does not apply."""
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.6g}"
    if isinstance(value, dict):
        return ", ".join(f"{k}: {len(v)} values" if isinstance(v, list) else f"{k}: {v}" for k, v in value.items())
    return str(value)


def _table(headers: list[str], rows: list[list[str]]) -> str:
    widths = [max([len(h)] + [len(row[i]) for row in rows]) for i, h in enumerate(headers)]
    lines = [headers, *rows]
    return "\n".join("  ".join(cell.ljust(w) for cell, w in zip(line, widths, strict=True)).rstrip() for line in lines)


def _pairs(title: str, mapping: dict[str, Any]) -> list[str]:
    """A NAME/VALUE table; lists of objects (such as loads) get a table of their own below it."""
    scalars = [[name, _cell(value)] for name, value in mapping.items() if not _is_records(value)]
    out = [f"{title}:", _indent(_table(["NAME", "VALUE"], scalars))] if scalars else []
    for name, value in mapping.items():
        if _is_records(value):
            columns = list(dict.fromkeys(key for record in value for key in record))
            rows = [[_cell(record.get(c)) for c in columns] for record in value]
            out += [f"{title}, {name}:", _indent(_table([c.upper() for c in columns], rows))]
    return out


def _is_records(value: Any) -> bool:
    return isinstance(value, list) and bool(value) and all(isinstance(v, dict) for v in value)


def _indent(text: str) -> str:
    return "\n".join("  " + line for line in text.splitlines())


def _parts_list(args: argparse.Namespace) -> int:
    with _client(args) as client:
        parts = client.list_parts(args.kind, args.status)
    if args.json:
        print(json.dumps(parts, indent=2))
        return 0
    rows = [[p["part_id"], p["kind"], p["status"], str(p["revision"]), p["description"]] for p in parts]
    print(_table(["PART_ID", "KIND", "STATUS", "REV", "DESCRIPTION"], rows))
    print(f"{len(parts)} part(s)")
    return 0


def _changes(before: dict[str, Any] | None, after: dict[str, Any]) -> str:
    if before is None:
        return "created"
    names = list(dict.fromkeys([*before["parameters"], *after["parameters"]]))
    changed = [
        f"{n} {_cell(before['parameters'].get(n))} -> {_cell(after['parameters'].get(n))}"
        for n in names
        if before["parameters"].get(n) != after["parameters"].get(n)
    ]
    if before["description"] != after["description"]:
        changed.append("description")
    return "; ".join(changed) or "no change"


def _lifecycle(revision: dict[str, Any]) -> list[str]:
    """Retirements, restores and renames of a revision (creation, edits and approval have their own columns)."""
    return [
        f"{e['action']} by {e['actor']}" + (f": {e['reason']}" if e["reason"] else "")
        for e in revision["events"]
        if e["action"] not in ("created", "edited", "approved")
    ]


def _parts_show(args: argparse.Namespace) -> int:
    with _client(args) as client:
        part, etag = client.get_part(args.part_id)
        history = client.revisions(args.part_id)
    if args.json:
        print(json.dumps({"part": part, "etag": etag, "revisions": history}, indent=2))
        return 0
    approval = f" by {part['approved_by']}" if part["approved_by"] else ""
    print(
        _table(
            ["PART_ID", part["part_id"]],
            [
                ["kind", part["kind"]],
                ["status", part["status"] + approval],
                ["revision", f"{part['revision']} (ETag {etag}), by {part['updated_by']} at {part['updated_at']}"],
                ["description", part["description"]],
            ],
        )
    )
    units = {p.name: p.unit for p in KINDS.get(part["kind"], ())}
    names = [name for name in units if name in part["parameters"]] + sorted(part["parameters"].keys() - units.keys())
    parameters = [
        [name, _cell(part["parameters"][name]), "" if units.get(name) == "dimensionless" else units.get(name, "")]
        for name in names
    ]
    print("\nparameters (SI):")
    print(_indent(_table(["NAME", "VALUE", "UNIT"], parameters)))
    revisions = [
        [
            str(r["revision"]),
            str(r["created_at"]),
            r["author"],
            r["approved_by"] or "-",
            "; ".join([_changes(before, r), *_lifecycle(r)]),
        ]
        for before, r in zip([None, *history], history, strict=False)
    ]
    print("\nrevisions:")
    print(_indent(_table(["REV", "CREATED", "AUTHOR", "APPROVED_BY", "CHANGES"], revisions)))
    return 0


def _parts_export(args: argparse.Namespace) -> int:
    from calcsvc.parts_io import export_parts, file_format

    file_format(args.file)  # refuse a wrong suffix before asking the server
    with _client(args) as client:
        written, retired = export_parts(client, args.file, args.kind)
    print(f"exported {written} part(s) to {args.file} (parameters in SI)")
    if retired:
        print(f"{retired} retired part(s) left out", file=sys.stderr)
    return 0


def _progress_bar(stream: TextIO) -> Callable[[int, int], None] | None:
    """A one-line bar on a terminal; nothing when the output is piped or logged."""
    if not stream.isatty():
        return None

    def show(done: int, total: int) -> None:
        filled = 30 * done // total if total else 30
        stream.write(f"\r[{'#' * filled}{'.' * (30 - filled)}] {done}/{total}")
        if done == total:
            stream.write("\n")
        stream.flush()

    return show


def _parts_import(args: argparse.Namespace) -> int:
    from calcsvc.parts_io import ImportInterrupted, ImportRejected, import_parts

    try:
        with _client(args) as client:
            summary = import_parts(client, args.file, _progress_bar(sys.stderr))
    except ImportRejected as exc:
        for error in exc.errors:
            print(f"{args.file}: {error}", file=sys.stderr)
        print(f"calcsvc: {len(exc.errors)} error(s) in {args.file}; nothing was imported", file=sys.stderr)
        return 1
    except ImportInterrupted as exc:
        done = exc.summary
        print(f"calcsvc: import stopped at {exc}", file=sys.stderr)
        print(f"already written: created {done.created}, updated {done.updated}", file=sys.stderr)
        return 2
    print(f"created {len(summary.created)}, updated {len(summary.updated)}, unchanged {len(summary.unchanged)} part(s)")
    if summary.created or summary.updated:
        print("new and changed parts are drafts until a reviewer approves them")
    return 0


def _input_value(text: str) -> Any:
    """A number when the text is one (the server converts units in strings), JSON for lists and objects."""
    stripped = text.strip()
    if stripped[:1] in ("[", "{"):
        try:
            return json.loads(stripped)
        except ValueError as exc:
            raise ValueError(f"{stripped[:40]!r} is not valid JSON: {exc}") from exc
    for parse in (int, float):
        try:
            number = parse(stripped)
        except ValueError:
            continue
        if math.isfinite(number):
            return number
    return text


def calc_inputs(tokens: list[str]) -> dict[str, Any]:
    """``--name value`` and ``--name=value`` pairs as a request body; dashes in names become underscores."""
    body: dict[str, Any] = {}
    position = 0
    while position < len(tokens):
        token = tokens[position]
        if not token.startswith("--") or token == "--":
            raise ValueError(f"expected --name value, got {token!r} (the calculation name goes first)")
        name, equals, value = token[2:].partition("=")
        if not equals:
            if position + 1 >= len(tokens) or tokens[position + 1].startswith("--"):
                raise ValueError(f"--{name} needs a value")
            position += 1
            value = tokens[position]
        position += 1
        key = name.replace("-", "_")
        if key in body:
            raise ValueError(f"--{name} is given twice")
        body[key] = _input_value(value)
    return body


def _calculation_options() -> str:
    """Each calculation and the options it takes, from the calculations' own declarations."""
    from calcsvc.core.registry import EVERY

    return "\n".join(
        f"  {name}: " + " ".join(f"--{option}" for option in spec.accepted()) for name, spec in EVERY.items()
    )


def calc_body(name: str, tokens: list[str]) -> dict[str, Any]:
    """The request body of calculation ``name``, refusing an option it does not declare before asking a server."""
    from calcsvc.core.registry import EVERY

    spec = EVERY.get(name)
    if spec is None:
        raise ValueError(f"no calculation {name!r}; choose from {', '.join(EVERY)}")
    body = calc_inputs(tokens)
    unknown = [key for key in body if key not in spec.accepted()]
    if unknown:
        raise ValueError(f"{name} takes no --{unknown[0]}; it takes " + " ".join(f"--{o}" for o in spec.accepted()))
    return body


def _calc(args: argparse.Namespace) -> int:
    name = args.name.replace("_", "-")
    body = calc_body(name, args.inputs)
    with _client(args) as client:
        result = client.calc(name, **body)
    failed = [check for check in result["checks"] if not check["ok"]]
    if args.json:
        print(json.dumps(result, indent=2))
        return 1 if failed else 0
    out = [f"{result['calculation']}  (fingerprint {result['fingerprint'][:16]})"]
    if result["parts"]:
        rows = [[p["role"], p["part_id"], str(p["revision"]), p["status"]] for p in result["parts"]]
        out += ["parts:", _indent(_table(["ROLE", "PART_ID", "REV", "STATUS"], rows))]
    out += _pairs("inputs (SI)", result["inputs"])
    out += _pairs("results (SI)", result["results"])
    if result["checks"]:
        rows = [
            [
                "OK" if c["ok"] else "FAIL",
                c["name"],
                _cell(c["value"]),
                _cell(c["limit"]),
                "-" if c["margin"] is None else f"{100 * c['margin']:+.1f} %",
            ]
            for c in result["checks"]
        ]
        out += ["checks:", _indent(_table(["", "CHECK", "VALUE", "LIMIT", "MARGIN"], rows))]
        out += [f"  FAIL {c['name']}: {c['detail']}" for c in failed]
    out += ["warnings:", *(f"  - {w}" for w in result["warnings"])] if result["warnings"] else []
    out += ["CAUTIONS:", *(f"  ! {c}" for c in result["cautions"])] if result["cautions"] else []
    print("\n".join(out))
    return 1 if failed else 0


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

    db = commands.add_parser("db", help="database schema and seed parts").add_subparsers(dest="db", required=True)
    db.add_parser("wait", help="wait up to CALCSVC_DB_WAIT_S for the database server").set_defaults(run=_db_wait)
    db.add_parser("upgrade", help="create or upgrade the schema, keeping data").set_defaults(
        run=_on_database(_db_upgrade)
    )
    seed = db.add_parser("seed", help="add the seed parts not yet in the table (never overwrites)")
    seed.add_argument("--if-empty", action="store_true", help="only seed a table that holds no parts")
    seed.set_defaults(run=_on_database(_db_seed))
    check = db.add_parser(
        "check",
        help="find stored part_ids that break the id rule (exit 1 when any)",
        description="Lists each stored part_id that no request can reach (a trailing newline or space, capitals, "
        "other characters) with the valid id it would get. --fix renames them in one transaction.",
    )
    check.add_argument("--fix", action="store_true", help="rename each to the suggested id when that id is free")
    check.set_defaults(run=_on_database(_db_check))

    token = commands.add_parser("token", help="API tokens").add_subparsers(dest="token", required=True)
    create = token.add_parser("create", help="make a token; prints it once")
    create.add_argument("--name", required=True)
    create.add_argument("--role", required=True, choices=("editor", "reviewer"))
    create.set_defaults(run=_on_database(_token_create))
    revoke = token.add_parser("revoke", help="remove a token")
    revoke.add_argument("name")
    revoke.set_defaults(run=_on_database(_token_revoke))

    http = argparse.ArgumentParser(add_help=False)
    http.add_argument("--url", help=f"service URL (default: $CALCSVC_URL, else {DEFAULT_URL})")
    http.add_argument("--token", help="bearer token (default: $CALCSVC_TOKEN); editors write, reviewers approve")

    parts = commands.add_parser("parts", help="the parts table of a running server").add_subparsers(
        dest="parts", required=True
    )
    listing = parts.add_parser("list", parents=[http], help="list parts as a table")
    listing.add_argument("--kind", choices=list(KINDS))
    listing.add_argument("--status", choices=("draft", "approved", "retired"))
    listing.add_argument("--json", action="store_true", help="print the parts as JSON")
    listing.set_defaults(run=_parts_list)
    show = parts.add_parser("show", parents=[http], help="one part: parameters and revision history")
    show.add_argument("part_id")
    show.add_argument("--json", action="store_true", help="print part, ETag and revisions as JSON")
    show.set_defaults(run=_parts_show)
    export = parts.add_parser("export", parents=[http], help="write the parts (not retired) to a .csv or .json file")
    export.add_argument("file", type=Path)
    export.add_argument("--kind", choices=list(KINDS))
    export.set_defaults(run=_parts_export)
    load = parts.add_parser(
        "import",
        parents=[http],
        help="create or revise parts from a .csv or .json file, all or nothing",
        description="Every row is checked first; any bad row is reported (line and field) and nothing is written. "
        "Otherwise new parts are created and changed parts get a new revision; nothing is deleted. "
        "CSV cells may carry units ('2.0 V'). Exit status: 0 imported, 1 file rejected, 2 other error.",
    )
    load.add_argument("file", type=Path)
    load.set_defaults(run=_parts_import)

    calc = commands.add_parser(
        "calc",
        parents=[http],
        allow_abbrev=False,
        usage="calcsvc calc NAME [--json] [--url URL] [--token TOKEN] [--INPUT VALUE ...]",
        help="run one calculation on a server",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        description="Every --INPUT VALUE pair becomes an input: numbers as numbers, other text as strings\n"
        "(units such as '20 mA' are converted by the server), [..] and {..} as JSON.\n"
        "Exit status: 0 all checks pass, 1 a check fails, 2 error.",
        epilog=f"calculations and their inputs:\n{_calculation_options()}\n\n"
        "example:\n  calcsvc calc led-string --supply supply-adapter-12v-2a --led led-red-5mm \\\n"
        '      --leds_in_series 3 --current_a "20 mA"',
    )
    calc.add_argument("name", help="the calculation (listed below)")
    calc.add_argument("--json", action="store_true", help="print the raw response envelope")
    calc.set_defaults(run=_calc, takes_inputs=True)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args, inputs = parser.parse_known_args(argv)
    if inputs and not getattr(args, "takes_inputs", False):
        parser.error(f"unrecognized arguments: {' '.join(inputs)}")
    args.inputs = inputs
    try:
        return int(args.run(args))
    except CalcsvcError as exc:
        print(f"calcsvc: {exc.describe()}", file=sys.stderr)
        return 2
    except (ConfigError, ValueError, OSError) as exc:
        print(f"calcsvc: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())
