"""Result types shared by every calculation.

Conventions:
- Every per-row input and result is a float64 (or bool) array of shape ``(n,)``; a result with a varying number
  of values per row (a sweep) is flat, with an index array naming the row of each value.
- In an input array NaN means "not given" (the value is optional); in a result NaN means "does not apply".
- A check compares ``value`` with ``limit`` per row; ``sense`` says which side passes.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any, Literal, TypeVar

import numpy as np
import numpy.typing as npt

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]
T = TypeVar("T")


@dataclass(frozen=True)
class Violation:
    """An input that makes the calculation physically meaningless, on the rows in ``rows``."""

    field: str
    message: str
    rows: BoolArray


class DomainError(ValueError):
    """Raised when any row violates the calculation's physical preconditions."""

    def __init__(self, violations: list[Violation]) -> None:
        self.violations = violations
        super().__init__("; ".join(f"{v.field}: {v.message}" for v in violations))


@dataclass(frozen=True)
class Check:
    name: str
    ok: BoolArray
    value: FloatArray
    limit: FloatArray
    sense: Literal["max", "min"]  # "max": value must not exceed limit; "min": value must reach limit
    detail: str

    def margin(self) -> FloatArray:
        """How far inside the limit the value is, as a fraction of the limit (negative when failing)."""
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):  # a vanishing limit: infinite margin
            slack = self.limit - self.value if self.sense == "max" else self.value - self.limit
            return slack / np.abs(self.limit)


@dataclass(frozen=True)
class Notice:
    """A warning or caution that applies on the rows in ``rows``."""

    rows: BoolArray
    message: str


@dataclass(frozen=True)
class Outcome:
    results: dict[str, np.ndarray]
    checks: list[Check] = field(default_factory=list)
    warnings: list[Notice] = field(default_factory=list)
    cautions: list[Notice] = field(default_factory=list)


def rows(n: int, value: Any) -> FloatArray:
    """Broadcast a scalar or array to a float64 row array of length ``n``."""
    return np.broadcast_to(np.asarray(value, dtype=np.float64), (n,)).copy()


def row_count(inputs: object) -> int:
    """The number of rows of an inputs dataclass (the length of its array fields)."""
    for f in dataclasses.fields(inputs):  # type: ignore[arg-type]
        value = getattr(inputs, f.name)
        if isinstance(value, np.ndarray) and value.ndim >= 1:
            return int(value.shape[0])
    raise ValueError("inputs have no array field")


def take(inputs: T, mask: BoolArray) -> T:
    """The rows of an inputs dataclass selected by ``mask`` (array fields only; scalars are kept)."""
    changes = {}
    for f in dataclasses.fields(inputs):  # type: ignore[arg-type]
        value = getattr(inputs, f.name)
        if isinstance(value, np.ndarray) and value.ndim >= 1:
            changes[f.name] = value[mask]
    return dataclasses.replace(inputs, **changes)  # type: ignore[type-var]


def raise_violations(violations: list[Violation]) -> None:
    found = [v for v in violations if bool(np.any(v.rows))]
    if found:
        raise DomainError(found)


def add_notice(target: list[Notice], rows: BoolArray, message: str) -> None:
    """Append a warning or caution only when it applies to some row."""
    if rows.any():
        target.append(Notice(rows, message))


def add_notices(target: list[Notice], found: list[tuple[BoolArray, str]]) -> None:
    """``add_notice`` for each of ``found`` in order, with one reduction for all where their masks share a shape."""
    masks = [np.asarray(rows, dtype=bool) for rows, _message in found]
    if len({mask.shape for mask in masks}) == 1:
        applies = np.array(masks).any(axis=-1).tolist()
    else:
        applies = [bool(mask.any()) for mask in masks]
    target += [Notice(mask, message) for mask, (_rows, message), hit in zip(masks, found, applies, strict=True) if hit]


def first_bad(values: np.ndarray, bad: BoolArray) -> str:
    """The value on the first bad row, formatted for a message ("" when no row is bad)."""
    return f"{float(np.asarray(values)[bad][0]):g}" if bad.any() else ""


def require(violations: list[Violation], rows_bad: BoolArray, name: str, message: str) -> None:
    """Record a violation when any row is bad; NaN comparisons count as not bad, so test finiteness first."""
    bad = np.asarray(rows_bad, dtype=bool)
    if bad.any():
        violations.append(Violation(name, message, bad))


PRACTICAL_MAX = 1e30
PRACTICAL_MIN = 1e-30
"""Magnitudes (SI units) the calculations take: far beyond any circuit, and narrow enough that products,
squares and quotients of a few inputs stay finite in float64 (near 1e300 they overflow to infinity). The
lower bound applies only to inputs something is divided by: a tiny factor is harmless, a tiny divisor is not."""


def require_practical(
    violations: list[Violation],
    values: dict[str, np.ndarray],
    divisors: tuple[str, ...] = (),
    rows_of: Callable[[BoolArray], BoolArray] | None = None,
) -> None:
    """A violation for each input above PRACTICAL_MAX in magnitude, or, if in ``divisors``, below PRACTICAL_MIN.

    0 and NaN (not given) pass: other rules judge them. ``rows_of`` maps bad entries to the rows they belong to,
    for inputs that are not one per row.
    """
    rules = Rules()
    rules.practical(values, divisors, rows_of)
    violations += rules.violations()


class Rules:
    """A calculation's preconditions gathered as masks of bad rows and judged together: one reduction over all
    of them when every row is valid (the common case, and most of a one-row call's validation otherwise), and
    messages written only for the rules some row breaks, in the order the rules were given."""

    def __init__(self) -> None:
        self._rules: list[tuple[Any, str, str | Callable[[BoolArray], str], tuple[Any, ...], Any]] = []

    def require(
        self,
        rows_bad: npt.ArrayLike,
        name: str,
        message: str | Callable[[BoolArray], str],
        *values: npt.ArrayLike,
        rows_of: Callable[[BoolArray], BoolArray] | None = None,
    ) -> None:
        """A violation of ``name`` where ``rows_bad``; each ``{}`` in ``message`` is filled with the matching
        value's entry on the first bad row (``%g``), or ``message`` is called with the mask. NaN comparisons
        count as not bad, so test finiteness first."""
        self._rules.append((rows_bad, name, message, values, rows_of))

    def finite(self, values: dict[str, npt.ArrayLike]) -> None:
        """Each of ``values`` must be a finite number (NaN, "not given", included)."""
        finite = _each(np.isfinite, values)
        for (name, x), ok in zip(values.items(), finite, strict=True):
            self.require(~ok, name, f"{name} must be a finite number (got {{}})", x)

    def practical(
        self,
        values: dict[str, np.ndarray],
        divisors: tuple[str, ...] = (),
        rows_of: Callable[[BoolArray], BoolArray] | None = None,
    ) -> None:
        """The magnitudes this service computes with (``require_practical``)."""
        sizes = _each(np.abs, values)
        big = _each(lambda x: (x > PRACTICAL_MAX) & (x < np.inf), sizes)
        tiny = _each(lambda x: (x > 0.0) & (x < PRACTICAL_MIN), sizes) if divisors else []
        for j, (name, x) in enumerate(values.items()):
            bad, limits = big[j], f"at most {PRACTICAL_MAX:g}"
            if name in divisors:
                bad, limits = bad | tiny[j], f"{PRACTICAL_MIN:g} to {PRACTICAL_MAX:g}"
            message = f"{name} ({{}}) lies outside the magnitudes this service computes with ({limits} in SI units)"
            self.require(bad, name, message, x, rows_of=rows_of)

    def violations(self) -> list[Violation]:
        if not self._rules or not np.concatenate([rule[0] for rule in self._rules], axis=None).any():
            return []
        found: list[Violation] = []
        for rows_bad, name, message, values, rows_of in self._rules:
            bad = np.asarray(rows_bad, dtype=bool)
            if not bad.any():
                continue
            text = message(bad) if callable(message) else message.format(*(first_bad(x, bad) for x in values))
            found.append(Violation(name, text, bad if rows_of is None else rows_of(bad)))
        return found


def stacked_rows(inputs: object, names: tuple[str, ...]) -> FloatArray | None:
    """The named row arrays of ``inputs`` as one array of shape ``(len(names), n)``, for a test over all of them
    in one operation; None unless each is a row array of the same length (rules then judge them one by one)."""
    arrays = [getattr(inputs, name) for name in names]
    n = arrays[0].shape
    if len(n) != 1 or any(a.shape != n for a in arrays):
        return None
    return np.array(arrays, dtype=np.float64)


def _each(operation: Callable[[Any], Any], values: Any) -> Any:
    """``operation`` applied to each of ``values`` (a dict's values, a list, or a 2-D array's rows): once over all
    of them stacked where they share one shape, since a one-row call's cost is per numpy operation."""
    arrays = list(values.values()) if isinstance(values, dict) else values
    if isinstance(arrays, np.ndarray):
        return operation(arrays)
    arrays = [np.asarray(x, dtype=np.float64) for x in arrays]
    if len({a.shape for a in arrays}) == 1:
        return operation(np.array(arrays))
    return [operation(a) for a in arrays]
