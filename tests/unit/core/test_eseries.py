"""Tests for the IEC 60063 preferred-value tables and the pickers."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calcsvc.core import eseries
from calcsvc.core.eseries import (
    DEFAULT_TOLERANCE,
    SERIES,
    is_standard,
    pick_at_or_above,
    pick_at_or_above_rows,
    pick_at_or_below,
    pick_at_or_below_rows,
)

# Reference tables: IEC 60063:2015, "Preferred number series for resistors and capacitors", tables of the
# E6 … E192 series — written out here FROM MEMORY (the standard's text was not at hand), as decimal
# strings so that they are an independent copy of the module's float tuples.
IEC_60063 = {
    "E6": "1.0 1.5 2.2 3.3 4.7 6.8",
    "E12": "1.0 1.2 1.5 1.8 2.2 2.7 3.3 3.9 4.7 5.6 6.8 8.2",
    "E24": "1.0 1.1 1.2 1.3 1.5 1.6 1.8 2.0 2.2 2.4 2.7 3.0 3.3 3.6 3.9 4.3 4.7 5.1 5.6 6.2 6.8 7.5 8.2 9.1",
    "E48": (
        "1.00 1.05 1.10 1.15 1.21 1.27 1.33 1.40 1.47 1.54 1.62 1.69 1.78 1.87 1.96 2.05 2.15 2.26 "
        "2.37 2.49 2.61 2.74 2.87 3.01 3.16 3.32 3.48 3.65 3.83 4.02 4.22 4.42 4.64 4.87 5.11 5.36 "
        "5.62 5.90 6.19 6.49 6.81 7.15 7.50 7.87 8.25 8.66 9.09 9.53"
    ),
    "E96": (
        "1.00 1.02 1.05 1.07 1.10 1.13 1.15 1.18 1.21 1.24 1.27 1.30 1.33 1.37 1.40 1.43 1.47 1.50 "
        "1.54 1.58 1.62 1.65 1.69 1.74 1.78 1.82 1.87 1.91 1.96 2.00 2.05 2.10 2.15 2.21 2.26 2.32 "
        "2.37 2.43 2.49 2.55 2.61 2.67 2.74 2.80 2.87 2.94 3.01 3.09 3.16 3.24 3.32 3.40 3.48 3.57 "
        "3.65 3.74 3.83 3.92 4.02 4.12 4.22 4.32 4.42 4.53 4.64 4.75 4.87 4.99 5.11 5.23 5.36 5.49 "
        "5.62 5.76 5.90 6.04 6.19 6.34 6.49 6.65 6.81 6.98 7.15 7.32 7.50 7.68 7.87 8.06 8.25 8.45 "
        "8.66 8.87 9.09 9.31 9.53 9.76"
    ),
    "E192": (
        "1.00 1.01 1.02 1.04 1.05 1.06 1.07 1.09 1.10 1.11 1.13 1.14 1.15 1.17 1.18 1.20 1.21 1.23 "
        "1.24 1.26 1.27 1.29 1.30 1.32 1.33 1.35 1.37 1.38 1.40 1.42 1.43 1.45 1.47 1.49 1.50 1.52 "
        "1.54 1.56 1.58 1.60 1.62 1.64 1.65 1.67 1.69 1.72 1.74 1.76 1.78 1.80 1.82 1.84 1.87 1.89 "
        "1.91 1.93 1.96 1.98 2.00 2.03 2.05 2.08 2.10 2.13 2.15 2.18 2.21 2.23 2.26 2.29 2.32 2.34 "
        "2.37 2.40 2.43 2.46 2.49 2.52 2.55 2.58 2.61 2.64 2.67 2.71 2.74 2.77 2.80 2.84 2.87 2.91 "
        "2.94 2.98 3.01 3.05 3.09 3.12 3.16 3.20 3.24 3.28 3.32 3.36 3.40 3.44 3.48 3.52 3.57 3.61 "
        "3.65 3.70 3.74 3.79 3.83 3.88 3.92 3.97 4.02 4.07 4.12 4.17 4.22 4.27 4.32 4.37 4.42 4.48 "
        "4.53 4.59 4.64 4.70 4.75 4.81 4.87 4.93 4.99 5.05 5.11 5.17 5.23 5.30 5.36 5.42 5.49 5.56 "
        "5.62 5.69 5.76 5.83 5.90 5.97 6.04 6.12 6.19 6.26 6.34 6.42 6.49 6.57 6.65 6.73 6.81 6.90 "
        "6.98 7.06 7.15 7.23 7.32 7.41 7.50 7.59 7.68 7.77 7.87 7.96 8.06 8.16 8.25 8.35 8.45 8.56 "
        "8.66 8.76 8.87 8.98 9.09 9.20 9.31 9.42 9.53 9.65 9.76 9.88"
    ),
}
DIGITS = {"E6": 2, "E12": 2, "E24": 2, "E48": 3, "E96": 3, "E192": 3}


def _naive(series: str) -> list[float]:
    """The geometric formula round(10**(i/N), digits), which the tables mostly (not always) follow."""
    n = len(SERIES[series])
    return [round(10 ** (i / n), DIGITS[series] - 1) for i in range(n)]


# ---- the tables ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("series", list(IEC_60063))
def test_table_matches_iec_60063_entry_by_entry(series: str) -> None:
    # IEC 60063:2015 tables (from memory), compared entry by entry.
    expected = [float(s) for s in IEC_60063[series].split()]
    assert len(SERIES[series]) == len(expected)
    for k, (got, want) in enumerate(zip(SERIES[series], expected, strict=True)):
        assert got == want, f"{series}[{k}]: {got} != {want}"


def test_series_names_and_counts() -> None:
    # IEC 60063: series EN has N values per decade.
    assert {name: len(values) for name, values in SERIES.items()} == {
        "E6": 6,
        "E12": 12,
        "E24": 24,
        "E48": 48,
        "E96": 96,
        "E192": 192,
    }


@pytest.mark.parametrize("series", list(SERIES))
def test_table_is_increasing_within_one_decade(series: str) -> None:
    # IEC 60063: each table lists one decade, 1 ≤ mantissa < 10, in increasing order.
    values = SERIES[series]
    assert values[0] == 1.0
    assert all(a < b for a, b in itertools.pairwise(values))
    assert values[-1] < 10.0


@pytest.mark.parametrize(("coarse", "fine"), [("E6", "E12"), ("E12", "E24"), ("E48", "E96"), ("E96", "E192")])
def test_coarser_series_is_every_other_value_of_the_finer(coarse: str, fine: str) -> None:
    # IEC 60063: E6 ⊂ E12 ⊂ E24 and E48 ⊂ E96 ⊂ E192, each the even-indexed values of the next.
    assert SERIES[coarse] == SERIES[fine][::2]


def test_e24_historical_values_differ_from_the_naive_formula() -> None:
    # IEC 60063 (from memory): E24 keeps historical values that round(10**(i/24), 1) does not give.
    naive = _naive("E24")
    differing = {SERIES["E24"][i]: naive[i] for i in range(24) if SERIES["E24"][i] != naive[i]}
    assert differing == {2.7: 2.6, 3.0: 2.9, 3.3: 3.2, 3.6: 3.5, 3.9: 3.8, 4.3: 4.2, 4.7: 4.6, 8.2: 8.3}


def test_e192_has_9_20_where_the_formula_gives_9_19() -> None:
    # IEC 60063 (from memory): the one E192 entry that is not round(10**(i/192), 2).
    naive = _naive("E192")
    differing = [(i, SERIES["E192"][i], naive[i]) for i in range(192) if SERIES["E192"][i] != naive[i]]
    assert differing == [(185, 9.20, 9.19)]


@pytest.mark.parametrize("series", ["E48", "E96"])
def test_e48_e96_follow_the_formula(series: str) -> None:
    # IEC 60063 (from memory): E48 and E96 are the 3-significant-figure rounding of 10**(i/N) throughout.
    assert list(SERIES[series]) == _naive(series)


def test_default_tolerances() -> None:
    # IEC 60063 (from memory): the tolerance customarily associated with each series.
    assert DEFAULT_TOLERANCE == {
        "E6": 0.20,
        "E12": 0.10,
        "E24": 0.05,
        "E48": 0.02,
        "E96": 0.01,
        "E192": 0.005,
    }


# ---- picking ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("x", "series", "above", "below"),
    [
        # Expected values read off the IEC 60063 tables above (from memory).
        (4500.0, "E24", 4700.0, 4300.0),
        (4700.0, "E24", 4700.0, 4700.0),
        (170.0, "E24", 180.0, 160.0),
        (285.0, "E12", 330.0, 270.0),
        (1000.0, "E6", 1000.0, 1000.0),
        (9.99e3, "E24", 10e3, 9.1e3),
        (9.2, "E192", 9.2, 9.2),
        (9.195, "E192", 9.2, 9.09),
        (0.0123, "E96", 0.0124, 0.0121),
        (1.5e6, "E48", 1.54e6, 1.47e6),
        (3.1e-9, "E24", 3.3e-9, 3.0e-9),
        (1.001, "E6", 1.5, 1.0),
        (0.999, "E6", 1.0, 0.68),
    ],
)
def test_rounding_direction(x: float, series: str, above: float, below: float) -> None:
    assert pick_at_or_above(x, series) == above
    assert pick_at_or_below(x, series) == below


@pytest.mark.parametrize(
    ("x", "series", "expected"),
    [
        # Floating-point noise around a standard value must pick that value, never its neighbour.
        (4.7e3 * (1 + 1e-12), "E24", 4700.0),
        (4.7e3 * (1 - 1e-12), "E24", 4700.0),
        (470.0000000001, "E12", 470.0),
        (469.9999999999, "E12", 470.0),
        (1000.0 * (1 + 1e-12), "E192", 1000.0),
        (1000.0 * (1 - 1e-12), "E192", 1000.0),
        (0.1 + 0.2, "E24", 0.3),  # 0.30000000000000004
        (3 * 0.1, "E24", 0.3),
        (1.1 * 1.1, "E96", 1.21),  # 1.2100000000000002
    ],
)
def test_noise_robustness(x: float, series: str, expected: float) -> None:
    assert pick_at_or_above(x, series) == expected
    assert pick_at_or_below(x, series) == expected
    assert is_standard(x, series)


def test_tolerance_is_not_wider_than_1e_9() -> None:
    # A genuine 1e-8 excess is a different value: the next one up, per the E24 table (from memory).
    assert pick_at_or_above(4700 * (1 + 1e-8), "E24") == 5100.0
    assert pick_at_or_below(4700 * (1 - 1e-8), "E24") == 4300.0
    assert not is_standard(4700 * (1 + 1e-8), "E24")


def test_returned_values_are_clean_decimals() -> None:
    # The double nearest each decimal, as Python parses the literal; a naive mantissa × 10**k is not.
    assert 8.2 * 10.0**2 != 820.0 and 4.7 * 10.0**-9 != 4.7e-9
    assert pick_at_or_above(815.0, "E24") == 820.0
    assert pick_at_or_above(4650.0, "E24") == 4700.0
    assert pick_at_or_above(0.0465, "E24") == 0.047
    assert pick_at_or_above(4.65e-9, "E24") == 4.7e-9
    assert pick_at_or_above(2.99e5, "E192") == 3.01e5
    assert pick_at_or_above(9.19e-3, "E192") == 9.2e-3
    assert repr(float(pick_at_or_above(8.1e-7, "E12"))) == "8.2e-07"


def test_vectorized_and_shape_preserving() -> None:
    x = np.array([[100.0, 150.0], [4.71e3, 2.0e-6]])
    assert pick_at_or_above(x, "E6").tolist() == [[100.0, 150.0], [6.8e3, 2.2e-6]]
    assert pick_at_or_below(x, "E6").tolist() == [[100.0, 150.0], [4.7e3, 1.5e-6]]
    assert pick_at_or_above(5.0, "E6").shape == ()
    assert is_standard(x, "E6").tolist() == [[True, True], [False, False]]


def test_extreme_decades() -> None:
    # Any decade works: x × 10**k picks the same mantissa (exact decimals only up to 10**22, where the
    # power of ten itself is exact; beyond that within a couple of ulps).
    assert pick_at_or_above(4.5e-200, "E24") == pytest.approx(4.7e-200, rel=1e-15)
    assert pick_at_or_below(4.5e200, "E24") == pytest.approx(4.3e200, rel=1e-15)
    assert pick_at_or_above(eseries.MAX_VALUE, "E6") == pytest.approx(1e300, rel=1e-15)
    assert pick_at_or_below(eseries.MIN_VALUE, "E6") == pytest.approx(1e-300, rel=1e-15)


def test_invalid_series_name_lists_valid_names() -> None:
    with pytest.raises(ValueError, match=r"E6, E12, E24, E48, E96, E192"):
        pick_at_or_above(100.0, "E7")
    with pytest.raises(ValueError, match=r"'e24'"):
        pick_at_or_below(100.0, "e24")


@pytest.mark.parametrize("bad", [0.0, -1.0, math.nan, math.inf, -math.inf, 1e-320, 1e305])
def test_invalid_values(bad: float) -> None:
    with pytest.raises(ValueError):
        pick_at_or_above([100.0, bad], "E24")
    with pytest.raises(ValueError):
        pick_at_or_below(bad, "E24")
    with pytest.raises(ValueError):
        is_standard(bad, "E24")


def test_per_row_helpers() -> None:
    names = np.array(["E6", "E24", "E192", "E24"])
    x = np.array([2000.0, 2000.0, 2000.0, 170.0])
    assert pick_at_or_above_rows(x, names).tolist() == [2200.0, 2000.0, 2000.0, 180.0]
    assert pick_at_or_below_rows(x, names).tolist() == [1500.0, 2000.0, 2000.0, 160.0]
    assert eseries.default_tolerance_rows(names).tolist() == [0.2, 0.05, 0.005, 0.05]
    assert eseries.known_series(np.array(["E12", "E13", ""])).tolist() == [True, False, False]
    assert np.isnan(eseries.default_tolerance_rows(np.array(["X"])))[0]
    # One series on every row, on some rows only, or mixed: each row its own series' tolerance.
    for rows in (["E96"] * 3, ["E96", "E97", "E96"], ["E12", "E96", "E12"], ["X", "X"]):
        expected = [eseries.DEFAULT_TOLERANCE.get(name, math.nan) for name in rows]
        np.testing.assert_array_equal(eseries.default_tolerance_rows(np.array(rows)), expected)
        assert eseries.all_known(np.array(rows)) == all(name in eseries.SERIES for name in rows)
    with pytest.raises(ValueError, match="E13"):
        pick_at_or_above_rows(x, np.array(["E6", "E13", "E6", "E6"]))


# ---- properties ------------------------------------------------------------------------------------------


def _brute_force_candidates(x: float, series: str) -> list[float]:
    """Every standard value from two decades below x to two above, as mantissa × 10**k (reference)."""
    k = math.floor(math.log10(x))
    return sorted(float(m) * 10.0**d for d in range(k - 2, k + 3) for m in IEC_60063[series].split())


def _in_series(value: float, series: str) -> bool:
    """Independent membership test: the value's significant digits form a table entry (from the text)."""
    digits = DIGITS[series]
    mantissa, _, exponent = f"{value:.{digits - 1}e}".partition("e")
    return (
        mantissa in {f"{float(s):.{digits - 1}f}" for s in IEC_60063[series].split()}
        and float(f"{mantissa}e{exponent}") == value  # clean: exactly the decimal's double
    )


positive = st.floats(min_value=1e-15, max_value=1e15, allow_nan=False, allow_infinity=False)
series_names = st.sampled_from(list(SERIES))


@st.composite
def near_standard(draw: st.DrawFn) -> tuple[float, str]:
    """A standard value perturbed by a few ulps to ±1e-10 relative: the noisy case."""
    series = draw(series_names)
    mantissa = draw(st.sampled_from(IEC_60063[series].split()))
    exponent = draw(st.integers(min_value=-15, max_value=15))
    noise = draw(st.floats(min_value=-1e-10, max_value=1e-10))
    return float(f"{mantissa}e{exponent}") * (1 + noise), series


@settings(max_examples=300, deadline=None, derandomize=True)
@given(x=positive, series=series_names)
def test_property_pick_matches_brute_force(x: float, series: str) -> None:
    above = float(pick_at_or_above(x, series))
    below = float(pick_at_or_below(x, series))
    # Picked values are in the series, and clean.
    assert _in_series(above, series)
    assert _in_series(below, series)
    # Rounding direction, with the 1e-9 noise allowance.
    assert above >= x * (1 - 1e-9)
    assert below <= x * (1 + 1e-9)
    assert below <= above
    # No standard value lies strictly between x and the pick: the pick is the brute-force nearest.
    cands = _brute_force_candidates(x, series)
    assert not any(x * (1 + 1e-9) < c < above * (1 - 1e-12) for c in cands)
    assert not any(below * (1 + 1e-12) < c < x * (1 - 1e-9) for c in cands)
    assert above == pytest.approx(min(c for c in cands if c >= x * (1 - 1e-9)), rel=1e-12)
    assert below == pytest.approx(max(c for c in cands if c <= x * (1 + 1e-9)), rel=1e-12)


@settings(max_examples=300, deadline=None, derandomize=True)
@given(case=near_standard())
def test_property_noisy_standard_value_picks_itself(case: tuple[float, str]) -> None:
    x, series = case
    assert pick_at_or_above(x, series) == pytest.approx(x, rel=2e-10)
    assert pick_at_or_below(x, series) == pytest.approx(x, rel=2e-10)
    assert is_standard(x, series)


@settings(max_examples=100, deadline=None, derandomize=True)
@given(xs=st.lists(positive, min_size=1, max_size=20), series=series_names)
def test_property_vectorized_equals_scalar(xs: list[float], series: str) -> None:
    batch = pick_at_or_above(np.array(xs), series)
    assert batch.tolist() == [float(pick_at_or_above(x, series)) for x in xs]
    # Values at and above 10 take one power of ten, below it a division: both hold when mixed in one call.
    both = pick_at_or_below(np.array([*xs, 4.7e-9, 4.7e3]), series)
    assert both.tolist() == [float(pick_at_or_below(x, series)) for x in [*xs, 4.7e-9, 4.7e3]]
