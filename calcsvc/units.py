"""Strict parsing of quantities written as strings, such as ``"4.7 kohm"`` or ``"0.5 V/us"``.

User text never reaches pint's expression evaluator (it can be made to hang and accepts oddities such as
``"1,5 V"``): a regular expression takes a plain decimal number and a unit name, ``float()`` reads the
number and ``parse_units`` reads only the unit, then the dimension is checked against the field's unit.

Decibels: a field whose unit is ``VOLTAGE_RATIO`` (a voltage gain) reads ``"26 dB"`` as 20·log10 of a voltage
ratio (IEC 60027-3), 19.95 V/V; pint's own decibel is 10·log10, a power ratio. Every other logarithmic unit, and
decibels on any other field, are refused: no other field is a ratio of root-power quantities.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache

import pint

UREG = pint.UnitRegistry()

# The longest quantity string read: "-1.2345678901234567e-300 kohm/us" is about 30 characters. Checked before
# any pattern runs, so the time to refuse a string never grows with what a client sends.
MAX_QUANTITY_LENGTH = 64

# A decimal number (ASCII digits only: float() would also read other scripts' digits), then optionally a unit:
# words separated by spaces, the first starting with a letter or "%". Each character can be matched in only
# one way (no space or digit is claimed by two neighbouring repetitions), so a backtracking matcher refuses
# any string in linear time, in Python and in the JSON Schema validators that read the published pattern.
_NUMBER = r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
_UNIT_CHARS = "A-Za-zµμΩ%/*^0-9.·-"
_UNIT = rf"[A-Za-zµμΩ%][{_UNIT_CHARS}]*(?: +[{_UNIT_CHARS}]+)*"
QUANTITY = rf" *({_NUMBER})(?: *({_UNIT}))? *"
# As published in the OpenAPI document: a decimal point in bodies; either mark in the query form, which reads
# "0,02" with decimal=comma.
QUANTITY_PATTERN = "^" + QUANTITY + "$"
QUERY_QUANTITY_PATTERN = "^" + QUANTITY.replace(r"\.", "[.,]") + "$"
_QUANTITY = re.compile(QUANTITY)
# Unit text: names, products and quotients of names with optional integer or half powers (noise densities are
# per √Hz: "nV/Hz^0.5"); nothing that evaluates.
_NAME = "[A-Za-zµμΩ]+(?: *(?:\\*\\*|\\^) *-?[0-9](?:\\.5)?)?"
_UNIT_TEXT = re.compile(rf"{_NAME}(?: *[*/·] *{_NAME})*")
_ALIASES = {"Ω": "ohm", "µ": "u", "μ": "u", "·": "*", "^": "**"}
_WORD = re.compile("[A-Za-zµμΩ]+")

VOLTAGE_RATIO = "V/V"  # the SI unit a voltage-gain field declares
_DECIBEL = UREG.decibel


class UnitError(ValueError):
    """The text is not a number with a unit of the expected dimension."""


@lru_cache(maxsize=256)
def _unit(unit_text: str) -> pint.Unit:
    text = unit_text
    for alias, plain in _ALIASES.items():
        text = text.replace(alias, plain)
    if text == "%":
        return UREG.percent
    try:
        return UREG.parse_units(text)
    except Exception as exc:  # pint raises several unrelated types for unknown names
        raise UnitError(f"unknown unit '{unit_text}'") from exc


@lru_cache(maxsize=256)
def _logarithmic(unit_text: str) -> bool:
    """Whether any unit name in the text is logarithmic (dB, Np, octave, ...): those do not scale a value."""
    return any(not UREG.Quantity(1.0, _unit(word))._is_multiplicative for word in _WORD.findall(unit_text))


_PREFIXES = ("", "p", "n", "u", "µ", "m", "k", "M", "G")
_SYMBOLS = ("A", "V", "ohm", "Ω", "Hz", "s", "W", "Ah", "Wh", "F", "H", "V/us", "V/µs", "V/ms", "V/s")


@lru_cache(maxsize=64)
def _spellings(si_unit: str) -> dict[str, list[str]]:
    """The usual spellings of units of ``si_unit``'s dimension, by their lower-case form."""
    target = _si(si_unit).dimensionality
    found: dict[str, list[str]] = {}
    for spelling in (prefix + symbol for prefix in _PREFIXES for symbol in _SYMBOLS):
        if _unit(spelling).dimensionality == target:
            found.setdefault(spelling.lower(), []).append(spelling)
    return found


def _did_you_mean(unit_text: str, si_unit: str) -> str:
    """A hint such as ``; did you mean 'mA'?`` when ``unit_text`` is a usual unit of the field in the wrong case."""
    candidates = _spellings(si_unit).get(unit_text.replace(" ", "").lower(), [])
    changes = {c: sum(a != b for a, b in zip(c, unit_text.replace(" ", ""), strict=True)) for c in candidates}
    nearest = [c for c in candidates if changes[c] == min(changes.values())]
    return f"; did you mean {' or '.join(repr(c) for c in nearest)}?" if nearest else ""


def with_decimal_point(text: str) -> str:
    """``text`` written with a decimal comma ("0,02", "1,5 V") as the parser reads it; a point is refused there,
    since "1.500" may mean fifteen hundred where the comma is the decimal mark."""
    if "." in text and len(text) <= MAX_QUANTITY_LENGTH:  # a longer text is refused, unquoted, by parse_quantity
        raise UnitError(f"'{text}' has a '.': with decimal=comma the decimal mark is ','")
    return text.replace(",", ".")


@lru_cache(maxsize=64)
def _si(unit: str) -> pint.Unit:
    return UREG.parse_units(unit)


def parse_quantity(text: str, si_unit: str) -> float:
    """Convert ``text`` (a decimal number, optionally followed by a unit) to ``si_unit``.

    ``si_unit`` is the pint spelling of the field's SI unit ("V", "A", "ohm", "Hz", "V/s", "s", "W", "A*h",
    "dimensionless", ``VOLTAGE_RATIO``). A bare number is taken as already in that unit.
    """
    if len(text) > MAX_QUANTITY_LENGTH:
        raise UnitError(f"longer than {MAX_QUANTITY_LENGTH} characters: not a number followed by a unit")
    match = _QUANTITY.fullmatch(text)
    if match is None:
        raise UnitError(f"'{text}' is not a number followed by a unit")
    number = float(match[1])
    if not math.isfinite(number):
        raise UnitError(f"'{text}' is not a finite number")
    unit_text = match[2]
    if unit_text is None:
        return number
    if unit_text != "%" and _UNIT_TEXT.fullmatch(unit_text) is None:
        raise UnitError(f"'{unit_text}' is not a unit name")
    try:
        unit = _unit(unit_text)
    except UnitError as exc:
        raise UnitError(f"{exc}{_did_you_mean(unit_text, si_unit)}") from exc
    target = _si(si_unit)
    if si_unit == VOLTAGE_RATIO and _WORD.fullmatch(unit_text) and unit == _DECIBEL:
        try:
            return _finite(10.0 ** (number / 20.0), text)
        except OverflowError as exc:
            raise UnitError(f"'{text}' is out of range") from exc
    if not target.dimensionality and _logarithmic(unit_text):
        allowed = "; a voltage gain takes dB" if si_unit == VOLTAGE_RATIO else ""
        raise UnitError(f"'{text}': a logarithmic unit is not accepted here, give a plain ratio{allowed}")
    if unit.dimensionality != target.dimensionality:
        # "ma" is a (nonsensical) milli-year-ampere: a wrong case is the likelier mistake.
        if suggestion := _did_you_mean(unit_text, si_unit):
            raise UnitError(f"unknown unit '{unit_text}'{suggestion}")
        expected = "dimensionless" if not target.dimensionality else f"{target:~}"
        raise UnitError(f"'{text}' has the wrong dimension: expected a value in {expected}")
    return _finite(UREG.Quantity(number, unit).to(target).magnitude, text)


def _finite(value: float, text: str) -> float:
    # 15 significant digits remove conversion noise ("10 us" gives 1e-05, not 9.999999999999999e-06).
    value = float(f"{value:.15g}")
    if not math.isfinite(value):
        raise UnitError(f"'{text}' is out of range")
    return value
