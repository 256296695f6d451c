"""Parts files: export the parts table to CSV or JSON, and import such a file through the API.

CSV: a header ``part_id,kind,description,<parameter>...`` with one column per parameter name of the kinds in the
file (blank where a parameter does not apply); cells may carry units ("2.0 V", "20 mA"). JSON: the seed file
shape, ``{"parts": [{"part_id", "kind", "description", "parameters": {...}}]}`` (a bare list also reads).
Exports write SI numbers.

An import is checked whole before anything is written: every row is validated as the server would (the create
schema, unit conversion, the kind's rules) and against the stored table (a part never changes kind, a retired
part is not revived by a file). Any bad row rejects the file with a report of every bad row. A sound file
creates new parts and adds a revision (If-Match) to parts whose parameters or description differ; parts absent
from the file are left alone. Writes go over HTTP, so tokens and review rules apply: written parts are drafts.
"""

from __future__ import annotations

import csv
import json
import math
import re
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from calcsvc.client import CalcsvcError, Client, Part
from calcsvc.csv_cells import CellWriter, original_cell
from calcsvc.data.kinds import KINDS, validate_parameters
from calcsvc.service.errors import InvalidInput
from calcsvc.service.parts import PartCreateSchema, convert_parameters

FIXED_COLUMNS = ("part_id", "kind", "description")
ENTRY_KEYS = frozenset({"part_id", "kind", "description", "parameters"})
_SEPARATORS = re.compile(r"[\s,]*")
Progress = Callable[[int, int], None]


@dataclass(frozen=True)
class RowError:
    """One fault of one row; ``where`` is "line N" (or "parts[i]" when a JSON line is unknown)."""

    where: str
    field: str
    message: str

    def __str__(self) -> str:
        return f"{self.where}: {self.field}: {self.message}"


@dataclass(frozen=True)
class PartRow:
    """A validated row: parameters in SI; ``description`` None when the file does not give one."""

    where: str
    part_id: str
    kind: str
    description: str | None
    parameters: dict[str, Any]


@dataclass
class ImportSummary:
    created: list[str] = field(default_factory=list)
    updated: list[str] = field(default_factory=list)
    unchanged: list[str] = field(default_factory=list)


class ImportRejected(ValueError):
    """The file has bad rows; nothing was written."""

    def __init__(self, errors: list[RowError]) -> None:
        super().__init__(f"{len(errors)} error(s); nothing was imported")
        self.errors = errors


class ImportInterrupted(RuntimeError):
    """The server refused a write after validation passed (a concurrent edit, a revoked token...)."""

    def __init__(self, message: str, summary: ImportSummary) -> None:
        super().__init__(message)
        self.summary = summary


def file_format(path: Path) -> str:
    suffix = path.suffix.lower()
    if suffix not in (".csv", ".json"):
        raise ValueError(f"{path}: use a .csv or .json file")
    return suffix[1:]


# --- export ------------------------------------------------------------------------------------------------


def parameter_columns(kinds: Iterable[str]) -> list[str]:
    """Parameter names of ``kinds`` in the kinds' own order, each once."""
    return list(dict.fromkeys(p.name for kind in kinds for p in KINDS[kind]))


def write_parts(path: Path, parts: list[Part], kind: str | None = None) -> None:
    """Write ``parts`` (dicts with part_id, kind, description, parameters) as CSV or JSON, by suffix."""
    entries = [{key: part[key] for key in ("part_id", "kind", "description", "parameters")} for part in parts]
    if file_format(path) == "json":
        path.write_text(json.dumps({"parts": entries}, indent=2, ensure_ascii=False) + "\n", encoding="utf-8")
        return
    columns = parameter_columns([kind] if kind else KINDS)
    with path.open("w", newline="", encoding="utf-8") as file:
        writer = CellWriter(file)
        writer.writerow([*FIXED_COLUMNS, *columns])
        for entry in entries:
            params = entry["parameters"]
            writer.writerow(
                [entry["part_id"], entry["kind"], entry["description"], *(params.get(c, "") for c in columns)]
            )


def export_parts(client: Client, path: Path, kind: str | None = None) -> tuple[int, int]:
    """Write the table's parts (of ``kind``) to ``path``; retired parts are left out, since an import would
    bring them back as drafts. Returns (parts written, retired parts left out)."""
    parts = client.list_parts(kind=kind)
    current = [part for part in parts if part["status"] != "retired"]
    write_parts(path, current, kind)
    return len(current), len(parts) - len(current)


# --- reading and validating ----------------------------------------------------------------------------------


def check_row(
    where: str, part_id: Any, kind: Any, description: Any, parameters: Any
) -> tuple[PartRow | None, list[RowError]]:
    """Validate one row as the server would; parameters come back converted to SI."""
    body: dict[str, Any] = {"part_id": part_id, "kind": kind, "parameters": parameters}
    if description is not None:
        body["description"] = description
    errors = []
    for name, messages in PartCreateSchema().validate(body).items():
        # A parameter's messages come keyed by its name, and are reported under it as the later checks' are.
        by_field = messages if isinstance(messages, dict) else {name: messages}
        errors += [RowError(where, field, " ".join(map(str, texts))) for field, texts in by_field.items()]
    if errors or not isinstance(parameters, dict):
        return None, errors
    try:
        converted = convert_parameters(kind, parameters)
    except InvalidInput as problem:
        return None, [
            RowError(where, name.removeprefix("parameters."), " ".join(messages))
            for name, messages in (problem.errors or {}).items()
        ]
    errors = [RowError(where, name, message) for name, message in validate_parameters(kind, converted).items()]
    if errors:
        return None, errors
    return PartRow(where, part_id, kind, description, converted), []


def _read_csv(path: Path) -> tuple[list[PartRow], list[RowError]]:
    rows: list[PartRow] = []
    errors: list[RowError] = []
    with path.open(newline="", encoding="utf-8-sig") as file:
        reader = csv.reader(file)
        header = [cell.strip() for cell in next(reader, [])]
        known = set(FIXED_COLUMNS) | set(parameter_columns(KINDS))
        for name in ("part_id", "kind"):
            if name not in header:
                errors.append(RowError("line 1", name, "missing column"))
        for index, name in enumerate(header):
            if name not in known:
                errors.append(RowError("line 1", name or f"column {index + 1}", "not a parameter of any kind"))
            elif name in header[:index]:
                errors.append(RowError("line 1", name, "column appears twice"))
        if errors:
            return rows, errors
        previous_line = reader.line_num
        for cells in reader:
            where = f"line {previous_line + 1}"  # where the record starts (quoted cells may span lines)
            previous_line = reader.line_num
            if not any(cell.strip() for cell in cells):
                continue
            if len(cells) > len(header):
                errors.append(RowError(where, "row", f"{len(cells)} cells for {len(header)} columns"))
                continue
            values = {name: original_cell(cell.strip()) for name, cell in zip(header, cells, strict=False)}
            parameters = {k: v for k, v in values.items() if k not in FIXED_COLUMNS and v}
            description = values.get("description") if "description" in header else None
            row, row_errors = check_row(where, values.get("part_id"), values.get("kind"), description, parameters)
            errors += row_errors
            if row:
                rows.append(row)
    return rows, errors


def _json_entry_lines(text: str, entries: list[Any]) -> list[int] | None:
    """The line each entry of the parts array starts on; None when the array cannot be located for sure."""
    bare = text.lstrip().startswith("[")
    found = re.match(r"\s*\[", text) if bare else re.search(r'(?<!\\)"parts"\s*:\s*\[', text)
    if found is None:
        return None
    decoder = json.JSONDecoder()
    position = found.end()
    lines = []
    for entry in entries:
        position = _SEPARATORS.match(text, position).end()  # type: ignore[union-attr]
        try:
            value, end = decoder.raw_decode(text, position)
        except ValueError:
            return None
        if value != entry:
            return None
        lines.append(text.count("\n", 0, position) + 1)
        position = end
    return lines


def _read_json(path: Path) -> tuple[list[PartRow], list[RowError]]:
    text = path.read_text(encoding="utf-8-sig")
    try:
        document = json.loads(text)
    except ValueError as exc:
        raise ValueError(f"{path}: not valid JSON ({exc})") from exc
    entries = document.get("parts") if isinstance(document, dict) else document
    if not isinstance(entries, list):
        raise ValueError(f'{path}: expected {{"parts": [...]}} or a list of parts')
    lines = _json_entry_lines(text, entries)
    rows: list[PartRow] = []
    errors: list[RowError] = []
    for index, entry in enumerate(entries):
        where = f"line {lines[index]}" if lines else f"parts[{index}]"
        if not isinstance(entry, dict):
            errors.append(RowError(where, "part", "must be an object"))
            continue
        errors += [RowError(where, key, "unknown field") for key in sorted(entry.keys() - ENTRY_KEYS)]
        row, row_errors = check_row(
            where, entry.get("part_id"), entry.get("kind"), entry.get("description"), entry.get("parameters")
        )
        errors += row_errors
        if row and not entry.keys() - ENTRY_KEYS:
            rows.append(row)
    return rows, errors


def read_parts(path: Path) -> tuple[list[PartRow], list[RowError]]:
    """The file's sound rows and the faults of the others. ValueError when the file as a whole is unreadable."""
    rows, errors = _read_csv(path) if file_format(path) == "csv" else _read_json(path)
    first: dict[str, str] = {}
    for row in rows:
        if row.part_id in first:
            errors.append(RowError(row.where, "part_id", f"'{row.part_id}' also appears on {first[row.part_id]}"))
        first.setdefault(row.part_id, row.where)
    return rows, errors


# --- importing -----------------------------------------------------------------------------------------------


def _same_value(a: Any, b: Any) -> bool:
    numbers = (int, float)
    if isinstance(a, numbers) and isinstance(b, numbers) and not isinstance(a, bool) and not isinstance(b, bool):
        return math.isclose(a, b, rel_tol=1e-12)  # unit conversion may leave the last digit different
    return a == b


def differs(row: PartRow, stored: Part) -> bool:
    if row.description is not None and row.description != stored["description"]:
        return True
    mine, theirs = row.parameters, stored["parameters"]
    return mine.keys() != theirs.keys() or not all(_same_value(mine[k], theirs[k]) for k in mine)


def plan_import(rows: list[PartRow], stored: dict[str, Part]) -> tuple[list[PartRow], list[RowError]]:
    """The rows that need a write, and the rows the stored table refuses."""
    writes: list[PartRow] = []
    errors: list[RowError] = []
    for row in rows:
        current = stored.get(row.part_id)
        if current is None:
            writes.append(row)
        elif current["kind"] != row.kind:
            message = f"the stored part is a {current['kind']}; a part never changes kind"
            errors.append(RowError(row.where, "kind", message))
        elif differs(row, current):
            if current["status"] == "retired":
                message = "the stored part is retired; an import does not revive it (restore it through the API)"
                errors.append(RowError(row.where, "part_id", message))
            else:
                writes.append(row)
    return writes, errors


def import_parts(client: Client, path: Path, progress: Progress | None = None) -> ImportSummary:
    """Validate the whole file, then create or revise its parts; raises ImportRejected (nothing written) or
    ImportInterrupted (the server refused a write part-way; the summary says what was written)."""
    rows, errors = read_parts(path)
    stored = {part["part_id"]: part for part in client.list_parts()}
    writes, conflicts = plan_import(rows, stored)
    errors += conflicts
    if errors:
        raise ImportRejected(sorted(errors, key=_line_order))
    planned = {row.part_id for row in writes}
    summary = ImportSummary(unchanged=[row.part_id for row in rows if row.part_id not in planned])
    for done, row in enumerate(writes):
        if progress:
            progress(done, len(writes))
        try:
            _write(client, row, stored.get(row.part_id), summary)
        except CalcsvcError as exc:
            raise ImportInterrupted(f"{row.where} ({row.part_id}): {exc.describe()}", summary) from exc
    if progress:
        progress(len(writes), len(writes))
    return summary


def _write(client: Client, row: PartRow, before: Part | None, summary: ImportSummary) -> None:
    if before is None:
        client.create_part(row.part_id, row.kind, row.parameters, row.description or "")
        summary.created.append(row.part_id)
        return
    current, etag = client.get_part(row.part_id)
    if current["revision"] != before["revision"]:
        # Someone edited it after the file was compared with it: their edit must not be overwritten unseen.
        raise CalcsvcError(
            412, "Changed meanwhile", f"now at revision {current['revision']}, compared at {before['revision']}"
        )
    client.update_part(row.part_id, row.parameters, etag, row.description)
    summary.updated.append(row.part_id)


def _line_order(error: RowError) -> tuple[int, str]:
    number = re.search(r"\d+", error.where)
    return (int(number.group()) if number else 0, error.field)
