"""CSV cells that are safe to open in a spreadsheet.

A spreadsheet runs a cell that starts with ``=``, ``+``, ``-`` or ``@`` as a formula (and a leading tab or
carriage return can hide such a start), so text from users (a part's description, a column name quoted back
in a problem) could fetch URLs or run commands on the reader's machine. Following OWASP's advice on CSV
injection, such text is written with a leading single quote, which spreadsheets show as text. Numbers,
including signed ones such as ``-0.5``, stay numbers. Text that itself starts with quotes before such a lead
gets one more, so :func:`original_cell` gives back exactly what was written.
"""

from __future__ import annotations

import csv
import re
from collections.abc import Iterable
from typing import Any, TextIO

_FORMULA_LEADS = ("=", "+", "-", "@", "\t", "\r")
_NUMBER = re.compile(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")


def _runs_as_formula(text: str) -> bool:
    return text.startswith(_FORMULA_LEADS) and _NUMBER.fullmatch(text) is None


def safe_cell(value: Any) -> Any:
    """``value`` as it may go into a CSV cell: text a spreadsheet would evaluate gets a leading single quote."""
    if isinstance(value, str) and _runs_as_formula(value.lstrip("'")):
        return "'" + value
    return value


def safe_cells(column: list[Any]) -> list[Any]:
    """:func:`safe_cell` over a column, visiting its cells only when some text cell may need it."""
    texts = column if set(map(type, column)) <= {str} else [cell for cell in column if type(cell) is str]
    joined = "\x00" + "\x00".join(texts)
    if any("\x00" + lead in joined for lead in (*_FORMULA_LEADS, "'")):
        return [safe_cell(cell) for cell in column]
    return column


def original_cell(text: str) -> str:
    """The text :func:`safe_cell` was given, from the cell it wrote."""
    if text.startswith("'") and _runs_as_formula(text.lstrip("'")):
        return text[1:]
    return text


class CellWriter:
    """``csv.writer`` that passes every cell through :func:`safe_cell`."""

    def __init__(self, file: TextIO, **format_parameters: Any) -> None:
        self._writer = csv.writer(file, **format_parameters)

    def writerow(self, row: Iterable[Any]) -> None:
        self._writer.writerow([safe_cell(cell) for cell in row])

    def writerows(self, rows: Iterable[Iterable[Any]]) -> None:
        for row in rows:
            self.writerow(row)
