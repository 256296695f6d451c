"""Many saved designs reviewed in one pass, for the watch list and the impact of a part edit.

Each design is a request with every part pinned to a revision (its own, today's approved one, or a draft put in
its place). The part revisions are read once for all of them; the requests are resolved as a single request
would be; then the designs of each calculation go through the core together: a channel's nominal review and
worst-case corners are vectorised over rows, as a calculation's compute is. The Monte Carlo is not run: the
verdict, the failing checks and the margins are the worst-case checks' (the review's yield is drawn per design
and changes none of them). A design the core refuses is refused alone, with the core's reasons."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
from sqlalchemy.orm import Session

from calcsvc.core import channel, worst_case
from calcsvc.core.channel_spec import ALTERNATIVE_ROLES, CHANNEL_INPUTS
from calcsvc.core.registry import CALCULATIONS
from calcsvc.core.spec import InputSet
from calcsvc.data.bulk_parts import revisions_of
from calcsvc.service.calculate import columns_of, complete
from calcsvc.service.design_outcome import check_entry, refused, summary
from calcsvc.service.envelope import fingerprint, row_notices, to_json_value
from calcsvc.service.errors import ServiceError
from calcsvc.service.resolve import PartResolver, resolve
from calcsvc.service.review import channel_rows, complete_channel, switch_kind_of, without_band
from calcsvc.service.search.common import on_accepted, problem_of

CHANNEL = "channel"  # a saved design of the whole-channel review; otherwise the calculation's name


def form_of(calculation: str) -> InputSet:
    """The inputs a design of ``calculation`` holds (the channel review's, or one calculation's)."""
    return CHANNEL_INPUTS if calculation == CHANNEL else CALCULATIONS[calculation]


def pinned(inputs: Mapping[str, Any], revisions: Mapping[str, int]) -> dict[str, Any]:
    """``inputs`` with each role's part pinned: ``revisions`` by role name."""
    return {**inputs, **{f"{role}_revision": revision for role, revision in revisions.items()}}


@dataclass(frozen=True)
class Request:
    calculation: str
    body: dict[str, Any]  # inputs in SI, every referenced part pinned to a revision


def _identity(calculation: str) -> tuple[str, str]:
    """The name and version a design's fingerprint is made with, as its single review makes it."""
    if calculation == CHANNEL:
        return channel.NAME, channel.VERSION
    return CALCULATIONS[calculation].name, CALCULATIONS[calculation].version


def _resolved(request: Request, resolver: PartResolver) -> tuple[dict[str, Any], list[dict[str, Any]], list[str]]:
    """Completed values, the parts used and their standing cautions (a supply's kind)."""
    form = form_of(request.calculation)
    if request.calculation == CHANNEL:
        found = without_band(request.body, resolve(form.roles, request.body, resolver, ALTERNATIVE_ROLES))
        return complete_channel(found.values), found.parts, found.cautions
    found = resolve(form.roles, request.body, resolver)
    return complete(form, found.values), found.parts, found.cautions


def _rows_of_checks(names: list[str], applies: list[Any], numbers: list[tuple[Any, Any, Any, Any]]) -> list[Any]:
    """Per row, the checks that apply there, each with its (ok, value, limit, margin): arrays in, rows out."""
    columns = [
        (name, a.tolist(), ok.tolist(), to_json_value(value), to_json_value(limit), to_json_value(margin))
        for name, a, (ok, value, limit, margin) in zip(names, applies, numbers, strict=True)
    ]
    count = len(columns[0][1]) if columns else 0
    return [
        [
            check_entry(name, ok[k], value[k], limit[k], margin[k])
            for name, a, ok, value, limit, margin in columns
            if a[k]
        ]
        for k in range(count)
    ]


def _channel_summaries(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    inputs = channel_rows(rows)
    accepted, worst = on_accepted(inputs, worst_case.worst_case)
    checked: list[list[dict[str, Any]]] = []
    if worst is not None:
        # A check applies where its nominal limit is known; its numbers are those at its worst corner.
        checked = _rows_of_checks(
            [w.name for w in worst.checks],
            [~np.isnan(n.limit) for n in worst.nominal.checks],
            [(w.check.ok, w.check.value, w.check.limit, w.margin()) for w in worst.checks],
        )
    found: list[dict[str, Any]] = []
    k = 0
    for row in range(len(rows)):
        if not accepted[row] or worst is None:
            problem = problem_of(inputs, channel.validate, row)
            found.append(refused("the channel is physically impossible with these parts", problem))
            continue
        found.append(summary(checked[k], row_notices(worst.nominal.cautions, k)))
        k += 1
    return found


def _calculation_summaries(name: str, rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    calc = CALCULATIONS[name]
    inputs = calc.make_inputs(columns_of(calc, rows))
    accepted, outcome = on_accepted(inputs, calc.compute)
    checked: list[list[dict[str, Any]]] = []
    if outcome is not None:
        checked = _rows_of_checks(
            [c.name for c in outcome.checks],
            [~np.isnan(c.limit) for c in outcome.checks],
            [(c.ok, c.value, c.limit, c.margin()) for c in outcome.checks],
        )
    found: list[dict[str, Any]] = []
    k = 0
    for row in range(len(rows)):
        if not accepted[row] or outcome is None:
            found.append(refused("physically impossible with these parts", problem_of(inputs, calc.validate, row)))
            continue
        found.append(summary(checked[k], row_notices(outcome.cautions, k)))
        k += 1
    return found


def review_many(session: Session, requests: list[Request]) -> list[dict[str, Any]]:
    """The summary (``design_outcome.summary``, with its parts and fingerprint) of each request, in order."""
    keys = {
        (request.body[role.name], request.body[f"{role.name}_revision"])
        for request in requests
        for role in form_of(request.calculation).roles
        if role.name in request.body and f"{role.name}_revision" in request.body
    }
    resolver = PartResolver(session, dict(revisions_of(session, keys)))
    results: list[dict[str, Any] | None] = [None] * len(requests)
    groups: dict[tuple[str, str], list[tuple[int, dict[str, Any], list[dict[str, Any]], list[str]]]] = {}
    for index, request in enumerate(requests):
        try:
            values, parts, cautions = _resolved(request, resolver)
        except ServiceError as exc:
            results[index] = refused(exc.detail, exc.errors)
            continue
        # The channel review takes one switch kind per pass (``channel_mosfet.all_mosfet``).
        kind = switch_kind_of(values) if request.calculation == CHANNEL else ""
        groups.setdefault((request.calculation, kind), []).append((index, values, parts, cautions))
    for (calculation, _), members in groups.items():
        rows = [values for _, values, _, _ in members]
        found = _channel_summaries(rows) if calculation == CHANNEL else _calculation_summaries(calculation, rows)
        name, version = _identity(calculation)
        for (index, values, parts, cautions), result in zip(members, found, strict=True):
            inputs = {k: to_json_value(v) for k, v in values.items()}
            if result["verdict"] != "error":
                result["fingerprint"] = fingerprint(name, version, inputs, parts)
                result["cautions"] = result["cautions"] + cautions  # the design's, then the parts' standing ones
            results[index] = {**result, "parts": parts}
    return [result for result in results if result is not None]
