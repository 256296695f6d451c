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
_LEADS_OR_QUOTE = (*_FORMULA_LEADS, "'")
_MAY_NEED = re.compile("\x00[" + re.escape("".join(_LEADS_OR_QUOTE)) + "]")  # a cell starting with one of them
_NUMBER = re.compile(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")


def _runs_as_formula(text: str) -> bool:
    return text.startswith(_FORMULA_LEADS) and _NUMBER.fullmatch(text) is None


def safe_cell(value: Any) -> Any:
    """``value`` as it may go into a CSV cell: text a spreadsheet would evaluate gets a leading single quote."""
    if isinstance(value, str) and _runs_as_formula(value.lstrip("'")):
        return "'" + value
    return value


def safe_cells(column: list[Any]) -> list[Any]:
    """:func:`safe_cell` over a column, visiting its cells only when some text cell may need it, and then only
    the cells that start as a formula or with a quote."""
    texts = column if set(map(type, column)) <= {str} else [cell for cell in column if type(cell) is str]
    if _MAY_NEED.search("\x00" + "\x00".join(texts)) is None:
        return column
    return [safe_cell(cell) if type(cell) is str and cell.startswith(_LEADS_OR_QUOTE) else cell for cell in column]


_QUOTED_WHEN = ('"', "\n")  # with the separator, what makes csv.writer quote a cell (line terminator "\n")


def _written(value: Any) -> str:
    """A cell's text as ``csv.writer`` writes it: None blank, a float by repr, anything else by str."""
    if value is None:
        return ""
    return repr(value) if type(value) is float else str(value)


def _written_column(column: list[Any], separator: str) -> list[str]:
    """Each cell of ``column`` as ``csv.writer`` writes it, quoted where it holds the separator, a quote or a line
    feed; the cells are visited one by one only when one may need it (or is not text)."""
    types = set(map(type, column))
    if types <= {str}:
        texts = column
    else:
        texts = list(map(str, column)) if types <= {int} else [_written(cell) for cell in column]
    joined = "\x00".join(texts)
    if not any(char in joined for char in (separator, *_QUOTED_WHEN)):  # one fast scan per character
        return texts
    special = re.compile("[" + re.escape(separator + "".join(_QUOTED_WHEN)) + "]")
    written = {t: '"' + t.replace('"', '""') + '"' if special.search(t) else t for t in set(texts)}  # texts repeat
    return list(map(written.__getitem__, texts))


def csv_text(columns: list[list[Any]], separator: str) -> str:
    """The rows whose cells ``columns`` holds (two or more columns, one length), as ``csv.writer`` with
    ``lineterminator="\n"`` and ``delimiter=separator`` writes them, built a column at a time: each column's cells
    are quoted in one pass, then each line is one join."""
    written = [_written_column(column, separator) for column in columns]
    lines = "\n".join(map(separator.join, zip(*written, strict=True)))
    return lines + "\n" if lines else ""


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
