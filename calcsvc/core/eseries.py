"""IEC 60063 preferred-number series (E6 … E192) and picking standard values from them.

A series is a tuple of mantissas in [1, 10); the standard values are those mantissas times any power of ten.

Source of the tables: IEC 60063:2015, *Preferred number series for resistors and capacitors*.
The mantissas below are written from memory, NOT copied from the standard's text (which was not at hand).
They were cross-checked against several independent public listings of the series and against the
structural facts of the standard that the tests also assert: E6 ⊂ E12 ⊂ E24 and E48 ⊂ E96 ⊂ E192, the
E24 values that differ from the rounded geometric formula (2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2), and
E192's 9.20 where the formula gives 9.19.

Picking is robust to floating-point noise: a value within a relative ``REL_TOL`` (1e-9) of a standard
value counts as that value, so ``4.7e3 * (1 + 1e-12)`` picked "at or above" gives 4700, never 4750 (E192).
Returned values are "clean": the integer mantissa (e.g. 47 for 4.7) scaled by a power of ten in one
correctly rounded operation, so 4.7 kΩ comes back as exactly ``4700.0`` and 4.7 nF as ``4.7e-09``.
"""

from __future__ import annotations

import functools

import numpy as np
import numpy.typing as npt

from calcsvc.core.outcome import BoolArray, FloatArray, Rules, Violation, require

# fmt: off
SERIES: dict[str, tuple[float, ...]] = {
    "E6": (1.0, 1.5, 2.2, 3.3, 4.7, 6.8),
    "E12": (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2),
    "E24": (
        1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
        3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1,
    ),
    "E48": (
        1.00, 1.05, 1.10, 1.15, 1.21, 1.27, 1.33, 1.40, 1.47, 1.54, 1.62, 1.69,
        1.78, 1.87, 1.96, 2.05, 2.15, 2.26, 2.37, 2.49, 2.61, 2.74, 2.87, 3.01,
        3.16, 3.32, 3.48, 3.65, 3.83, 4.02, 4.22, 4.42, 4.64, 4.87, 5.11, 5.36,
        5.62, 5.90, 6.19, 6.49, 6.81, 7.15, 7.50, 7.87, 8.25, 8.66, 9.09, 9.53,
    ),
    "E96": (
        1.00, 1.02, 1.05, 1.07, 1.10, 1.13, 1.15, 1.18, 1.21, 1.24, 1.27, 1.30,
        1.33, 1.37, 1.40, 1.43, 1.47, 1.50, 1.54, 1.58, 1.62, 1.65, 1.69, 1.74,
        1.78, 1.82, 1.87, 1.91, 1.96, 2.00, 2.05, 2.10, 2.15, 2.21, 2.26, 2.32,
        2.37, 2.43, 2.49, 2.55, 2.61, 2.67, 2.74, 2.80, 2.87, 2.94, 3.01, 3.09,
        3.16, 3.24, 3.32, 3.40, 3.48, 3.57, 3.65, 3.74, 3.83, 3.92, 4.02, 4.12,
        4.22, 4.32, 4.42, 4.53, 4.64, 4.75, 4.87, 4.99, 5.11, 5.23, 5.36, 5.49,
        5.62, 5.76, 5.90, 6.04, 6.19, 6.34, 6.49, 6.65, 6.81, 6.98, 7.15, 7.32,
        7.50, 7.68, 7.87, 8.06, 8.25, 8.45, 8.66, 8.87, 9.09, 9.31, 9.53, 9.76,
    ),
    "E192": (
        1.00, 1.01, 1.02, 1.04, 1.05, 1.06, 1.07, 1.09, 1.10, 1.11, 1.13, 1.14,
        1.15, 1.17, 1.18, 1.20, 1.21, 1.23, 1.24, 1.26, 1.27, 1.29, 1.30, 1.32,
        1.33, 1.35, 1.37, 1.38, 1.40, 1.42, 1.43, 1.45, 1.47, 1.49, 1.50, 1.52,
        1.54, 1.56, 1.58, 1.60, 1.62, 1.64, 1.65, 1.67, 1.69, 1.72, 1.74, 1.76,
        1.78, 1.80, 1.82, 1.84, 1.87, 1.89, 1.91, 1.93, 1.96, 1.98, 2.00, 2.03,
        2.05, 2.08, 2.10, 2.13, 2.15, 2.18, 2.21, 2.23, 2.26, 2.29, 2.32, 2.34,
        2.37, 2.40, 2.43, 2.46, 2.49, 2.52, 2.55, 2.58, 2.61, 2.64, 2.67, 2.71,
        2.74, 2.77, 2.80, 2.84, 2.87, 2.91, 2.94, 2.98, 3.01, 3.05, 3.09, 3.12,
        3.16, 3.20, 3.24, 3.28, 3.32, 3.36, 3.40, 3.44, 3.48, 3.52, 3.57, 3.61,
        3.65, 3.70, 3.74, 3.79, 3.83, 3.88, 3.92, 3.97, 4.02, 4.07, 4.12, 4.17,
        4.22, 4.27, 4.32, 4.37, 4.42, 4.48, 4.53, 4.59, 4.64, 4.70, 4.75, 4.81,
        4.87, 4.93, 4.99, 5.05, 5.11, 5.17, 5.23, 5.30, 5.36, 5.42, 5.49, 5.56,
        5.62, 5.69, 5.76, 5.83, 5.90, 5.97, 6.04, 6.12, 6.19, 6.26, 6.34, 6.42,
        6.49, 6.57, 6.65, 6.73, 6.81, 6.90, 6.98, 7.06, 7.15, 7.23, 7.32, 7.41,
        7.50, 7.59, 7.68, 7.77, 7.87, 7.96, 8.06, 8.16, 8.25, 8.35, 8.45, 8.56,
        8.66, 8.76, 8.87, 8.98, 9.09, 9.20, 9.31, 9.42, 9.53, 9.65, 9.76, 9.88,
    ),
}
# fmt: on

# Tolerance customarily paired with each series (fraction of nominal), from memory of IEC 60063.
DEFAULT_TOLERANCE: dict[str, float] = {
    "E6": 0.20,
    "E12": 0.10,
    "E24": 0.05,
    "E48": 0.02,
    "E96": 0.01,
    "E192": 0.005,
}

# Significant figures of each series' mantissas: two up to E24, three from E48.
SIGNIFICANT_FIGURES: dict[str, int] = {"E6": 2, "E12": 2, "E24": 2, "E48": 3, "E96": 3, "E192": 3}

REL_TOL = 1e-9
"""Relative distance within which a value counts as equal to a standard value."""

MIN_VALUE = 1e-300
MAX_VALUE = 1e300
"""Supported magnitudes: far beyond any component value, and clear of float underflow/overflow."""

SERIES_NAMES: tuple[str, ...] = tuple(SERIES)


def _check_series(series: str) -> None:
    if series not in SERIES:
        raise ValueError(f"unknown E-series {series!r}; valid names are {', '.join(SERIES_NAMES)}")


def _as_values(values: npt.ArrayLike) -> FloatArray:
    x = np.asarray(values, dtype=np.float64)
    if ((x >= MIN_VALUE) & (x <= MAX_VALUE)).all():  # one pass when all is well (NaN fails it)
        return x
    if not np.all(np.isfinite(x)) or np.any(x <= 0):
        raise ValueError("values must be finite and positive")
    raise ValueError(f"values must lie between {MIN_VALUE:g} and {MAX_VALUE:g}")


def _pow10(exponent: npt.NDArray[np.int64]) -> FloatArray:
    """10.0**exponent; exact for |exponent| <= 22, correctly rounded beyond (|exponent| <= 302 here)."""
    return np.power(10.0, exponent.astype(np.float64))


def _scaled(integer: npt.NDArray[np.int64], exponent: npt.NDArray[np.int64]) -> FloatArray:
    """integer × 10**exponent: multiply for exponent ≥ 0, divide otherwise.

    For |exponent| ≤ 22 the power of ten is exact, so this is a single rounding and gives the double
    nearest the decimal value: 47 / 1000 == 0.047 exactly as Python parses "0.047" (multiplying by the
    inexact 1e-3 would not). Beyond that the result is within an ulp or two.
    """
    if (exponent >= 0).all():  # the usual resistor (from 10 Ω, or 100 Ω in E48–E192): one power, no division
        return integer * _pow10(exponent)
    up = _pow10(np.maximum(exponent, 0))
    down = _pow10(np.maximum(-exponent, 0))
    return np.where(exponent >= 0, integer * up, integer / down)


@functools.cache
def _tables(series: str) -> tuple[FloatArray, npt.NDArray[np.int64], npt.NDArray[np.int64]]:
    """Mantissas over three decades (0.1 … 99.x) plus 100, with their integer digits and decade offsets.

    Three decades around the value's own decade cover every case, including float noise that puts a
    mantissa at 0.9999999 or 10.0000001.
    """
    digits = SIGNIFICANT_FIGURES[series]
    base = np.asarray(SERIES[series], dtype=np.float64)
    integers = np.rint(base * 10 ** (digits - 1)).astype(np.int64)
    offsets = np.array([-1, 0, 1, 2])
    mant = np.concatenate([base * 10.0**o for o in offsets[:3]] + [np.array([100.0])])
    ints = np.concatenate([integers] * 3 + [integers[:1]])
    decs = np.concatenate([np.full(base.size, o) for o in offsets[:3]] + [offsets[3:]])
    return mant, ints, decs


def _pick(values: npt.ArrayLike, series: str, above: bool) -> FloatArray:
    _check_series(series)
    x = _as_values(values)
    shape = x.shape
    x = x.ravel()
    mant, ints, decs = _tables(series)
    decade = np.floor(np.log10(x)).astype(np.int64)
    m = x / _pow10(decade)  # ≈ [1, 10); |decade| ≤ 300 so the power is a normal float
    if above:
        # Smallest table entry ≥ m·(1 − tol): an entry just below m by float noise still counts.
        idx = np.searchsorted(mant, m * (1.0 - REL_TOL), side="left")
    else:
        # Largest table entry ≤ m·(1 + tol).
        idx = np.searchsorted(mant, m * (1.0 + REL_TOL), side="right") - 1
    exponent = decade + decs[idx] - (SIGNIFICANT_FIGURES[series] - 1)
    return _scaled(ints[idx], exponent).reshape(shape)


def pick_at_or_above(values: npt.ArrayLike, series: str) -> FloatArray:
    """The smallest standard value of ``series`` that is ≥ each value (any decade).

    A value within a relative 1e-9 of a standard value picks that value. ``values`` must be finite and
    positive (ValueError otherwise); ``series`` must be one of ``SERIES`` (ValueError listing them).
    """
    return _pick(values, series, above=True)


def pick_at_or_below(values: npt.ArrayLike, series: str) -> FloatArray:
    """The largest standard value of ``series`` ≤ each value (any decade); see ``pick_at_or_above``."""
    return _pick(values, series, above=False)


def is_standard(values: npt.ArrayLike, series: str) -> BoolArray:
    """True where a value equals a standard value of ``series`` within a relative 1e-9."""
    x = _as_values(values)
    picked = pick_at_or_above(x, series)
    return np.abs(picked - x) <= REL_TOL * x


# ---- per-row helpers for calculations whose ``e_series`` input is a string array -------------------------


class _LastMasks:
    """The masks of the last names array seen: one calculation asks for them several times (validation, the
    default tolerance, the pick), always with its own ``e_series`` array, which nothing changes after. One
    tuple, replaced whole, so a thread never pairs one array with another's masks."""

    last: tuple[np.ndarray | None, dict[str, BoolArray]] = (None, {})


def _series_masks(names: np.ndarray) -> dict[str, BoolArray]:
    """Each series name present with the rows that use it; most batches use one series on every row. The
    masks are shared: read them, never change them."""
    last_names, last_masks = _LastMasks.last
    if last_names is names:
        return last_masks
    masks = _masks_of(names)
    _LastMasks.last = (names, masks)
    return masks


def _masks_of(names: np.ndarray) -> dict[str, BoolArray]:
    if not names.size:
        return {}  # no rows: no series to pick from (an empty name would be refused as unknown)
    first = str(names.flat[0])
    same = names == first
    if same.all():
        return {first: same}
    return {name: mask for name in SERIES_NAMES if (mask := names == name).any()}


def known_series(names: npt.ArrayLike) -> BoolArray:
    """True where a name is one of the series in ``SERIES``."""
    arr = np.asarray(names, dtype=str)
    known = np.zeros(arr.shape, dtype=bool)
    for name, mask in _series_masks(arr).items():
        if name in SERIES:
            known |= mask
    return known


def all_known(names: npt.ArrayLike) -> bool:
    """Whether every name is one of the series in ``SERIES`` (``known_series(names).all()``, from the cached masks)."""
    arr = np.asarray(names, dtype=str)
    masks = _series_masks(arr)
    return all(name in SERIES for name in masks) and sum(np.count_nonzero(m) for m in masks.values()) == arr.size


def require_known_series(violations: list[Violation] | Rules, names: npt.ArrayLike) -> None:
    """Record a violation of the ``e_series`` input on every row whose series name is unknown."""
    unknown = ~known_series(names)

    def message(bad: BoolArray) -> str:
        bad_name = str(np.asarray(names)[bad][0])
        return f"e_series {bad_name!r} is not a known series; use one of {', '.join(SERIES_NAMES)}"

    if isinstance(violations, Rules):
        violations.require(unknown, "e_series", message)
    elif unknown.any():
        require(violations, unknown, "e_series", message(unknown))


def default_tolerance_rows(names: npt.ArrayLike) -> FloatArray:
    """Each row's default resistor tolerance for its series name (NaN for an unknown name)."""
    arr = np.asarray(names, dtype=str)
    masks = _series_masks(arr)
    if len(masks) == 1 and (only := next(iter(masks.items())))[1].all():  # every row of one series
        return np.full(arr.shape, DEFAULT_TOLERANCE.get(only[0], np.nan))
    out = np.full(arr.shape, np.nan)
    for name, mask in masks.items():
        out[mask] = DEFAULT_TOLERANCE.get(name, np.nan)
    return out


def tolerance_rows(given: FloatArray, names: npt.ArrayLike) -> FloatArray:
    """Each row's resistor tolerance: as given, or (NaN) its series' default."""
    return np.where(np.isnan(given), default_tolerance_rows(names), given)


def _pick_rows(values: npt.ArrayLike, names: npt.ArrayLike, above: bool) -> FloatArray:
    x = np.asarray(values, dtype=np.float64)
    arr = np.asarray(names, dtype=str)
    if arr.shape != x.shape:  # a new view only where needed: the masks are cached for the names array itself
        arr = np.broadcast_to(arr, x.shape)
    if not all_known(arr):
        _check_series(str(arr[~known_series(arr)].flat[0]))
    masks = _series_masks(arr)
    if len(masks) == 1:
        return _pick(x, next(iter(masks)), above)
    out = np.empty_like(x)
    for name, sel in masks.items():  # a handful of series names, not a loop over rows
        out[sel] = _pick(x[sel], name, above)
    return out


def pick_at_or_above_rows(values: npt.ArrayLike, names: npt.ArrayLike) -> FloatArray:
    """``pick_at_or_above`` with a series name per row."""
    return _pick_rows(values, names, above=True)


def pick_at_or_below_rows(values: npt.ArrayLike, names: npt.ArrayLike) -> FloatArray:
    """``pick_at_or_below`` with a series name per row."""
    return _pick_rows(values, names, above=False)
