"""What every search shares: which parts may fill a role, their parameters as input columns, the inputs every
candidate shares, and the core's refusals kept to the candidates they concern."""

from __future__ import annotations

import math
from collections.abc import Callable, Collection, Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any, TypeVar

import numpy as np

from calcsvc.core.outcome import BoolArray, DomainError, Violation, row_count, take
from calcsvc.core.spec import Columns, InputSet, Role
from calcsvc.data.store import PartView
from calcsvc.service.calculate import complete

T = TypeVar("T")
R = TypeVar("R")

DEFAULT_STATUSES = ("approved",)
IMPOSSIBLE = "physically_possible"
IMPOSSIBLE_DETAIL = (
    "The core accepts the inputs as physically possible; where it does not, the candidate fails this check "
    "and its problem gives the core's reasons (e.g. LEDs whose forward voltage exceeds the supply)."
)


@dataclass(frozen=True)
class PartFilter:
    """The parts that may fill a role: current parts of ``statuses`` whose parameters lie within ``where``
    (inclusive SI bounds; a part without the parameter does not match), or the parts listed in ``part_ids``.
    ``kinds``: the part kinds a filter reads, for a role that takes several (None: the role's own kind)."""

    statuses: tuple[str, ...] = DEFAULT_STATUSES
    where: dict[str, tuple[float | None, float | None]] = field(default_factory=dict)
    part_ids: tuple[str, ...] | None = None
    kinds: tuple[str, ...] | None = None

    def matches(self, part: PartView) -> bool:
        if self.part_ids is not None:
            return part.part_id in self.part_ids
        if part.status not in self.statuses:
            return False
        for name, (low, high) in self.where.items():
            value = part.parameters.get(name)
            if isinstance(value, bool) or not isinstance(value, int | float):
                return False
            if (low is not None and value < low) or (high is not None and value > high):
                return False
        return True

    def describe(self) -> dict[str, Any]:
        if self.part_ids is not None:
            return {"part_ids": list(self.part_ids)}
        bounds = {
            name: {key: value for key, value in (("min", low), ("max", high)) if value is not None}
            for name, (low, high) in self.where.items()
        }
        found: dict[str, Any] = {"status": list(self.statuses), "where": bounds}
        if self.kinds is not None:
            found["kind"] = list(self.kinds)
        return found


def choose(
    parts: Iterable[PartView], chosen: PartFilter, roles: Sequence[Role]
) -> tuple[list[PartView], list[dict[str, Any]]]:
    """The candidates (by part_id) among ``parts`` that ``chosen`` matches, and the matching parts a role
    refuses, each with its reason. ``roles`` are the roles the candidates fill, one per calculation."""
    kept: list[PartView] = []
    excluded: list[dict[str, Any]] = []
    for part in sorted(parts, key=lambda p: p.part_id):
        if not chosen.matches(part):
            continue
        reasons = [
            f"{parameter} is {part.parameters.get(parameter)!r}; the {role.name} role needs {wanted!r}"
            for role in roles
            for parameter, wanted in role.must_have
            if part.parameters.get(parameter) != wanted
        ]
        if part.status == "retired" and chosen.part_ids is not None:
            reasons.append("retired: list it by a filter with status retired, or pin its revision in a review")
        if reasons:
            entry = {"part_id": part.part_id, "revision": part.revision, "status": part.status}
            excluded.append({**entry, "reason": "; ".join(dict.fromkeys(reasons))})
        else:
            kept.append(part)
    return kept, excluded


def part_columns(form: InputSet, role: Role, parts: Sequence[PartView], given: Collection[str]) -> Columns:
    """The inputs ``role`` provides, one value per part, leaving out those in ``given`` (explicit values and
    other roles' parts win, as in a single request). A part without an optional parameter leaves the
    input's default, or NaN (not given)."""
    specs = {spec.name: spec for spec in form.inputs}
    columns: Columns = {}
    for parameter, name in role.provides:
        if name in given:
            continue
        raw = [part.parameters.get(parameter) for part in parts]
        column = np.array([math.nan if value is None else value for value in raw], dtype=np.float64)
        if specs[name].default is not None:
            column[np.isnan(column)] = specs[name].default
        columns[name] = column
    return columns


def shared_inputs(form: InputSet, values: dict[str, Any], provided: Collection[str]) -> dict[str, Any]:
    """The inputs every row shares, completed as a single request completes them (a 422 names a required
    input nobody gives). Inputs the candidates provide hold a placeholder until their columns replace it."""
    return complete(form, {**dict.fromkeys(provided, 0.0), **values})


def refuse_shared(inputs: T, validate: Callable[[T], list[Violation]], provided: Collection[str], prefix: str) -> None:
    """Raise DomainError for what is wrong whatever the candidates are: ``inputs`` is one row with the
    candidates' inputs unknown (NaN), and an objection to an input they do not provide is the request's
    own, answered with a 422 as a single request would be (e.g. no gain given), not pinned on every candidate."""
    found = [v for v in validate(inputs) if v.field not in provided and v.rows.any()]
    if found:
        raise DomainError([Violation(prefix + v.field, v.message, v.rows) for v in found])


def on_accepted(inputs: T, compute: Callable[[T], R]) -> tuple[BoolArray, R | None]:
    """``compute`` on the rows the core accepts, which rows those are, and None when it accepts none.

    ``compute`` validates its rows itself and raises DomainError naming the rows it refuses; those are dropped
    and it runs again on the rest, until it succeeds (some rules run only once nothing else is wrong). So, as
    in a batch, a refused row never fails the others, and an all-valid table is validated only once."""
    accepted = np.ones(row_count(inputs), dtype=bool)
    while accepted.any():
        try:
            return accepted, compute(inputs if accepted.all() else take(inputs, accepted))
        except DomainError as error:
            refused = np.zeros(int(accepted.sum()), dtype=bool)
            for violation in error.violations:
                refused |= violation.rows
            if not refused.any():
                raise
            accepted[np.flatnonzero(accepted)[refused]] = False
    return accepted, None


def problem_of(inputs: T, validate: Callable[[T], list[Violation]], row: int, prefix: str = "") -> dict[str, list[str]]:
    """The core's objections to one row in that row's own numbers (a message for many rows quotes the first)."""
    found: dict[str, list[str]] = {}
    for violation in validate(take(inputs, np.array([row]))):
        found.setdefault(prefix + violation.field, []).append(violation.message)
    return found


def unapproved(role: str, part_id: str, revision: int, status: str) -> str:
    """The warning a single request gives for a part that is not approved."""
    return f"{role} '{part_id}' revision {revision} is {status}, not approved"
