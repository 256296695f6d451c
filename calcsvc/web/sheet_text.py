"""Text for a spreadsheet cell or a CSV file: numbers without float noise in the caller's decimal mark, and one
line naming each check a design fails with its value and limit (JSON keeps full precision)."""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Any

import numpy as np

# Enough for any design value; few enough that float noise (0.019500000000000003) never shows.
SIGNIFICANT_DIGITS = 12


def number_text(value: float, comma: bool = False) -> str:
    """``value`` as a spreadsheet reads it back: ``0.0195``, ``300.0``, ``1e-05`` (``0,0195`` with ``comma``)."""
    text = repr(float(f"{value:.{SIGNIFICANT_DIGITS}g}"))
    return text.replace(".", ",") if comma else text


def cell_value(value: Any, comma: bool = False) -> str:
    """A result as cell text: ``true``/``false``, a number, or empty where it does not apply."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    return number_text(value, comma)


def failing_check(value: float, limit: float, comma: bool = False) -> str:
    """``0.2 > limit 0.03``: a failing check's value, on the side of its limit it went."""
    side = ">" if value > limit else "<"
    return f"{number_text(value, comma)} {side} limit {number_text(limit, comma)}"


def failing_checks(checks: Iterable[dict[str, Any]], comma: bool = False) -> dict[str, str]:
    """The envelope's failing checks by name, each as :func:`failing_check` writes it."""
    return {c["name"]: failing_check(c["value"], c["limit"], comma) for c in checks if not c["ok"]}


def number_texts(values: np.ndarray, comma: bool = False) -> list[str]:
    """``cell_value`` of every element of a float column, formatted in bulk by one ``%`` over the column.

    ``number_text`` is repr(float("%.12g" % value)); the float nearest a decimal of at most 12 digits prints back
    as those digits, so the texts differ only in layout: a whole number gets ".0" (written "%.0f.0" here), and
    values repr would lay out otherwise (exponents 12 to 15, subnormals, which carry fewer digits), that do not
    apply (NaN) or that 12 digits round to a whole number (within 5e-12 of their size of one: 284.99999999999994
    is "285.0") are formatted one by one."""
    if values.size == 0:
        return []
    size = np.abs(values)
    with np.errstate(invalid="ignore"):
        whole = np.isfinite(values) & (values == np.round(values)) & (size < 1e11)
        near_whole = ~whole & (np.abs(values - np.round(values)) < 1e-11 * size)
        odd = (
            np.isnan(values)
            | near_whole
            | ((size >= 1e11) & (size < 1e17))
            | ((size > 0) & (size < np.finfo(np.float64).tiny))
        )
    layouts = (f"%.{SIGNIFICANT_DIGITS}g\n", "%.0f.0\n")
    formats = list(map(layouts.__getitem__, whole.view(np.uint8).tolist()))
    arguments = values.tolist()
    for k in np.flatnonzero(odd).tolist():
        formats[k], arguments[k] = "%s\n", cell_value(arguments[k])
    text = "".join(formats) % tuple(arguments)
    if comma:
        text = text.replace(".", ",")
    return text.split("\n")[:-1]


def column_texts(values: np.ndarray, comma: bool = False) -> list[str]:
    """``cell_value`` of every element of a result column (numbers, flags or whole numbers)."""
    if values.dtype == np.bool_:
        return np.where(values, "true", "false").tolist()
    if values.dtype.kind in "iu":
        return list(map(str, values.tolist()))
    return number_texts(values.astype(np.float64), comma)
