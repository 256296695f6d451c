"""The commands that talk HTTP to a running server: the parts table and the calculations, printed as tables
for people or as JSON."""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
from collections.abc import Callable
from typing import Any, TextIO

from calcsvc.client import DEFAULT_URL, Client
from calcsvc.data.kinds import KINDS


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


def parts_list(args: argparse.Namespace) -> int:
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
    """Retirements, restores, renames, send-backs and comments of a revision (creation, edits and approval have
    their own columns)."""
    words = {"returned": "sent back", "commented": "comment"}
    return [
        f"{words.get(e['action'], e['action'])} by {e['actor']}" + (f": {e['reason']}" if e["reason"] else "")
        for e in revision["events"]
        if e["action"] not in ("created", "edited", "approved")
    ]


def parts_show(args: argparse.Namespace) -> int:
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
    print(f"\n{part['safety']}")
    return 0


def parts_export(args: argparse.Namespace) -> int:
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


def parts_import(args: argparse.Namespace) -> int:
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


def calculation_options() -> str:
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


def calc(args: argparse.Namespace) -> int:
    name = args.name.replace("_", "-")
    body = calc_body(name, args.inputs)
    with _client(args) as client:
        result = client.calc(name, **body)
    failed = [check for check in result["checks"] if not check["ok"]]
    if args.json:
        print(json.dumps(result, indent=2))
        return 1 if failed else 0
    verdict = "FAILS: " + ", ".join(c["name"] for c in failed) if failed else "passes every check"
    out = [f"{result['calculation']}: {verdict}", f"fingerprint {result['fingerprint']}"]
    # Cautions first, under the verdict, with the standing safety line.
    out += ["CAUTIONS:", *(f"  ! {c}" for c in result["cautions"]), f"  ! {result['safety']}"]
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
                f"{_cell(c['value'])} {c['unit']}".rstrip(),
                f"{_cell(c['limit'])} {c['unit']}".rstrip(),
                "-" if c["margin"] is None else f"{100 * c['margin']:+.1f} %",
            ]
            for c in result["checks"]
        ]
        out += ["checks:", _indent(_table(["", "CHECK", "VALUE", "LIMIT", "MARGIN"], rows))]
        out += [f"  FAIL {c['name']}: {c['detail']}" for c in failed]
    out += ["warnings:", *(f"  - {w}" for w in result["warnings"])] if result["warnings"] else []
    print("\n".join(out))
    return 1 if failed else 0
