"""``calcsvc designs``: the saved designs of a running server over HTTP: list them, load request files as
designs, and check them at today's approved parts (exit status 1 when any fails, for a lab's own CI)."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any

from calcsvc.cli_remote import _client, _table
from calcsvc.client import CalcsvcError
from calcsvc.data.part_ids import suggest


def _margin(summary: dict[str, Any]) -> str:
    margin = summary.get("tightest_margin")
    return "-" if margin is None else f"{summary['tightest_check']} {margin:+.3g}"


def designs_list(args: argparse.Namespace) -> int:
    with _client(args) as client:
        designs = client.list_designs(affected_by_draft=args.affected_by_draft)
    if args.json:
        print(json.dumps(designs, indent=2))
        return 0
    rows = [
        [d["design_id"], d["calculation"], d["owner"], d["review"]["verdict"], _margin(d["review"]),
         ", ".join(f"{p['part_id']} r{p['revision']}" for p in d["parts"])]
        for d in designs
    ]  # fmt: skip
    print(_table(["DESIGN", "CALCULATION", "OWNER", "SAVED", "TIGHTEST MARGIN", "PARTS"], rows))
    return 0


def designs_check(args: argparse.Namespace) -> int:
    """Exit status 1 when any active saved design fails (or cannot be reviewed) at today's approved parts."""
    with _client(args) as client:
        failing = client.list_designs(fails_at_current=True)
        total = len(client.list_designs())
    if args.json:
        print(json.dumps(failing, indent=2))
        return 1 if failing else 0
    if not failing:
        print(f"every saved design passes at today's approved parts ({total} checked)")
        return 0
    rows = []
    for design in failing:
        current = design["current"]
        why = ", ".join(current["failing"]) or (current.get("problem") or {}).get("detail", "")
        rows.append([design["design_id"], design["owner"], current["verdict"], why, _margin(current)])
    print(_table(["DESIGN", "OWNER", "TODAY", "FAILING", "TIGHTEST MARGIN"], rows))
    print(f"{len(failing)} of {total} saved designs fail at today's approved parts")
    return 1


def _request_files(paths: list[Path]) -> list[Path]:
    found: list[Path] = []
    for path in paths:
        found += sorted(path.glob("*.json")) if path.is_dir() else [path]
    return found


def designs_import(args: argparse.Namespace) -> int:
    """Each JSON request file becomes a design named after the file (a new revision when it exists)."""
    files = _request_files(args.files)
    status = 0
    with _client(args) as client:
        for path in files:
            design_id = suggest(path.stem)
            if design_id is None:
                print(f"{path}: no valid design_id can be made from the file name", file=sys.stderr)
                status = 1
                continue
            try:
                request = json.loads(path.read_text())
                design, _ = client.save_design(design_id, request, args.calculation, f"imported from {path.name}")
            except (CalcsvcError, ValueError) as exc:
                detail = exc.describe() if isinstance(exc, CalcsvcError) else str(exc)
                print(f"{path}: {detail}", file=sys.stderr)
                status = 1
                continue
            print(f"{path}: saved as {design_id} revision {design['revision']} ({design['review']['verdict']})")
    return status
