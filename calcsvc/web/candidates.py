"""Candidate search: every part that may fill a role, through the core in one vectorized pass.

A search holds fixed every input except those one role provides (for a whole channel: several roles), so
the candidates' parameters become numpy columns, one row per candidate (per combination of candidates for
a channel), and go through the same calculation table, completion, validation and core compute as a
single request or a batch. Explicit values still win over every candidate's, as in a single request.

A row the core refuses (physically impossible, e.g. LEDs whose forward voltage exceeds the supply) fails
the pseudo-check ``physically_possible`` with the core's own words; it never fails the search.

Ranking: passing rows first, then failing ones, then refused ones. Passing rows by the least margin over
every check (descending) or by a chosen result; ties by that margin descending, then by the next-least
margin and so on, then by part_id (for a channel: the parts' ids in role order). Failing and refused rows by
margin in the same way (the nearest miss first).

Nothing here needs the database: ``search_role`` and ``search_channel`` take in-memory ``PartView`` lists,
which is also how a benchmark calls them.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Collection, Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any, TypeVar

import numpy as np
import numpy.typing as npt

from calcsvc.core import channel, tolerance
from calcsvc.core.outcome import BoolArray, DomainError, FloatArray, Outcome, Violation, row_count, take
from calcsvc.core.spec import CalculationSpec, Columns, InputSet, Role
from calcsvc.data.store import PartView
from calcsvc.service.calculate import columns_of, complete
from calcsvc.service.envelope import plain, row_notices, row_results
from calcsvc.web.review_api import REVIEW, YieldSchema, channel_inputs

T = TypeVar("T")
R = TypeVar("R")
IntArray = npt.NDArray[np.intp]

DEFAULT_STATUSES = ("approved",)
IMPOSSIBLE = "physically_possible"
IMPOSSIBLE_DETAIL = (
    "The core accepts the inputs as physically possible; where it does not, the candidate fails this check "
    "and its problem gives the core's reasons (e.g. LEDs whose forward voltage exceeds the supply)."
)
YIELD_SHORTLIST = 10  # Monte Carlo runs for this many designs at most, the best by worst-case margin


@dataclass(frozen=True)
class PartFilter:
    """The parts that may fill a role: current parts of ``statuses`` whose parameters lie within ``where``
    (inclusive SI bounds; a part without the parameter does not match), or the parts listed in ``part_ids``."""

    statuses: tuple[str, ...] = DEFAULT_STATUSES
    where: dict[str, tuple[float | None, float | None]] = field(default_factory=dict)
    part_ids: tuple[str, ...] | None = None

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
        return {"status": list(self.statuses), "where": bounds}


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


# ---- scoring and ranking -----------------------------------------------------------------------------------


@dataclass(frozen=True)
class RowCheck:
    """One check on the accepted rows (``rows`` masks them among all rows); ``applies`` is False where its
    limit is unknown (e.g. a pin rating not given), as in a single request's check list."""

    name: str
    rows: BoolArray
    ok: BoolArray
    margin: FloatArray
    applies: BoolArray


@dataclass(frozen=True)
class Scores:
    """Per row: refused by the core, every check passes, the check of least margin (index into ``names``;
    -1 where none applies) and that margin (NaN where none applies). ``ladder`` holds each row's margins in
    ascending order (+inf for a check that does not apply), to break ties of the least margin by the next."""

    names: list[str]
    refused: BoolArray
    ok: BoolArray
    limiting: IntArray
    margin: FloatArray
    ladder: FloatArray

    def limiting_name(self, row: int) -> str | None:
        index = int(self.limiting[row])
        return None if index < 0 else self.names[index]


def score(refused: BoolArray, checks: list[RowCheck]) -> Scores:
    n = refused.shape[0]
    margins = np.full((n, len(checks)), np.inf)
    applies = np.zeros((n, len(checks)), dtype=bool)
    ok = ~refused
    for j, check in enumerate(checks):
        margin = np.where(np.isnan(check.margin), 0.0, check.margin)  # 0/0: a value on a zero limit is on the edge
        margins[check.rows, j] = np.where(check.applies, margin, np.inf)
        applies[check.rows, j] = check.applies
        ok[check.rows] &= check.ok
    limiting = np.argmin(margins, axis=1) if checks else np.zeros(n, dtype=np.intp)
    least = margins[np.arange(n), limiting] if checks else np.full(n, np.nan)
    none = ~applies.any(axis=1)
    limiting[none] = -1
    least[none] = np.nan
    return Scores([c.name for c in checks], refused, ok, limiting, least, np.sort(margins, axis=1))


@dataclass(frozen=True)
class Ranking:
    """``rank_by``: "margin" or a result column name; ``limit`` caps the rows listed."""

    rank_by: str = "margin"
    descending: bool = True
    limit: int = 20
    only_passing: bool = False


def rank(scores: Scores, key: FloatArray, descending: bool, count: int, only_passing: bool = False) -> IntArray:
    """The first ``count`` rows, best first (module docstring): passing rows by ``key`` (NaN last), failing
    ones after them, refused ones last; ties by least margin descending, then by the next-least margin and
    so on (a check every row shares, e.g. a fixed driver's, then does not hide the differences), then by row."""
    group = np.where(scores.ok, 0, np.where(scores.refused, 2, 1))
    signed = -key if descending else key
    by_key = np.where(scores.ok & ~np.isnan(signed), signed, np.inf)
    keys = [group, by_key, *(-scores.ladder.T), np.arange(group.shape[0])]
    return first_in_order(np.flatnonzero(scores.ok) if only_passing else np.arange(group.shape[0]), keys, count)


def first_in_order(rows: IntArray, keys: list[np.ndarray], count: int) -> IntArray:
    """The first ``count`` of ``rows`` in the lexicographic order of ``keys`` (most significant first, no
    NaN, the last unique). Partitions instead of sorting every row: each key keeps only the rows that can
    still make the cut, so the work is linear in the rows and a full sort runs on ``count`` of them."""
    if count <= 0:
        return rows[:0]
    sure: list[IntArray] = []
    need = count
    for key in keys:
        if rows.size <= need:
            break
        values = key[rows]
        threshold = np.partition(values, need - 1)[need - 1]
        better = rows[values < threshold]  # fewer than need: all of them make the cut
        sure.append(better)
        need -= better.size
        rows = rows[values == threshold]  # the ties at the cut, decided by the next key
    pool = np.concatenate([*sure, rows])
    return pool[np.lexsort([key[pool] for key in reversed(keys)])][:count]


# ---- one role ----------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Requirement:
    """A calculation whose checks every candidate must also pass, with its own resolved inputs; ``field``
    prefixes the names of its inputs in errors (e.g. "require.0.inputs.")."""

    calc: CalculationSpec
    values: dict[str, Any]
    field: str = ""


@dataclass(frozen=True)
class Evaluated:
    """One calculation over every candidate: the core's inputs, the rows it accepted and their outcome."""

    calc: CalculationSpec
    prefix: str  # "" for the searched calculation, "<name>." for a required one
    inputs: Any
    shared: dict[str, Any]  # the inputs every row shares
    provided: list[str]  # the inputs the candidates provide
    accepted: BoolArray
    outcome: Outcome | None  # over the accepted rows; None when there are none

    def position(self, row: int) -> int:
        """The row's index among the accepted rows (the outcome's row)."""
        return int(np.count_nonzero(self.accepted[:row]))

    def checks(self) -> list[RowCheck]:
        if self.outcome is None:
            return []
        return [
            RowCheck(self.prefix + c.name, self.accepted, c.ok, c.margin(), ~np.isnan(c.limit))
            for c in self.outcome.checks
        ]

    def column(self, result: str) -> FloatArray:
        """A result over every row, NaN where the core refused the row."""
        values = np.full(self.accepted.shape[0], np.nan)
        if self.outcome is not None:
            values[self.accepted] = self.outcome.results[result]
        return values


def evaluate(
    calc: CalculationSpec,
    values: dict[str, Any],
    role: Role,
    parts: Sequence[PartView],
    prefix: str = "",
    field: str = "",
) -> Evaluated:
    """``calc`` with each part in ``role`` in turn, as one vectorized pass of the core."""
    provided = part_columns(calc, role, parts, values.keys())
    shared = shared_inputs(calc, values, provided)
    one = columns_of(calc, [shared])
    unknown = {name: np.full(1, np.nan) for name in provided}
    refuse_shared(calc.make_inputs({**one, **unknown}), calc.validate, provided, field)
    n = len(parts)
    columns = {name: np.repeat(column, n) for name, column in one.items()}
    columns.update(provided)
    inputs = calc.make_inputs(columns)
    accepted, outcome = on_accepted(inputs, calc.compute)
    common = {k: v for k, v in shared.items() if k not in provided}
    return Evaluated(calc, prefix, inputs, common, list(provided), accepted, outcome)


@dataclass(frozen=True)
class RoleSearch:
    role: Role
    parts: list[PartView]
    evaluations: list[Evaluated]
    scores: Scores
    rows: IntArray  # the listed rows, best first

    def check_details(self) -> dict[str, str]:
        details = {f"{e.prefix}{c.name}": c.detail for e in self.evaluations if e.outcome for c in e.outcome.checks}
        return {**details, IMPOSSIBLE: IMPOSSIBLE_DETAIL}

    def entry(self, row: int) -> dict[str, Any]:
        part = self.parts[row]
        entry: dict[str, Any] = {
            "part_id": part.part_id,
            "revision": part.revision,
            "status": part.status,
            "ok": bool(self.scores.ok[row]),
            "limiting_check": self.scores.limiting_name(row),
            "margin": plain(float(self.scores.margin[row])),
            "failing": [],
        }
        results: list[dict[str, Any] | None] = []
        problem: dict[str, list[str]] = {}
        warnings = (
            [] if part.status == "approved" else [unapproved(self.role.name, part.part_id, part.revision, part.status)]
        )
        cautions: list[str] = []
        for e in self.evaluations:
            if not e.accepted[row] or e.outcome is None:
                entry["failing"].append(e.prefix + IMPOSSIBLE)
                problem.update(problem_of(e.inputs, e.calc.validate, row, e.prefix))
                results.append(None)
                continue
            k = e.position(row)
            entry["failing"] += [e.prefix + c.name for c in e.outcome.checks if not bool(c.ok[k])]
            results.append(row_results(e.outcome, k, e.calc.scalar_results()))
            warnings += row_notices(e.outcome.warnings, k)
            cautions += row_notices(e.outcome.cautions, k)
        entry["results"] = results[0]
        if len(self.evaluations) > 1:
            entry["required_results"] = {
                e.calc.name: found for e, found in zip(self.evaluations[1:], results[1:], strict=True)
            }
        if problem:
            entry["problem"] = problem
        entry["warnings"] = list(dict.fromkeys(warnings))
        entry["cautions"] = list(dict.fromkeys(cautions))
        return entry


def search_role(
    calc: CalculationSpec,
    values: dict[str, Any],
    role: Role,
    parts: Sequence[PartView],
    required: Sequence[Requirement] = (),
    ranking: Ranking = Ranking(),
) -> RoleSearch:
    """Every part in ``parts`` in ``role`` of ``calc`` (and of each required calculation), scored and ranked.

    ``values`` are the request's inputs in SI with any other role's part already resolved into them.
    ``ranking.rank_by`` names "margin", a scalar result of ``calc``, or "<calculation>.<result>" of a required one.
    """
    parts = sorted(parts, key=lambda p: p.part_id)
    evaluations = [evaluate(calc, values, role, parts)]
    for requirement in required:
        own = next(r for r in requirement.calc.roles if r.name == role.name)
        prefix = f"{requirement.calc.name}."
        evaluations.append(evaluate(requirement.calc, requirement.values, own, parts, prefix, requirement.field))
    refused = np.zeros(len(parts), dtype=bool)
    for e in evaluations:
        refused |= ~e.accepted
    scores = score(refused, [c for e in evaluations for c in e.checks()])
    key = scores.margin
    if ranking.rank_by != "margin":
        prefix, _, result = ranking.rank_by.rpartition(".")
        source = next(e for e in evaluations if e.prefix == (prefix + "." if prefix else ""))
        key = source.column(result)
    rows = rank(scores, key, ranking.descending, ranking.limit, ranking.only_passing)
    return RoleSearch(role, list(parts), evaluations, scores, rows)


# ---- a whole channel ---------------------------------------------------------------------------------------

# Key numbers of a design at nominal values: (section of the review, result).
NUMBERS = {
    "resistor_ohm": ("led_string", "resistor_ohm"),
    "string_current_a": ("led_string", "current_a"),
    "rb_ohm": ("switch", "rb_ohm"),
    "drive_current_a": ("switch", "drive_current_a"),
    "transistor_power_w": ("switch", "transistor_power_w"),
    "supply_average_current_a": ("supply", "average_current_a"),
    "supply_power_w": ("supply", "average_power_w"),
}
CHANNEL_RANKINGS = ("margin", "supply_power_w", "yield")


@dataclass(frozen=True)
class ChannelSearch:
    roles: list[Role]  # the searched roles, in the review's role order
    parts: dict[str, list[PartView]]
    shared: dict[str, Any]
    index: tuple[IntArray, ...]  # per searched role, each combination's part
    inputs: channel.ChannelInputs
    accepted: BoolArray
    worst: tolerance.WorstCase | None  # over the accepted rows
    scores: Scores
    rows: IntArray
    yields: dict[int, tolerance.Yield]

    def position(self, row: int) -> int:
        return int(np.count_nonzero(self.accepted[:row]))

    def parts_of(self, row: int) -> list[PartView]:
        return [self.parts[role.name][int(self.index[j][row])] for j, role in enumerate(self.roles)]

    def entry(self, row: int) -> dict[str, Any]:
        used = [
            {"role": role.name, "part_id": part.part_id, "revision": part.revision, "status": part.status}
            for role, part in zip(self.roles, self.parts_of(row), strict=True)
        ]
        entry: dict[str, Any] = {
            "parts": used,
            "verdict": "pass" if self.scores.ok[row] else "fail",
            "limiting_check": self.scores.limiting_name(row),
            "margin": plain(float(self.scores.margin[row])),
            "failing": [],
            "numbers": None,
            "yield": None,
            "warnings": [unapproved(**p) for p in used if p["status"] != "approved"],
            "cautions": [],
        }
        if not self.accepted[row] or self.worst is None:
            entry["failing"] = [IMPOSSIBLE]
            entry["problem"] = problem_of(self.inputs, channel.validate, row)
            return entry
        k = self.position(row)
        nominal = self.worst.nominal
        entry["failing"] = [c.name for c in self.worst.checks if not bool(c.check.ok[k])]
        numbers = {key: plain(getattr(nominal, stage).results[name][k]) for key, (stage, name) in NUMBERS.items()}
        entry["numbers"] = {**numbers, "max_duty_cycle": plain(float(nominal.max_duty_cycle[k]))}
        entry["warnings"] += row_notices(nominal.warnings, k)
        entry["cautions"] = row_notices(nominal.cautions, k)
        if row in self.yields:
            entry["yield"] = YieldSchema().dump(self.yields[row])
        return entry


def combinations(parts: dict[str, list[PartView]]) -> int:
    return math.prod(len(p) for p in parts.values())


def search_channel(
    values: dict[str, Any],
    parts: dict[str, Sequence[PartView]],
    samples: int = 0,
    seed: int = 0,
    ranking: Ranking = Ranking(),
) -> ChannelSearch:
    """Every combination of the candidates of the searched roles (``parts`` by role name), reviewed as the
    single review does (resistors chosen per combination), worst case over tolerance corners for all of
    them, and, with ``samples``, Monte Carlo yield for the best few (``YIELD_SHORTLIST``).

    ``values`` are the review's inputs in SI with any fixed role's part already resolved into them, without
    ``samples`` and ``seed``. ``ranking.rank_by``: "margin", "supply_power_w" (average supply power,
    ascending) or "yield" (needs ``samples``).
    """
    roles = [role for role in REVIEW.roles if role.name in parts]
    if not roles:
        raise ValueError("search at least one role")
    chosen = {role.name: sorted(parts[role.name], key=lambda p: p.part_id) for role in roles}
    provided = {role.name: part_columns(REVIEW, role, chosen[role.name], values.keys()) for role in roles}
    from_parts = {name for columns in provided.values() for name in columns}
    shared = shared_inputs(REVIEW, values, from_parts)
    one = channel_inputs(shared)
    refuse_shared(
        dataclasses.replace(one, **dict.fromkeys(from_parts, np.full(1, np.nan))), channel.validate, from_parts, ""
    )
    shape = tuple(len(chosen[role.name]) for role in roles)
    n = math.prod(shape)
    index = np.unravel_index(np.arange(n), shape)
    inputs = take(one, np.zeros(n, dtype=np.intp))
    inputs = dataclasses.replace(
        inputs,
        **{name: column[index[j]] for j, role in enumerate(roles) for name, column in provided[role.name].items()},
    )
    accepted, worst = on_accepted(inputs, tolerance.worst_case)
    checks = []
    if worst is not None:
        checks = [
            RowCheck(c.name, accepted, w.check.ok, w.margin(), ~np.isnan(c.limit))
            for c, w in zip(worst.nominal.checks, worst.checks, strict=True)
        ]
    scores = score(~accepted, checks)
    key = scores.margin
    if ranking.rank_by == "supply_power_w":
        key = np.full(n, np.nan)
        if worst is not None:
            key[accepted] = worst.nominal.supply.results["average_power_w"]
    count = max(ranking.limit, YIELD_SHORTLIST) if samples else ranking.limit
    rows = rank(scores, key, ranking.rank_by != "supply_power_w", count, ranking.only_passing)
    yields: dict[int, tolerance.Yield] = {}
    if samples:
        shortlist = [int(row) for row in rows[accepted[rows]][:YIELD_SHORTLIST]]
        for row in shortlist:
            yields[row] = tolerance.monte_carlo(take(inputs, np.array([row])), samples, seed)
        if ranking.rank_by == "yield":
            # The shortlist re-ranked by yield (a stable sort: ties keep their order); the rest after it.
            first = sorted(shortlist, key=lambda row: -yields[row].fraction)
            rows = np.concatenate([np.array(first, dtype=np.intp), rows[~np.isin(rows, first)]])
    common = {k: v for k, v in shared.items() if k not in from_parts}
    return ChannelSearch(roles, chosen, common, index, inputs, accepted, worst, scores, rows[: ranking.limit], yields)
