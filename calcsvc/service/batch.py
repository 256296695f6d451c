"""Many rows of one calculation: the body read as rows, the rows as typed columns, one pass of the core.

A batch is parsed without a per-row schema: each input becomes one numpy column, unit strings are
converted once per distinct string, and every bad cell becomes an error on its own row, so one bad row
never fails the batch. A row is refused with the same kind of error and the same messages a single request
with its inputs would get.
"""

from __future__ import annotations

import csv
import io
import itertools
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import orjson

from calcsvc.core.outcome import DomainError, Outcome
from calcsvc.core.spec import CalculationSpec, Columns, Input, Role
from calcsvc.data.database import Database
from calcsvc.data.part_ids import is_part_id
from calcsvc.service.errors import (
    InvalidInput,
    MalformedBody,
    PhysicallyImpossible,
    ServiceError,
    TooLarge,
)
from calcsvc.service.parts import MAX_REVISION
from calcsvc.service.resolve import PartResolver, resolve
from calcsvc.units import UnitError, parse_quantity, with_decimal_point

EXTRA_CELLS = "cells_beyond_the_header"
BATCH_SIZE = "batch-size"  # the kind of TooLarge a batch answers
_SCALARS = frozenset((int, float, str))  # exact types: bool, a subclass of int, is refused on the slow path


@dataclass
class RowErrors:
    """Field errors per row number; a row with any error is not computed. A row's refusal is of the kind of its
    first error, the stage a single request with its inputs would have stopped at."""

    by_row: dict[int, dict[str, list[str]]] = field(default_factory=dict)
    kinds: dict[int, type[ServiceError]] = field(default_factory=dict)

    def add(self, row: int, name: str, message: str, kind: type[ServiceError] = InvalidInput) -> None:
        self.by_row.setdefault(row, {}).setdefault(name, []).append(message)
        self.kinds.setdefault(row, kind)

    def add_rows(self, rows: np.ndarray, name: str, message: str, kind: type[ServiceError] = InvalidInput) -> None:
        for row in np.flatnonzero(rows):
            self.add(int(row), name, message, kind)

    def refusal(self, row: int) -> ServiceError:
        errors = self.by_row[row]
        detail = "; ".join(f"{name}: {' '.join(messages)}" for name, messages in errors.items())
        return self.kinds[row](detail, errors)

    def mask(self, n: int) -> np.ndarray:
        bad = np.zeros(n, dtype=bool)
        bad[list(self.by_row)] = True
        return bad


@dataclass
class ParsedRows:
    n: int
    columns: Columns
    present: dict[str, np.ndarray]  # which rows gave each input (explicitly or through a part)
    parts: dict[int, list[dict[str, Any]]]  # only rows that name parts
    warnings: dict[int, list[str]]
    cautions: dict[int, list[str]]  # the standing cautions of the parts a row names (a supply's kind)
    errors: RowErrors


def _number_column(
    spec: Input, raw: list[Any], errors: RowErrors, blank_is_absent: bool, decimal_comma: bool
) -> np.ndarray:
    # With a decimal comma "1.5" must be refused, so numeric strings cannot take numpy's fast path.
    if set(map(type, raw)) <= (_SCALARS - {str} if decimal_comma else _SCALARS):  # one C-level pass over the cells
        try:
            # Fast path: every cell a number or a bare numeric string ("" never converts), so a NaN here was
            # written as NaN by the caller, which is an error, not "absent". A list or null cell takes the slow
            # path: numpy would turn [1] into a second axis and null into NaN.
            column = np.array(raw, dtype=np.float64)
        except (TypeError, ValueError, OverflowError):
            pass
        else:
            errors.add_rows(np.isnan(column), spec.name, "must be a finite number")
            return column
    cache: dict[str, float | str] = {}
    column = np.full(len(raw), math.nan)
    for row, value in enumerate(raw):
        if value is None or (blank_is_absent and value == ""):
            continue
        if isinstance(value, bool):
            errors.add(row, spec.name, "must be a number, not a boolean")
        elif isinstance(value, int | float):
            try:
                column[row] = float(value)
            except OverflowError:
                errors.add(row, spec.name, "number is too large")
            if math.isnan(column[row]):
                errors.add(row, spec.name, "must be a finite number")
        elif isinstance(value, str):
            if value not in cache:
                try:
                    text = with_decimal_point(value) if decimal_comma else value
                    cache[value] = parse_quantity(text, spec.unit if not spec.integer else "dimensionless")
                except UnitError as exc:
                    cache[value] = str(exc)
            parsed = cache[value]
            if isinstance(parsed, str):
                errors.add(row, spec.name, parsed)
            else:
                column[row] = parsed
        else:
            errors.add(row, spec.name, "must be a number or a string with a unit")
    return column


def parse_rows(
    calc: CalculationSpec,
    records: list[dict[str, Any]],
    resolver: PartResolver,
    blank_is_absent: bool = False,
    decimal_comma: bool = False,
) -> ParsedRows:
    """Typed columns of every input, parts resolved once per distinct reference, errors per row."""
    n = len(records)
    errors = RowErrors()
    allowed = set(calc.accepted())
    if set(map(type, records)) != {dict}:
        for row, record in enumerate(records):
            if not isinstance(record, dict):
                errors.add(row, "row", "each row must be an object of input names and values")
        records = [r if isinstance(r, dict) else {} for r in records]
    # Inputs no row mentions are filled without visiting the rows; most batches use a few columns.
    seen: set[str] = set().union(*records)
    if not seen <= allowed:
        for row, record in enumerate(records):
            for name in record.keys() - allowed:
                errors.add(row, name, "Unknown field.")

    columns: Columns = {}
    for spec in calc.inputs:
        if spec.name not in seen:
            columns[spec.name] = np.full(n, "", dtype=object) if spec.choices else np.full(n, math.nan)
            continue
        raw = [record.get(spec.name) for record in records]
        if spec.choices:
            values = np.array([("" if v is None else str(v)) for v in raw], dtype=object)
            bad = np.array([v not in spec.choices and v not in ("", None) for v in raw])
            errors.add_rows(bad, spec.name, f"Must be one of: {', '.join(spec.choices)}.")
            columns[spec.name] = values
        else:
            column = _number_column(spec, raw, errors, blank_is_absent, decimal_comma)
            for rows, message in spec.refusals(column):
                errors.add_rows(rows, spec.name, message)
            columns[spec.name] = column

    parts: dict[int, list[dict[str, Any]]] = {}
    warnings: dict[int, list[str]] = {}
    cautions: dict[int, list[str]] = {}
    for role in calc.roles:
        if role.name in seen or f"{role.name}_revision" in seen:
            _resolve_role(role, records, columns, parts, (warnings, cautions), errors, resolver, blank_is_absent)

    present = {
        name: (column != "") if column.dtype == object else ~np.isnan(column) for name, column in columns.items()
    }
    for spec in calc.inputs:
        missing = ~present[spec.name]
        if spec.required:
            errors.add_rows(missing, spec.name, f"required: give {spec.name} or reference a part that provides it")
        elif spec.default is not None:
            columns[spec.name][missing] = spec.default
    for spec in calc.inputs:
        if spec.choices:
            columns[spec.name] = columns[spec.name].astype(str)
    return ParsedRows(n, columns, present, parts, warnings, cautions, errors)


def _resolve_role(
    role: Role,
    records: list[dict[str, Any]],
    columns: Columns,
    parts: dict[int, list[dict[str, Any]]],
    notes: tuple[dict[int, list[str]], dict[int, list[str]]],
    errors: RowErrors,
    resolver: PartResolver,
    blank_is_absent: bool,
) -> None:
    """Fill the inputs a part provides on the rows that name it, looking each distinct part up once; ``notes``
    collects each row's warnings and cautions about the parts it names."""
    warnings, cautions = notes
    groups: dict[tuple[str, int | None], list[int]] = {}
    for row, record in enumerate(records):
        part_id = record.get(role.name)
        revision = record.get(f"{role.name}_revision")
        if blank_is_absent:
            part_id = part_id or None
            revision = revision or None
        if part_id is None:
            if revision is not None:
                errors.add(row, f"{role.name}_revision", f"{role.name}_revision needs {role.name} (the part_id)")
            continue
        if not is_part_id(part_id):
            errors.add(row, role.name, "must be a part_id")
            continue
        try:
            if isinstance(revision, bool) or (isinstance(revision, float) and not revision.is_integer()):
                raise ValueError  # int() would take True as 1 and cut 1.5 to 1
            revision = None if revision is None else int(revision)
            if revision is not None and not 1 <= revision <= MAX_REVISION:
                raise ValueError
        except (TypeError, ValueError):
            errors.add(row, f"{role.name}_revision", f"must be a whole number from 1 to {MAX_REVISION}")
            continue
        groups.setdefault((part_id, revision), []).append(row)
    for (part_id, revision), rows in groups.items():
        body: dict[str, Any] = {role.name: part_id, f"{role.name}_revision": revision}
        try:
            resolved = resolve((role,), body, resolver)
        except ServiceError as problem:
            for row in rows:
                for name, messages in (problem.errors or {role.name: [problem.detail]}).items():
                    for message in messages:
                        errors.add(row, name, message, type(problem))
            continue
        index = np.array(rows)
        for _parameter, input_name in role.provides:
            if input_name in resolved.values:
                column = columns[input_name]
                take = index[np.isnan(column[index])]
                column[take] = float(resolved.values[input_name])
        for row in rows:
            parts.setdefault(row, []).extend(resolved.parts)
            if resolved.warnings:
                warnings.setdefault(row, []).extend(resolved.warnings)
            if resolved.cautions:
                cautions.setdefault(row, []).extend(resolved.cautions)


# ---- a whole batch ------------------------------------------------------------------------------------------


def _refuse_more_than_rows_hold(calc: CalculationSpec, body: bytes | str, limit: int, separator: str = ",") -> None:
    """Refused before parsing when the body has more separators than ``limit`` rows of named inputs could: each
    row holds at most one value per input name, so millions of tiny rows or one huge array inside a cell
    are refused before Python builds an object for each element."""
    names = len(calc.inputs) + 2 * len(calc.roles)
    if body.count(separator if isinstance(body, str) else separator.encode()) >= (limit + 1) * names:
        message = f"the body holds more values than {limit:,} rows of at most {names} inputs each"
        raise TooLarge.on("body", message, BATCH_SIZE)


def _too_many_rows(count: int | str, limit: int) -> TooLarge:
    return TooLarge(f"{count} rows is more than this server takes in one batch ({limit})", slug=BATCH_SIZE)


@dataclass
class Records:
    """The rows of a batch body as read, before any input is parsed."""

    rows: list[Any]
    blank_is_absent: bool  # CSV: a blank cell means "not given"
    separator: str  # between CSV cells, in and out: ";" where the comma is the decimal mark
    decimal_comma: bool
    lines: list[int]  # each row's number as a spreadsheet shows it: the header is row 1, so the first row is 2
    labels: dict[str, list[Any]]  # the caller's label columns, passed through to the answer


def _detect_separator(text: str) -> str:
    """A sheet saved where the comma is the decimal mark separates cells by ';': the header (input names,
    which hold neither) says which."""
    header = text.partition("\n")[0]
    return ";" if header.count(";") > header.count(",") else ","


def read_records(
    calc: CalculationSpec,
    body: bytes,
    is_csv: bool,
    limit: int,
    labels: tuple[str, ...] = (),
    decimal: str | None = None,
) -> Records:
    """The rows of a JSON array or a CSV table (its separator detected, a byte-order mark ignored), with the
    ``labels`` columns set aside; ``decimal`` ("point" or "comma") defaults to what the separator implies."""
    if is_csv:
        text = body.decode("utf-8-sig", "replace")  # "CSV UTF-8" as spreadsheets save it starts with a BOM
        separator = _detect_separator(text)
        _refuse_more_than_rows_hold(calc, text, limit, separator)
        # A short row's missing cells are blank (not given); cells beyond the header become an unknown field of
        # their row, which refuses that row instead of dropping data that was likely shifted.
        reader = csv.DictReader(
            io.StringIO(text, newline=""), delimiter=separator, skipinitialspace=True, restkey=EXTRA_CELLS, restval=""
        )
        records, lines = [], []
        try:
            # Reading stops one row past the limit: a body of millions of short lines is never built.
            for row in itertools.islice(reader, limit + 1):
                records.append({k.strip(): v.strip() if isinstance(v, str) else v for k, v in row.items()})
                lines.append(reader.line_num)  # blank lines skipped still count, as in the sheet
        except csv.Error as exc:
            raise MalformedBody(f"the request body is not a valid CSV table: {exc}") from exc
        if len(records) > limit:
            raise _too_many_rows(f"more than {limit}", limit)
        data: list[Any] = records
    else:
        separator = ","
        _refuse_more_than_rows_hold(calc, body, limit)
        try:
            data = orjson.loads(body)
        except orjson.JSONDecodeError as exc:
            raise MalformedBody(f"the request body is not valid JSON: {exc}") from exc
        if not isinstance(data, list):
            raise InvalidInput.on(
                "body", "the body must be a JSON array of input objects (or a CSV table with Content-Type: text/csv)"
            )
        if len(data) > limit:
            raise _too_many_rows(len(data), limit)
        lines = list(range(2, len(data) + 2))
    columns = {
        name: [row.pop(name, "") if isinstance(row, dict) else "" for row in data] for name in dict.fromkeys(labels)
    }
    comma = decimal == "comma" or (decimal is None and separator == ";")
    return Records(data, is_csv, separator, comma, lines, columns)


def _refuse_large_sweeps(parsed: ParsedRows, limit: int) -> None:
    """Refused before computing when the rows that parsed ask for more sweep points in all than ``limit``."""
    points = parsed.columns.get("sweep_points")
    if points is None:
        return
    asked = int(np.nansum(points[~parsed.errors.mask(parsed.n)]))
    if asked > limit:
        message = f"the rows ask for {asked:,} sweep points in all; this server answers at most {limit:,} per batch"
        raise TooLarge.on("sweep_points", message, BATCH_SIZE)


@dataclass
class Batch:
    parsed: ParsedRows
    ok_rows: np.ndarray  # the rows computed, in order
    outcome: Outcome  # over ok_rows only
    records: Records  # as read from the body


def evaluate(calc: CalculationSpec, parsed: ParsedRows, records: Records) -> Batch:
    """Run the core once over every row that parsed; physical violations become errors on their rows."""
    n = parsed.n
    ok_rows = np.flatnonzero(~parsed.errors.mask(n))
    # Some rules run only once a row's other inputs hold (its resistor in range, say): so the rows left are
    # computed again until none is refused.
    while True:
        try:
            outcome = calc.compute(calc.make_inputs({name: column[ok_rows] for name, column in parsed.columns.items()}))
        except DomainError as exc:
            for violation in exc.violations:
                rows = np.isin(np.arange(n), ok_rows[violation.rows])
                parsed.errors.add_rows(rows, violation.field, violation.message, PhysicallyImpossible)
            ok_rows = np.flatnonzero(~parsed.errors.mask(n))
            continue
        return Batch(parsed, ok_rows, outcome, records)


def run_batch(
    database: Database,
    calc: CalculationSpec,
    body: bytes,
    is_csv: bool,
    max_rows: int,
    max_sweep_points: int,
    labels: tuple[str, ...] = (),
    decimal: str | None = None,
) -> Batch:
    """Every row of ``body`` (a JSON array or a CSV table) through ``calc``; a bad row carries its refusal."""
    records = read_records(calc, body, is_csv, max_rows, labels, decimal)
    if not records.rows:
        raise InvalidInput.on("body", "the batch holds no rows")
    with database.transaction() as session:
        parsed = parse_rows(calc, records.rows, PartResolver(session), records.blank_is_absent, records.decimal_comma)
    _refuse_large_sweeps(parsed, max_sweep_points)
    return evaluate(calc, parsed, records)
