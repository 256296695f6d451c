"""The switch search: every stocked low-side switch for one load, bipolar transistors (Darlingtons among them)
and MOSFETs alike, each through its own calculation (``bjt-switch``, ``mosfet-switch``) and ranked together by
the same least margin over its checks, or by its dissipation."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from typing import Any

from calcsvc.core.registry import CALCULATIONS
from calcsvc.core.spec import CalculationSpec
from calcsvc.data.database import Database
from calcsvc.service.search.select import Parse, Selection, run_select

# Part kind → its calculation, the input its load current fills and the result its dissipation is.
SWITCHES: dict[str, tuple[str, str, str]] = {
    "bjt": ("bjt-switch", "collector_current_a", "transistor_power_w"),
    "mosfet": ("mosfet-switch", "drain_current_a", "mosfet_power_w"),
}
RANKINGS = ("margin", "dissipation")
# Loads a whole search body of one calculation as POST /v1/select/<calculation> does.
LoadSelect = Callable[[CalculationSpec, Mapping[str, Any]], dict[str, Any]]


def _sort_key(rank_by: str) -> Callable[[dict[str, Any]], tuple[Any, ...]]:
    """Passing first, then failing, then refused; within each by margin (descending) or dissipation (ascending)."""

    def key(candidate: dict[str, Any]) -> tuple[Any, ...]:
        refused = candidate["results"] is None
        group = 0 if candidate["ok"] else 2 if refused else 1
        margin = -candidate["margin"] if candidate["margin"] is not None else math.inf
        dissipation = candidate["dissipation_w"] if candidate["dissipation_w"] is not None else math.inf
        first = dissipation if rank_by == "dissipation" else margin
        return (group, first, margin, candidate["part_id"])

    return key


def run_switch_select(
    database: Database,
    body: dict[str, Any],
    load_select: LoadSelect,
    parse: Parse,
    max_combinations: int,
) -> Selection:
    """Search each switch kind asked for with the shared inputs of ``body`` (SI values; ``load_current_a`` the
    switched current), then rank every candidate together."""
    kinds = body.pop("kinds", list(SWITCHES))
    rank_by = body.pop("rank_by", "margin")
    current = body.pop("load_current_a")
    candidates: list[dict[str, Any]] = []
    searches: list[dict[str, Any]] = []
    evaluated: list[tuple[str, int]] = []
    for kind in dict.fromkeys(kinds):
        name, current_input, dissipation = SWITCHES[kind]
        calc = CALCULATIONS[name]
        accepted = set(calc.accepted())
        raw = {k: v for k, v in body.items() if k in accepted}
        raw |= {current_input: current, "search": "transistor"}
        selection = run_select(database, calc, load_select(calc, raw), parse, max_combinations)
        document = selection.document
        evaluated += selection.evaluated
        for entry in document["candidates"]:
            results = entry["results"]
            candidates.append(
                {
                    **entry,
                    "calculation": name,
                    "kind": kind,
                    "dissipation_w": None if results is None else results.get(dissipation),
                }
            )
        searches.append(
            {
                key: document[key]
                for key in ("calculation", "version", "inputs", "parts", "evaluated", "passing", "excluded", "warnings")
            }
        )
    candidates.sort(key=_sort_key(rank_by))
    document = {
        "rank_by": rank_by,
        "evaluated": sum(s["evaluated"] for s in searches),
        "passing": sum(s["passing"] for s in searches),
        "searches": searches,
        "candidates": candidates,
    }
    return Selection(document, evaluated)
