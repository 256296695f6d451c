"""One role of one calculation searched: every candidate part through the core in one vectorized pass, with the
checks of any required calculation too."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from calcsvc.core.outcome import BoolArray, FloatArray, Outcome
from calcsvc.core.spec import CalculationSpec, Role
from calcsvc.data.store import PartView
from calcsvc.service.calculate import columns_of
from calcsvc.service.envelope import row_notices, row_results, to_json_value
from calcsvc.service.search.common import (
    IMPOSSIBLE,
    IMPOSSIBLE_DETAIL,
    on_accepted,
    part_columns,
    problem_of,
    refuse_shared,
    shared_inputs,
    unapproved,
)
from calcsvc.service.search.ranking import DEFAULT_RANKING, IntArray, Ranking, RowCheck, Scores, rank, score


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
            "margin": to_json_value(float(self.scores.margin[row])),
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
    ranking: Ranking = DEFAULT_RANKING,
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
