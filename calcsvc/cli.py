"""The ``calcsvc`` command: serve, manage the database and tokens (locally, with the server's settings), and
work with the parts table and the calculations of a running server over HTTP."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from calcsvc import cli_designs, cli_local, cli_remote
from calcsvc.client import DEFAULT_URL, CalcsvcError
from calcsvc.config import ConfigError
from calcsvc.data.kinds import KINDS


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="calcsvc", description="calcsvc service and database commands")
    commands = parser.add_subparsers(dest="command", required=True)

    commands.add_parser("serve", help="serve the API with gunicorn (HOST, PORT)").set_defaults(run=cli_local.serve)

    db = commands.add_parser("db", help="database schema and seed parts").add_subparsers(dest="db", required=True)
    db.add_parser("wait", help="wait up to CALCSVC_DB_WAIT_S for the database server").set_defaults(
        run=cli_local.db_wait
    )
    db.add_parser("upgrade", help="create or upgrade the schema, keeping data").set_defaults(
        run=cli_local.on_database(cli_local.db_upgrade)
    )
    seed = db.add_parser("seed", help="add the seed parts not yet in the table (never overwrites)")
    seed.add_argument("--if-empty", action="store_true", help="only seed a table that holds no parts")
    seed.set_defaults(run=cli_local.on_database(cli_local.db_seed))
    check = db.add_parser(
        "check",
        help="find stored part_ids that break the id rule (exit 1 when any)",
        description="Lists each stored part_id that no request can reach (a trailing newline or space, capitals, "
        "other characters) with the valid id it would get. --fix renames them in one transaction.",
    )
    check.add_argument("--fix", action="store_true", help="rename each to the suggested id when that id is free")
    check.set_defaults(run=cli_local.on_database(cli_local.db_check))

    token = commands.add_parser("token", help="API tokens").add_subparsers(dest="token", required=True)
    create = token.add_parser("create", help="make a token; prints it once")
    create.add_argument("--name", required=True)
    create.add_argument("--role", required=True, choices=("editor", "reviewer"))
    create.set_defaults(run=cli_local.on_database(cli_local.token_create))
    listing = token.add_parser("list", help="the tokens' names, roles and creation times (never the tokens)")
    listing.set_defaults(run=cli_local.on_database(cli_local.token_list))
    revoke = token.add_parser("revoke", help="remove a token")
    revoke.add_argument("name")
    revoke.set_defaults(run=cli_local.on_database(cli_local.token_revoke))

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
    listing.set_defaults(run=cli_remote.parts_list)
    show = parts.add_parser("show", parents=[http], help="one part: parameters and revision history")
    show.add_argument("part_id")
    show.add_argument("--json", action="store_true", help="print part, ETag and revisions as JSON")
    show.set_defaults(run=cli_remote.parts_show)
    export = parts.add_parser("export", parents=[http], help="write the parts (not retired) to a .csv or .json file")
    export.add_argument("file", type=Path)
    export.add_argument("--kind", choices=list(KINDS))
    export.set_defaults(run=cli_remote.parts_export)
    load = parts.add_parser(
        "import",
        parents=[http],
        help="create or revise parts from a .csv or .json file, all or nothing",
        description="Every row is checked first; any bad row is reported (line and field) and nothing is written. "
        "Otherwise new parts are created and changed parts get a new revision; nothing is deleted. "
        "CSV cells may carry units ('2.0 V'). Exit status: 0 imported, 1 file rejected, 2 other error.",
    )
    load.add_argument("file", type=Path)
    load.set_defaults(run=cli_remote.parts_import)

    designs = commands.add_parser("designs", help="saved designs of a running server").add_subparsers(
        dest="designs", required=True
    )
    listing = designs.add_parser("list", parents=[http], help="list the active saved designs as a table")
    listing.add_argument("--affected-by-draft", action="store_true", help="only those a pending part draft changes")
    listing.add_argument("--json", action="store_true", help="print the designs as JSON")
    listing.set_defaults(run=cli_designs.designs_list)
    check = designs.add_parser(
        "check",
        parents=[http],
        help="review every saved design at today's approved parts (exit 1 when any fails)",
        description="Exit status: 0 every active saved design passes at the parts' current approved revisions, "
        "1 some design fails or cannot be reviewed (a part retired), 2 error.",
    )
    check.add_argument("--json", action="store_true", help="print the failing designs as JSON")
    check.set_defaults(run=cli_designs.designs_check)
    load = designs.add_parser(
        "import",
        parents=[http],
        help="save request files (or the .json files of a folder) as designs named after the files",
        description="Each file holds one request body; an existing design of the same name gets a new revision. "
        "Exit status: 0 all saved, 1 some file refused, 2 other error.",
    )
    load.add_argument("files", type=Path, nargs="+")
    load.add_argument("--calculation", default="channel", help="channel (default) or a calculation's name")
    load.set_defaults(run=cli_designs.designs_import)

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
        epilog=f"calculations and their inputs:\n{cli_remote.calculation_options()}\n\n"
        "example:\n  calcsvc calc led-string --supply supply-adapter-12v-2a --led led-red-5mm \\\n"
        '      --leds_in_series 3 --current_a "20 mA"',
    )
    calc.add_argument("name", help="the calculation (listed below)")
    calc.add_argument("--json", action="store_true", help="print the raw response envelope")
    calc.set_defaults(run=cli_remote.calc, takes_inputs=True)
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
