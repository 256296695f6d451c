"""A batch body as raw cells, one list per name given: a JSON array of row objects, a JSON object of columns
(one array per name, element i belonging to row i) or a CSV table, all read into the same shape so every
layout is parsed by the same code and gives the same answers.

Column-shaped bodies and CSV tables never become one object per row: a column is the list the JSON parser or
the CSV reader produced, which keeps large batches fast and their memory small. A large array of row objects is
parsed a piece at a time, each piece's rows made columns and let go before the next, so its row objects are
never all alive at once.
"""

from __future__ import annotations

import csv
import io
import re
from collections.abc import Collection
from dataclasses import dataclass, field
from itertools import chain
from operator import methodcaller
from typing import Any

import numpy as np
import orjson

from calcsvc.core.spec import CalculationSpec
from calcsvc.service.errors import InvalidInput, MalformedBody, TooLarge

EXTRA_CELLS = "cells_beyond_the_header"
BATCH_SIZE = "batch-size"  # the kind of TooLarge a batch answers


@dataclass
class Cells:
    """The cells of ``n`` rows by name, as given (None: the row does not give it)."""

    n: int
    values: dict[str, list[Any]]
    keyed: dict[str, np.ndarray] = field(default_factory=dict)  # rows that carry each name (absent: every row)
    not_objects: list[int] = field(default_factory=list)  # rows of a JSON array that are not objects

    def carried_by(self, name: str) -> np.ndarray:
        found = self.keyed.get(name)
        return np.ones(self.n, dtype=bool) if found is None else found

    def column(self, name: str) -> list[Any]:
        return self.values.get(name) or [None] * self.n


def cells_of_rows(records: list[Any], accepted: Collection[str] = ()) -> Cells:
    """The cells of a JSON array of row objects (a row that is not an object gives nothing). Which rows carry a
    name is only needed for names not in ``accepted`` (they refuse the rows that carry them)."""
    not_objects = [row for row, record in enumerate(records) if not isinstance(record, dict)]
    if not_objects:
        records = [r if isinstance(r, dict) else {} for r in records]
    names = dict.fromkeys(chain.from_iterable(records))  # in the order given: one body, one answer
    values = {name: list(map(methodcaller("get", name), records)) for name in names}
    keyed = {
        name: np.array(list(map(methodcaller("__contains__", name), records)), dtype=bool)
        for name in names
        if name not in accepted
    }
    return Cells(len(records), values, keyed, not_objects)


def _joined(pieces: list[Cells]) -> Cells:
    """The cells of consecutive pieces of one body as one: a name a piece does not give is None on its rows,
    which do not carry it."""
    names = list(dict.fromkeys(name for piece in pieces for name in piece.values))
    values = {name: [cell for piece in pieces for cell in piece.column(name)] for name in names}
    keyed = {
        name: np.concatenate([piece.keyed.get(name, np.zeros(piece.n, dtype=bool)) for piece in pieces])
        for name in dict.fromkeys(name for piece in pieces for name in piece.keyed)
    }
    starts = np.cumsum([0, *(piece.n for piece in pieces)]).tolist()
    not_objects = [start + row for piece, start in zip(pieces, starts, strict=False) for row in piece.not_objects]
    return Cells(starts[-1], values, keyed, not_objects)


PIECE_BYTES = 1 << 20  # of a large array of row objects, parsed at a time
_BETWEEN_ROWS = re.compile(rb"\}[ \t\n\r]*(,)[ \t\n\r]*\{")  # the comma between two objects


def _array_pieces(body: bytes) -> list[tuple[int, int]] | None:
    """Where a large JSON array's text is cut, at commas between objects, into pieces of about ``PIECE_BYTES``
    (each piece's elements run from its start to its end); None for a body too small to cut or not an array.
    A cut may land inside a string: then a piece does not parse and the body is parsed whole, which answers any
    fault as before. Pieces that each parse to a non-empty array are, joined by commas, the whole array, so
    their rows are its rows."""
    first, last = len(body) - len(body.lstrip(b" \t\n\r")), len(body.rstrip(b" \t\n\r")) - 1
    if last - first < 2 * PIECE_BYTES or body[first : first + 1] != b"[" or body[last : last + 1] != b"]":
        return None
    pieces, start = [], first + 1
    while (found := _BETWEEN_ROWS.search(body, start + PIECE_BYTES, last)) is not None:
        pieces.append((start, found.start(1)))
        start = found.end(1)
    pieces.append((start, last))
    return pieces if len(pieces) > 1 else None


def _rows_by_piece(
    body: bytes, pieces: list[tuple[int, int]], accepted: Collection[str], labels: tuple[str, ...]
) -> tuple[Cells, dict[str, list[Any]]] | None:
    """The cells and label columns of an array of rows read a piece at a time (``_array_pieces``); None when a
    piece is not a non-empty JSON array."""
    cells: list[Cells] = []
    label_columns: dict[str, list[Any]] = {name: [] for name in dict.fromkeys(labels)}
    for start, end in pieces:
        try:
            rows = orjson.loads(b"[" + body[start:end] + b"]")
        except orjson.JSONDecodeError:
            return None
        if not isinstance(rows, list) or not rows:
            return None
        for name, column in label_columns.items():
            column += [row.pop(name, "") if isinstance(row, dict) else "" for row in rows]
        cells.append(cells_of_rows(rows, accepted))
    return _joined(cells), label_columns


@dataclass
class Records:
    """The rows of a batch body as read, before any input is parsed."""

    cells: Cells
    blank_is_absent: bool  # CSV: a blank cell means "not given"
    separator: str  # between CSV cells, in and out: ";" where the comma is the decimal mark
    decimal_comma: bool
    lines: list[int]  # each row's number as a spreadsheet shows it: the header is row 1, so the first row is 2
    labels: dict[str, list[Any]]  # the caller's label columns, passed through to the answer


def _refuse_more_than_rows_hold(calc: CalculationSpec, body: bytes | str, limit: int, separator: str = ",") -> None:
    """Refused before parsing when the body has more separators than ``limit`` rows of named inputs could: each
    row holds at most one value per input name, so millions of tiny rows or one huge array inside a cell
    are refused before Python builds an object for each element."""
    names = len(calc.inputs) + 2 * len(calc.roles)
    if body.count(separator if isinstance(body, str) else separator.encode()) >= (limit + 1) * names:
        message = f"the body holds more values than {limit:,} rows of at most {names} inputs each"
        raise TooLarge.on("body", message, BATCH_SIZE)


def too_many_rows(count: int | str, limit: int) -> TooLarge:
    return TooLarge(f"{count} rows is more than this server takes in one batch ({limit})", slug=BATCH_SIZE)


def _detect_separator(text: str) -> str:
    """A sheet saved where the comma is the decimal mark separates cells by ';': the header (input names,
    which hold neither) says which."""
    header = text.partition("\n")[0]
    return ";" if header.count(";") > header.count(",") else ","


_OTHER_WHITESPACE = "\t\n\x0b\x0c\r\x1c\x1d\x1e\x1f"  # the ASCII characters str.strip removes besides space


def _stripped(column: list[str]) -> list[str]:
    """The column with whitespace stripped from each cell (as ``str.strip``), visiting the cells only when one
    may need it: one starts or ends with a space, or holds other whitespace or non-ASCII text."""
    joined = "\x00" + "\x00".join(column) + "\x00"
    if (
        " \x00" in joined
        or "\x00 " in joined
        or not joined.isascii()
        or any(char in joined for char in _OTHER_WHITESPACE)
    ):
        return [cell.strip() for cell in column]
    return column


def _plain_table(text: str, separator: str, limit: int) -> tuple[list[str], list[list[str]], list[int]] | None:
    """The header, columns and line numbers of a table the CSV reader would read as plain ``split`` does (no
    quote, carriage return alone or NUL; every row as wide as the header; no cell past the reader's size limit),
    read a column at a time from one flat list of cells, with no list per row; None for any other table."""
    if text.count("\n") > limit + 2:  # more lines than the limit's rows: the reader stops one row past it
        return None
    if "\r" in text:
        text = text.replace("\r\n", "\n")
    if any(char in text for char in ('"', "\r", "\x00")):
        return None
    lines = text.split("\n")
    if lines and not lines[-1]:
        lines.pop()  # the last line's end
    numbers = [k for k, line in enumerate(lines, start=1) if line]
    if not numbers or numbers[0] != 1:
        return None
    width = lines[0].count(separator) + 1
    if len(numbers) > limit + 1 or any(line.count(separator) != width - 1 for line in lines if line):
        return None
    cells = separator.join(filter(None, lines)).split(separator)
    if max(map(len, cells)) > csv.field_size_limit():
        return None
    return cells[:width], [cells[width + k :: width] for k in range(width)], numbers[1:]


def _csv_cells(text: str, separator: str, limit: int) -> tuple[Cells, list[int]]:
    """The cells of a CSV table by column, and each row's line number. A short row's missing cells are blank
    (not given); cells beyond the header become an unknown field of their row, which refuses that row instead
    of dropping data that was likely shifted. Blank lines are skipped (they still count in the line numbers)."""
    plain = _plain_table(text, separator, limit)
    if plain is not None:
        header, by_column, lines = plain
        values = {name.strip(): _stripped(column) for name, column in zip(header, by_column, strict=True)}
        return Cells(len(lines), values), lines
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=separator, skipinitialspace=True)
    rows: list[list[str]] = []
    lines: list[int] = []
    try:
        header = next(reader, [])
        for row in reader:
            if row:
                rows.append(row)
                lines.append(reader.line_num)
                if len(rows) > limit:  # reading stops one row past the limit
                    raise too_many_rows(f"more than {limit}", limit)
    except csv.Error as exc:
        raise MalformedBody(f"the request body is not a valid CSV table: {exc}") from exc
    width, n = len(header), len(rows)
    keyed: dict[str, np.ndarray] = {}
    extra: list[Any] = [None] * n
    if any(len(row) != width for row in rows):
        has_extra = np.zeros(n, dtype=bool)
        for k, row in enumerate(rows):
            if len(row) > width:
                extra[k], rows[k], has_extra[k] = row[width:], row[:width], True
            elif len(row) < width:
                rows[k] = row + [""] * (width - len(row))
        if has_extra.any():
            keyed[EXTRA_CELLS] = has_extra
    columns = list(zip(*rows, strict=True)) if rows else [() for _ in header]
    values: dict[str, list[Any]] = {}
    for name, column in zip(header, columns, strict=True):
        values[name.strip()] = _stripped(list(column))  # a repeated name: the later column wins, as in a dict
    if EXTRA_CELLS in keyed:
        values[EXTRA_CELLS] = extra
    return Cells(n, values, keyed), lines


def _json_columns(data: dict[str, Any], limit: int, accepted: Collection[str]) -> Cells:
    """The cells of a column-shaped body: every value an array, all of one length. Which rows carry a name is
    only needed for names not in ``accepted`` (they refuse the rows that carry them)."""
    lengths = set()
    for name, column in data.items():
        if not isinstance(column, list):
            message = f"a column-shaped body holds one array per name; {name[:80]!r} is not an array"
            raise InvalidInput.on("body", message)
        lengths.add(len(column))
    if len(lengths) > 1:
        raise InvalidInput.on("body", "the arrays of a column-shaped body must all have one length")
    n = lengths.pop() if lengths else 0
    if n > limit:
        raise too_many_rows(n, limit)
    # A null cell does not give the name on its row, as a row object without the key does not.
    keyed = {
        name: np.array([cell is not None for cell in column], dtype=bool)
        for name, column in data.items()
        if name not in accepted
    }
    return Cells(n, data, keyed)


def read_records(
    calc: CalculationSpec,
    body: bytes,
    is_csv: bool,
    limit: int,
    labels: tuple[str, ...] = (),
    decimal: str | None = None,
) -> Records:
    """The rows of a JSON array, a JSON object of columns or a CSV table (its separator detected, a byte-order
    mark ignored), with the ``labels`` columns set aside; ``decimal`` ("point" or "comma") defaults to what the
    separator implies."""
    if is_csv:
        text = body.decode("utf-8-sig", "replace")  # "CSV UTF-8" as spreadsheets save it starts with a BOM
        separator = _detect_separator(text)
        _refuse_more_than_rows_hold(calc, text, limit, separator)
        cells, lines = _csv_cells(text, separator, limit)
        label_columns = {name: cells.values.pop(name, None) or [""] * cells.n for name in dict.fromkeys(labels)}
    else:
        separator = ","
        _refuse_more_than_rows_hold(calc, body, limit)
        pieces = _array_pieces(body)
        by_piece = None if pieces is None else _rows_by_piece(body, pieces, calc.accepted(), labels)
        try:
            data = None if by_piece is not None else orjson.loads(body)
        except orjson.JSONDecodeError as exc:
            raise MalformedBody(f"the request body is not valid JSON: {exc}") from exc
        if by_piece is not None:
            cells, label_columns = by_piece
            if cells.n > limit:
                raise too_many_rows(cells.n, limit)
        elif isinstance(data, dict):
            cells = _json_columns(data, limit, calc.accepted())
            label_columns = {}
            for name in dict.fromkeys(labels):
                column = cells.values.pop(name, None)
                cells.keyed.pop(name, None)
                label_columns[name] = [""] * cells.n if column is None else ["" if v is None else v for v in column]
        elif isinstance(data, list):
            if len(data) > limit:
                raise too_many_rows(len(data), limit)
            label_columns = {
                name: [row.pop(name, "") if isinstance(row, dict) else "" for row in data]
                for name in dict.fromkeys(labels)
            }
            cells = cells_of_rows(data, calc.accepted())
        else:
            raise InvalidInput.on(
                "body",
                "the body must be a JSON array of input objects, a JSON object of input arrays (or a CSV table "
                "with Content-Type: text/csv)",
            )
        lines = list(range(2, cells.n + 2))
    comma = decimal == "comma" or (decimal is None and separator == ";")
    return Records(cells, is_csv, separator, comma, lines, label_columns)
