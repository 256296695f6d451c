"""A whole channel searched: every combination of the candidates of the searched roles reviewed as the single
review does, taken to its worst tolerance corner in one vectorized pass, and the best few through Monte Carlo."""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from calcsvc.core import channel, monte_carlo, worst_case
from calcsvc.core.channel_spec import CHANNEL_INPUTS
from calcsvc.core.outcome import BoolArray, take
from calcsvc.core.spec import Role
from calcsvc.data.store import PartView
from calcsvc.service.envelope import row_notices, to_json_value
from calcsvc.service.review import channel_inputs, vf_options, yield_entry
from calcsvc.service.search.common import (
    IMPOSSIBLE,
    on_accepted,
    part_columns,
    problem_of,
    refuse_shared,
    shared_inputs,
    unapproved,
)
from calcsvc.service.search.ranking import DEFAULT_RANKING, IntArray, Ranking, RowCheck, Scores, rank, score

YIELD_SHORTLIST = 10  # Monte Carlo runs for this many designs at most, the best by worst-case margin
# Key numbers of a design at nominal values: (section of the review, result).
NUMBERS = {
    "resistor_ohm": ("led_string", "resistor_ohm"),
    "string_current_a": ("led_string", "current_a"),
    "rb_ohm": ("switch", "rb_ohm"),
    "drive_current_a": ("switch", "drive_current_a"),
    "transistor_power_w": ("switch", "transistor_power_w"),
    "supply_average_current_a": ("supply", "average_current_a"),
    "supply_power_w": ("supply", "average_power_w"),
    "led_junction_c": ("thermal", "led_junction_c"),
    "transistor_junction_c": ("thermal", "transistor_junction_c"),
    "resistor_hot_spot_c": ("thermal", "resistor_hot_spot_c"),
}
# A MOSFET switch's own key numbers in place of the base resistor's, the pin's and the transistor's.
MOSFET_NUMBERS = {
    **{key: where for key, where in NUMBERS.items() if key not in ("rb_ohm", "drive_current_a")},
    "rg_ohm": ("switch", "rg_ohm"),
    "gate_peak_current_a": ("switch", "gate_peak_current_a"),
    "transistor_power_w": ("switch", "mosfet_power_w"),
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
    worst: worst_case.WorstCase | None  # over the accepted rows
    scores: Scores
    rows: IntArray
    yields: dict[int, monte_carlo.Yield]

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
            "margin": to_json_value(float(self.scores.margin[row])),
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
        keys = MOSFET_NUMBERS if nominal.switch_kind == "mosfet" else NUMBERS
        numbers = {key: to_json_value(getattr(nominal, stage).results[name][k]) for key, (stage, name) in keys.items()}
        entry["numbers"] = {**numbers, "max_duty_cycle": to_json_value(float(nominal.max_duty_cycle[k]))}
        entry["warnings"] += row_notices(nominal.warnings, k)
        entry["cautions"] = row_notices(nominal.cautions, k)
        if row in self.yields:
            entry["yield"] = yield_entry(self.yields[row])
        return entry


def combinations(parts: dict[str, list[PartView]]) -> int:
    return math.prod(len(p) for p in parts.values())


def search_channel(
    values: dict[str, Any],
    parts: dict[str, Sequence[PartView]],
    samples: int = 0,
    seed: int = 0,
    ranking: Ranking = DEFAULT_RANKING,
) -> ChannelSearch:
    """Every combination of the candidates of the searched roles (``parts`` by role name), reviewed as the
    single review does (resistors chosen per combination), worst case over tolerance corners for all of
    them, and, with ``samples``, Monte Carlo yield for the best few (``YIELD_SHORTLIST``).

    ``values`` are the review's inputs in SI with any fixed role's part already resolved into them, without
    ``samples`` and ``seed``. ``ranking.rank_by``: "margin", "supply_power_w" (average supply power,
    ascending) or "yield" (needs ``samples``).
    """
    roles = [role for role in CHANNEL_INPUTS.roles if role.name in parts]
    if not roles:
        raise ValueError("search at least one role")
    chosen = {role.name: sorted(parts[role.name], key=lambda p: p.part_id) for role in roles}
    provided = {role.name: part_columns(CHANNEL_INPUTS, role, chosen[role.name], values.keys()) for role in roles}
    from_parts = {name for columns in provided.values() for name in columns}
    shared = shared_inputs(CHANNEL_INPUTS, values, from_parts)
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
    accepted, worst = on_accepted(inputs, worst_case.worst_case)
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
    yields: dict[int, monte_carlo.Yield] = {}
    if samples:
        shortlist = [int(row) for row in rows[accepted[rows]][:YIELD_SHORTLIST]]
        for row in shortlist:
            yields[row] = monte_carlo.monte_carlo(take(inputs, np.array([row])), samples, seed, **vf_options(shared))
        if ranking.rank_by == "yield":
            # The shortlist re-ranked by yield (a stable sort: ties keep their order); the rest after it.
            first = sorted(shortlist, key=lambda row: -yields[row].fraction)
            rows = np.concatenate([np.array(first, dtype=np.intp), rows[~np.isin(rows, first)]])
    common = {k: v for k, v in shared.items() if k not in from_parts}
    return ChannelSearch(roles, chosen, common, index, inputs, accepted, worst, scores, rows[: ranking.limit], yields)
