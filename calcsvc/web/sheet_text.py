"""Text for a spreadsheet cell or a CSV file: numbers without float noise in the caller's decimal mark, and one
line naming each check a design fails with its value and limit (JSON keeps full precision)."""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Any

import numpy as np
import orjson

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
    """``cell_value`` of every element of a float column, formatted in bulk.

    ``number_text`` is repr(float("%.12g" % value)): the double nearest the value's 12-digit decimal, written
    shortest. For sizes from 1e-4 to 1e11 that double is found with numpy: the value scaled to twelve digits
    before the point (by an exact power of ten: one rounding, off by under 1e-4), rounded to a whole number and
    divided back (both exact, so the quotient is the nearest double); orjson writes each as repr does there
    (the shortest digits, positional, ".0" on whole numbers). A value whose scaled fraction lies within 1e-3
    of one half, where the one rounding could decide the twelfth digit, and every other size or a value that
    does not apply (NaN) are formatted one by one."""
    if values.size == 0:
        return []
    size = np.abs(values)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        bulk = ((size >= 1e-4) & (size < 1e11)) | (values == 0)
        exponent = np.floor(np.log10(np.where(bulk & (size > 0), size, 1.0)))
        scale = 10.0 ** (SIGNIFICANT_DIGITS - 1 - exponent)
        scaled = size * scale
        exponent += (scaled >= 10.0**SIGNIFICANT_DIGITS).astype(np.float64) - (
            scaled < 10.0 ** (SIGNIFICANT_DIGITS - 1)
        )
        scale = 10.0 ** (SIGNIFICANT_DIGITS - 1 - exponent)
        scaled = size * scale
        fraction = scaled - np.floor(scaled)
        rounded = np.copysign((np.floor(scaled) + (fraction > 0.5)) / scale, values)
        bulk &= (np.abs(fraction - 0.5) >= 1e-3) & ((np.abs(rounded) >= 1e-4) | (values == 0))
    text = orjson.dumps(rounded[bulk], option=orjson.OPT_SERIALIZE_NUMPY).decode()[1:-1]
    if comma:
        text = text.replace(",", "\n").replace(".", ",")
    texts = text.split("\n" if comma else ",") if text else []
    if len(texts) == values.size:
        return texts
    out = np.empty(values.size, dtype=object)
    out[bulk] = texts
    out[~bulk] = [cell_value(value, comma) for value in values[~bulk].tolist()]
    return out.tolist()


def column_texts(values: np.ndarray, comma: bool = False) -> list[str]:
    """``cell_value`` of every element of a result column (numbers, flags or whole numbers)."""
    if values.dtype == np.bool_:
        return np.where(values, "true", "false").tolist()
    if values.dtype.kind in "iu":
        return list(map(str, values.tolist()))
    return number_texts(values.astype(np.float64), comma)


def guard_leaves(values: np.ndarray, comma: bool = False) -> bool:
    """Whether ``column_texts(values, comma)`` are all cells the formula guard (``csv_cells.safe_cells``) leaves
    as they are, known from the values without visiting the texts (False where it might not): flags, blanks and
    numbers are left, a minus sign being the only lead their texts can start with; ``-inf`` is no number, nor,
    to the guard, is a negative number written with a decimal comma."""
    if values.dtype.kind not in "f":
        return True
    with np.errstate(invalid="ignore"):
        return not (values < (0 if comma else -np.inf)).any() and not np.isneginf(values).any()
