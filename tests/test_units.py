"""Strict parsing of quantities written with units."""

from __future__ import annotations

import pytest

from calcsvc.units import UnitError, parse_quantity


@pytest.mark.parametrize(
    ("text", "unit", "expected"),
    [
        ("4.7 kohm", "ohm", 4700.0),
        ("4.7kΩ", "ohm", 4700.0),
        ("0.5 V/us", "V/s", 500_000.0),
        ("0.5 V/µs", "V/s", 500_000.0),
        ("20 mA", "A", 0.02),
        ("9 V", "V", 9.0),
        ("9", "V", 9.0),
        ("1 MHz", "Hz", 1e6),
        ("10 us", "s", 1e-5),
        ("2200 mAh", "A*h", 2.2),
        ("5 %", "dimensionless", 0.05),
        ("1e3 ohm", "ohm", 1000.0),
        ("-0.2 V", "V", -0.2),
    ],
)
def test_converts_to_si(text: str, unit: str, expected: float) -> None:
    assert parse_quantity(text, unit) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize(
    ("text", "unit", "fragment"),
    [
        ("9 A", "V", "dimension"),
        ("20 mV", "A", "dimension"),
        ("1,5 V", "V", "not a number"),
        ("nan V", "V", "not a number"),
        ("inf V", "V", "not a number"),
        ("1e400 V", "V", "finite"),
        ("9 blargs", "V", "unknown unit"),
        ("", "V", "not a number"),
        ("V 9", "V", "not a number"),
    ],
)
def test_rejects_with_a_clear_message(text: str, unit: str, fragment: str) -> None:
    with pytest.raises(UnitError, match=fragment):
        parse_quantity(text, unit)


def test_expression_syntax_never_reaches_the_evaluator() -> None:
    # A power tower would hang an expression evaluator; the strict parser refuses it without evaluating.
    for text in ("2**2**2**2**2 V", "9**9**9 V", "(1+1) V", "9 V; import os", "__import__('os') V"):
        with pytest.raises(UnitError):
            parse_quantity(text, "V")
