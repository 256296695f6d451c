"""What a calculation declares about itself: inputs with units and ranges, the part roles that may supply them,
and results with their type and unit. The HTTP schemas, the OpenAPI document, batch columns, CSV headers, the
query-string form, the command line, the searches and the plots are all derived from these declarations.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Collection
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from calcsvc.core.eseries import SERIES
from calcsvc.core.outcome import Outcome, Violation

Columns = dict[str, np.ndarray]
E_SERIES = tuple(SERIES)


@dataclass(frozen=True)
class Input:
    name: str
    unit: str  # pint spelling of the SI unit; "" for a choice
    description: str
    default: float | str | None = None
    optional: bool = False  # may stay absent (NaN to the core)
    minimum: float | None = None
    exclusive_minimum: bool = False
    maximum: float | None = None
    integer: bool = False
    choices: tuple[str, ...] = ()
    max_length: int | None = None  # a text input (a name), not a quantity
    flag: bool = False  # a yes/no input, not a quantity

    @property
    def required(self) -> bool:
        return self.default is None and not self.optional

    def refusals(self, values: np.ndarray) -> list[tuple[np.ndarray, str]]:
        """The range rules over a column of given values (NaN: not given): (rows, message) pairs, each row
        refused once, for its first broken rule. Single requests and batches both take their messages from here.
        """
        unit = "" if self.unit == "dimensionless" else f" {self.unit}"
        finite = np.isfinite(values)
        rules: list[tuple[np.ndarray, str]] = []
        with np.errstate(invalid="ignore"):
            if self.integer:
                rules.append((values != np.round(values), "must be a whole number"))
            if self.minimum is not None:
                low = values <= self.minimum if self.exclusive_minimum else values < self.minimum
                relation = "greater than" if self.exclusive_minimum else "at least"
                rules.append((low, f"must be {relation} {self.minimum:g}{unit}"))
            if self.maximum is not None:
                rules.append((values > self.maximum, f"must be at most {self.maximum:g}{unit}"))
        refused = np.isinf(values)
        found = [(refused, "must be a finite number")] if refused.any() else []
        for rows, message in rules:
            rows = rows & finite & ~refused
            if rows.any():
                found.append((rows, message))
                refused |= rows
        return found

    def refusal(self, value: float) -> str | None:
        """``refusals`` of one given value, with plain floats (a single request's field): the message of its first
        broken rule, or None. Same rules, same order, same messages, without numpy's per-call cost."""
        if math.isinf(value):
            return "must be a finite number"
        if math.isnan(value):
            return None
        unit = "" if self.unit == "dimensionless" else f" {self.unit}"
        if self.integer and value != round(value):
            return "must be a whole number"
        if self.minimum is not None and (value <= self.minimum if self.exclusive_minimum else value < self.minimum):
            relation = "greater than" if self.exclusive_minimum else "at least"
            return f"must be {relation} {self.minimum:g}{unit}"
        if self.maximum is not None and value > self.maximum:
            return f"must be at most {self.maximum:g}{unit}"
        return None


@dataclass(frozen=True)
class Role:
    """A part that may supply some inputs: ``provides`` maps part parameters to input names."""

    name: str
    kind: str
    provides: tuple[tuple[str, str], ...]
    must_have: tuple[tuple[str, str], ...] = ()  # (parameter, value) the part must carry, e.g. polarity npn


ResultType = Literal["number", "boolean", "sweep", "records"]


@dataclass(frozen=True)
class Result:
    """A declared result: a number per row (NaN: does not apply), a flag per row, a sweep of arrays per row, or
    records (one object per item of a list input, such as the loads of a supply budget)."""

    name: str
    unit: str  # as people read it ("V", "ohm", "%"); "" for a plain ratio
    description: str
    type: ResultType = "number"

    @property
    def scalar(self) -> bool:
        return self.type in ("number", "boolean")

    @property
    def text(self) -> str:
        return f"{self.description} [{self.unit}]" if self.unit else self.description


@dataclass(frozen=True)
class InputSet:
    """The inputs of an operation and the part roles that may supply them."""

    name: str
    summary: str
    version: str
    inputs: tuple[Input, ...]
    roles: tuple[Role, ...]

    def accepted(self) -> list[str]:
        """Every name a request may give: the inputs, and each role's part_id and revision."""
        names = [spec.name for spec in self.inputs]
        for role in self.roles:
            names += [role.name, f"{role.name}_revision"]
        return names


@dataclass(frozen=True)
class CalculationSpec(InputSet):
    """A row-wise calculation of the core: every input is one column, every result one column (or a sweep)."""

    results: tuple[Result, ...]
    make_inputs: Callable[[Columns], Any]
    validate: Callable[[Any], list[Violation]]
    compute: Callable[[Any], Outcome]

    def scalar_results(self) -> list[str]:
        return [result.name for result in self.results if result.scalar]


@dataclass(frozen=True)
class Samples:
    """Equal-length arrays that sample one period (a load's current waveform)."""

    name: str
    description: str
    arrays: tuple[Input, ...]
    min_length: int
    max_length: int


@dataclass(frozen=True)
class Items:
    """A list input whose items carry inputs of their own (the loads on a supply). ``describe`` is the rule of
    which inputs together describe one item: it names the field and the fault of an item described wrongly."""

    name: str
    description: str
    inputs: tuple[Input, ...]
    samples: Samples
    min_items: int
    max_items: int
    describe: Callable[[Collection[str]], tuple[str, str] | None]


@dataclass(frozen=True)
class BudgetSpec(InputSet):
    """A calculation over one row of inputs and a list of items (a supply and its loads); results per row, and
    per item as records."""

    items: Items
    results: tuple[Result, ...]

    def accepted(self) -> list[str]:
        return [*super().accepted(), self.items.name]


def positive(name: str, unit: str, description: str, **kwargs: Any) -> Input:
    return Input(name, unit, description, minimum=0, exclusive_minimum=True, **kwargs)


def fraction(name: str, description: str, **kwargs: Any) -> Input:
    return Input(name, "dimensionless", description, minimum=0, maximum=1, **kwargs)


def columns_as(cls: type, columns: Columns) -> Any:
    """The core's input dataclass from the columns named like its fields."""
    return cls(**{name: columns[name] for name in cls.__dataclass_fields__})
