"""Many rows of one calculation: the body read as cells (calcsvc.service.batch_read), the cells as typed
columns, one pass of the core.

A batch is parsed without a per-row schema: each input becomes one numpy column, plain numbers are converted
in bulk, unit strings once per distinct string, and every bad cell becomes an error on its own row, so one
bad row never fails the batch. A row is refused with the same kind of error and the same messages a single
request with its inputs would get.
"""

from __future__ import annotations

import math
import re
from array import array
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from calcsvc.core.outcome import DomainError, Outcome
from calcsvc.core.spec import CalculationSpec, Columns, Input, Role
from calcsvc.data.database import Database
from calcsvc.data.part_ids import is_part_id
from calcsvc.service.batch_read import BATCH_SIZE, Cells, Records, cells_of_rows, read_records
from calcsvc.service.errors import InvalidInput, PhysicallyImpossible, ServiceError, TooLarge
from calcsvc.service.gc_pause import paused_gc
from calcsvc.service.parts import MAX_REVISION
from calcsvc.service.resolve import PartResolver, resolve
from calcsvc.units import MAX_QUANTITY_LENGTH, UnitError, parse_quantity, with_decimal_point

__all__ = ["Batch", "ParsedRows", "Records", "parse_cells", "parse_rows", "read_records", "run_batch"]
_NUMBERS = frozenset((int, float))  # exact types: bool, a subclass of int, is refused on the slow path


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

    def rows_of(self, name: str, n: int) -> np.ndarray:
        """The rows already refused for ``name``."""
        found = np.zeros(n, dtype=bool)
        found[[row for row, errors in self.by_row.items() if name in errors]] = True
        return found

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


def _json_numbers(raw: list[Any]) -> np.ndarray | None:
    """The cells as floats when every one is a JSON number (an int or a float, not a boolean), else None, in one
    C-level pass for the usual column. The cells are as a JSON or CSV parser gives them: ``array("d")`` takes
    exactly ints, floats and booleans of those (null, text, arrays and objects raise; so does an int beyond
    float64, which the slow path names), converting each as ``float()`` does. A boolean becomes 0.0 or 1.0, so
    only a column holding one of those values needs its cells' types read."""
    try:
        column = np.frombuffer(array("d", raw), dtype=np.float64)
    except (TypeError, OverflowError):
        return None
    if ((column == 0.0) | (column == 1.0)).any() and not set(map(type, raw)) <= _NUMBERS:
        return None
    return column


def _number_column(
    spec: Input, raw: list[Any], errors: RowErrors, blank_is_absent: bool, decimal_comma: bool
) -> np.ndarray:
    column = _json_numbers(raw)
    if column is not None:
        # Every cell a JSON number, so a NaN here was written as NaN by the caller, which is an error, not
        # "absent". A list or null cell takes the slow path: numpy would turn [1] into a second axis and null
        # into NaN.
        errors.add_rows(np.isnan(column), spec.name, "must be a finite number")
        return column
    types = set(map(type, raw))  # one C-level pass over the cells
    # With a decimal comma "1.5" must be refused, so numeric strings go to the unit parser.
    if types == {str} and not decimal_comma:
        column = _plain_numbers(raw, blank_is_absent)
        if column is not None:
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


_PLAIN_NUMBER = r" *[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)? *"  # as calcsvc.units.QUANTITY
_PLAIN_NUMBERS = re.compile(rf"(?:{_PLAIN_NUMBER}\n)*+")


def _plain_decimals(text: str) -> bool:
    """Whether every line of ``text`` (each ending in a line feed) is digits with at most one point and at least
    one digit, the common case of ``_PLAIN_NUMBERS``, proved by a few scans of the whole text instead of the
    regular expression's steps per character."""
    if not text.isascii():
        return False
    marks = text.encode().translate(None, b"0123456789")  # what is left of each line: at most "." before "\n"
    return (
        not marks.translate(None, b".\n")
        and b".." not in marks
        and "\n\n" not in f"\n{text}"
        and "\n.\n" not in f"\n{text}"
    )


def _plain_numbers(raw: list[str], blank_is_absent: bool) -> np.ndarray | None:
    """A column of text cells that are all plain decimal numbers (or blank, in CSV: NaN, not given), converted
    in bulk; None when some cell needs the unit parser. One regular-expression pass over the joined cells proves
    each a number the unit parser would read as itself (ASCII digits, no unit), so the values are the ones it
    would give; anything else (units, "nan", "1_0", other scripts' digits) goes to the unit parser, which
    answers it as a single request would."""
    given = list(filter(None, raw)) if blank_is_absent else raw
    text = "\n".join(given) + "\n" if given else ""
    if max(map(len, given), default=0) > MAX_QUANTITY_LENGTH or not (
        _plain_decimals(text) or _PLAIN_NUMBERS.fullmatch(text) is not None
    ):
        return None
    numbers = np.array(given, dtype=np.float64)
    if not np.isfinite(numbers).all():  # beyond float64: the unit parser names the fault
        return None
    if len(given) == len(raw):
        return numbers
    column = np.full(len(raw), math.nan)
    column[np.array([bool(cell) for cell in raw], dtype=bool)] = numbers
    return column


def parse_rows(
    calc: CalculationSpec,
    records: list[dict[str, Any]],
    resolver: PartResolver,
    blank_is_absent: bool = False,
    decimal_comma: bool = False,
) -> ParsedRows:
    """Typed columns of every input of a list of row objects (see ``parse_cells``)."""
    return parse_cells(calc, cells_of_rows(records, calc.accepted()), resolver, blank_is_absent, decimal_comma)


def parse_cells(
    calc: CalculationSpec,
    cells: Cells,
    resolver: PartResolver,
    blank_is_absent: bool = False,
    decimal_comma: bool = False,
) -> ParsedRows:
    """Typed columns of every input, parts resolved once per distinct reference, errors per row."""
    n = cells.n
    errors = RowErrors()
    allowed = set(calc.accepted())
    for row in cells.not_objects:
        errors.add(row, "row", "each row must be an object of input names and values")
    # Inputs no row mentions are filled without visiting the rows; most batches use a few columns.
    seen = set(cells.values)
    for name in cells.values:  # in the order given, so one body always gets one answer (a set's order varies)
        if name not in allowed:
            errors.add_rows(cells.carried_by(name), name, "Unknown field.")

    columns: Columns = {}
    for spec in calc.inputs:
        if spec.name not in seen:
            columns[spec.name] = np.full(n, "", dtype="U1") if spec.choices else np.full(n, math.nan)
            continue
        raw = cells.values[spec.name]
        if spec.choices:
            if set(map(type, raw)) <= {str} and (given := set(raw)) <= {"", *spec.choices}:  # the usual column
                # Straight to the str array the objects would become, as wide as its longest value (about 4 ms
                # less at 100,000 rows than through objects); a default longer than that widens it below.
                values, bad = np.array(raw, dtype=f"U{max([1, *map(len, given)])}"), np.zeros(n, dtype=bool)
            else:
                values = np.array([("" if v is None else str(v)) for v in raw], dtype=object)
                bad = np.array([v not in spec.choices and v not in ("", None) for v in raw], dtype=bool)
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
            _resolve_role(role, cells, columns, parts, (warnings, cautions), errors, resolver, blank_is_absent)

    present = {
        name: (column != "") if column.dtype.kind in "OU" else ~np.isnan(column) for name, column in columns.items()
    }
    for spec in calc.inputs:
        missing = ~present[spec.name]
        if spec.required:
            # A cell refused above is not also missing: a single request stops at its first fault too.
            missing &= ~errors.rows_of(spec.name, n)
            errors.add_rows(missing, spec.name, f"required: give {spec.name} or reference a part that provides it")
        elif spec.default is not None:
            column = columns[spec.name]
            if column.dtype.kind == "U" and missing.any():  # a str array holds texts up to its width
                column = columns[spec.name] = column.astype(np.promote_types(column.dtype, f"U{len(spec.default)}"))
            column[missing] = spec.default
    for spec in calc.inputs:
        if spec.choices:
            columns[spec.name] = columns[spec.name].astype(str)
    return ParsedRows(n, columns, present, parts, warnings, cautions, errors)


def _resolve_role(
    role: Role,
    cells: Cells,
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
    for row, (part_id, revision) in enumerate(
        zip(cells.column(role.name), cells.column(f"{role.name}_revision"), strict=True)
    ):
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
            every = ok_rows.size == n  # then the parsed columns themselves, not a copy of each (the core never writes)
            columns = {name: column if every else column[ok_rows] for name, column in parsed.columns.items()}
            outcome = calc.compute(calc.make_inputs(columns))
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
    # Reading and parsing build an object per cell: the cyclic collector, which would pass over them again and
    # again, waits until the batch is computed (see calcsvc.service.gc_pause).
    with paused_gc():
        records = read_records(calc, body, is_csv, max_rows, labels, decimal)
        if not records.cells.n:
            raise InvalidInput.on("body", "the batch holds no rows")
        with database.transaction() as session:
            resolver = PartResolver(session)
            parsed = parse_cells(calc, records.cells, resolver, records.blank_is_absent, records.decimal_comma)
        records.cells = Cells(parsed.n, {})  # the raw cells are parsed: let them go before computing
        _refuse_large_sweeps(parsed, max_sweep_points)
        return evaluate(calc, parsed, records)
