"""A whole channel searched: every combination of the candidates of the searched roles reviewed as the single
review does, taken to its worst tolerance corner in one vectorized pass, and the best few through Monte Carlo.

The transistor role takes NPN and N-MOSFET candidates alike. The core reviews one switch kind per call, so the
combinations are split by kind, each kind's go through the worst case together, and the scores are merged: every
combination is ranked by the same least margin (or supply power, or yield), each over its own kind's checks."""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from calcsvc.core import channel, monte_carlo, worst_case
from calcsvc.core.channel_mosfet import BIPOLAR_ONLY, MOSFET_ONLY
from calcsvc.core.channel_spec import ALTERNATIVE_ROLES, CHANNEL_INPUTS
from calcsvc.core.outcome import BoolArray, DomainError, take
from calcsvc.core.spec import Role
from calcsvc.data.store import PartView
from calcsvc.service.envelope import row_notices, to_json_value
from calcsvc.service.errors import InvalidInput
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
# A role's part kinds: its own, then its alternatives' (the transistor's: bjt, mosfet).
ROLE_KINDS = {role.name: {role.kind: role} for role in CHANNEL_INPUTS.roles}
for _alternative in ALTERNATIVE_ROLES:
    ROLE_KINDS[_alternative.name][_alternative.kind] = _alternative
# Inputs that belong to one switch kind only: in a search over both kinds, an explicit value of one (e.g. the
# MOSFET's gate pull-down) goes to that kind's combinations, as each one's single review would take it.
OTHER_KINDS_ONLY = {"bjt": MOSFET_ONLY, "mosfet": BIPOLAR_ONLY}


@dataclass(frozen=True)
class KindPass:
    """The combinations of one set of part kinds (in the searched roles' order), through the core together."""

    kinds: tuple[str, ...]
    rows: IntArray  # its combinations among all, ascending
    shared: dict[str, Any]  # its completed shared inputs
    inputs: channel.ChannelInputs  # one row per combination in ``rows``
    accepted: BoolArray  # over ``rows``
    worst: worst_case.WorstCase | None  # over the accepted rows

    def accepted_mask(self, n: int) -> BoolArray:
        """Its accepted combinations among all ``n``."""
        mask = np.zeros(n, dtype=bool)
        mask[self.rows[self.accepted]] = True
        return mask


@dataclass(frozen=True)
class ChannelSearch:
    roles: list[Role]  # the searched roles, in the review's role order
    parts: dict[str, list[PartView]]
    shared: dict[str, Any]
    index: tuple[IntArray, ...]  # per searched role, each combination's part
    passes: list[KindPass]  # one per set of part kinds among the combinations
    accepted: BoolArray
    scores: Scores
    rows: IntArray
    yields: dict[int, monte_carlo.Yield]

    def locate(self, row: int) -> tuple[KindPass, int]:
        return locate(self.passes, row)

    def check_details(self) -> dict[str, str]:
        """Every check's explanation, over every switch kind searched."""
        return {c.name: c.detail for p in self.passes if p.worst is not None for c in p.worst.nominal.checks}

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
        found, local = self.locate(row)
        if not found.accepted[local] or found.worst is None:
            entry["failing"] = [IMPOSSIBLE]
            entry["problem"] = problem_of(found.inputs, channel.validate, local)
            return entry
        k = int(np.count_nonzero(found.accepted[:local]))
        worst = found.worst
        nominal = worst.nominal
        entry["failing"] = [c.name for c in worst.checks if not bool(c.check.ok[k])]
        keys = MOSFET_NUMBERS if nominal.switch_kind == "mosfet" else NUMBERS
        numbers = {key: to_json_value(getattr(nominal, stage).results[name][k]) for key, (stage, name) in keys.items()}
        entry["numbers"] = {**numbers, "max_duty_cycle": to_json_value(float(nominal.max_duty_cycle[k]))}
        entry["warnings"] += row_notices(nominal.warnings, k)
        entry["cautions"] = row_notices(nominal.cautions, k)
        if row in self.yields:
            entry["yield"] = yield_entry(self.yields[row])
        return entry


def locate(passes: list[KindPass], row: int) -> tuple[KindPass, int]:
    """The pass that reviewed combination ``row`` and its row there."""
    for found in passes:
        local = int(np.searchsorted(found.rows, row))
        if local < found.rows.size and found.rows[local] == row:
            return found, local
    raise IndexError(row)


def combinations(parts: dict[str, list[PartView]]) -> int:
    return math.prod(len(p) for p in parts.values())


def own_values(values: dict[str, Any], kinds: Sequence[str], mixed: bool) -> dict[str, Any]:
    """``values`` as the combinations of these part kinds take them: in a search over both switch kinds, without
    the inputs only the other kind has (``OTHER_KINDS_ONLY``)."""
    if not mixed:
        return values
    other = {name for kind in kinds for name in OTHER_KINDS_ONLY.get(kind, ())}
    return {k: v for k, v in values.items() if k not in other}


def refuse_other_kinds_inputs(values: dict[str, Any], chosen: dict[str, list[PartView]]) -> None:
    """An input only a switch kind none of the transistor candidates is has (a MOSFET's gate pull-down while
    the transistor is searched over bipolar parts alone) is refused by its own name, rather than surfacing as
    the parameters of that kind the candidates lack."""
    kinds = {p.kind for p in chosen.get("transistor", [])} & OTHER_KINDS_ONLY.keys()
    if not kinds:
        return
    stray = set.intersection(*(set(OTHER_KINDS_ONLY[kind]) for kind in kinds))
    for name in sorted(stray):
        value = values.get(name)
        if value is not None and not (isinstance(value, float) and math.isnan(value)):
            (kind,) = kinds
            raise InvalidInput.on(
                name,
                f"{name} is an input of the other switch kind, and the transistor candidates are {kind} parts "
                'only: leave it out, or search both kinds ("kind": ["bjt", "mosfet"], or list their part ids)',
            )


def _groups(
    roles: list[Role], chosen: dict[str, list[PartView]], index: tuple[IntArray, ...], n: int
) -> dict[tuple[str, ...], IntArray]:
    """The combinations of each set of part kinds (one per searched role), ascending."""
    kinds = [sorted({p.kind for p in chosen[role.name]}) or [role.kind] for role in roles]
    if n == 0 or all(len(k) == 1 for k in kinds):
        return {tuple(k[0] for k in kinds): np.arange(n)}
    code = np.zeros(n, dtype=np.intp)
    for j, role in enumerate(roles):
        of_part = np.array([kinds[j].index(p.kind) for p in chosen[role.name]], dtype=np.intp)
        code = code * len(kinds[j]) + of_part[index[j]]
    found: dict[tuple[str, ...], IntArray] = {}
    for value in np.unique(code):
        rows = np.flatnonzero(code == value)
        found[tuple(chosen[role.name][int(index[j][rows[0]])].kind for j, role in enumerate(roles))] = rows
    return found


@dataclass(frozen=True)
class _Prepared:
    """One pass's inputs before the core: its shared values, the inputs its parts provide, its combinations."""

    kinds: tuple[str, ...]
    rows: IntArray
    shared: dict[str, Any]
    from_parts: set[str]
    inputs: channel.ChannelInputs

    def objection(self) -> DomainError | None:
        """What the core objects to whatever the candidates are (``refuse_shared``), if anything."""
        one = channel_inputs(self.shared)
        blank = dataclasses.replace(one, **dict.fromkeys(self.from_parts, np.full(1, np.nan)))
        ignored = self.from_parts
        if "mosfet" in self.kinds:
            # With the MOSFET's inputs unknown the core takes the blank row for a bipolar one: its objections to
            # the bipolar inputs are the blank's own (a request that gives them has each row refused instead).
            ignored = ignored | set(BIPOLAR_ONLY)
        try:
            refuse_shared(blank, channel.validate, ignored, "")
        except DomainError as error:
            return error
        return None

    def review(self) -> KindPass:
        accepted, worst = on_accepted(self.inputs, worst_case.worst_case)
        return KindPass(self.kinds, self.rows, self.shared, self.inputs, accepted, worst)


def _prepare(
    values: dict[str, Any],
    roles: list[Role],
    chosen: dict[str, list[PartView]],
    kinds: tuple[str, ...],
    rows: IntArray,
    index: tuple[IntArray, ...],
) -> _Prepared:
    """The inputs of the combinations ``rows`` (``index``: per role, each one's part), all of part ``kinds``."""
    own = [ROLE_KINDS[role.name][kind] for role, kind in zip(roles, kinds, strict=True)]
    provided = {role.name: part_columns(CHANNEL_INPUTS, role, chosen[role.name], values.keys()) for role in own}
    from_parts = {name for columns in provided.values() for name in columns}
    shared = shared_inputs(CHANNEL_INPUTS, values, from_parts)
    inputs = take(channel_inputs(shared), np.zeros(rows.size, dtype=np.intp))
    inputs = dataclasses.replace(
        inputs,
        **{name: column[index[j]] for j, role in enumerate(own) for name, column in provided[role.name].items()},
    )
    return _Prepared(kinds, rows, shared, from_parts, inputs)


def search_channel(
    values: dict[str, Any],
    parts: dict[str, Sequence[PartView]],
    samples: int = 0,
    seed: int = 0,
    ranking: Ranking = DEFAULT_RANKING,
) -> ChannelSearch:
    """Every combination of the candidates of the searched roles (``parts`` by role name; the transistor's
    NPNs and N-MOSFETs alike), reviewed as the single review does (resistors chosen per combination), worst
    case over tolerance corners for all of them, and, with ``samples``, Monte Carlo yield for the best few
    (``YIELD_SHORTLIST``).

    ``values`` are the review's inputs in SI with any fixed role's part already resolved into them, without
    ``samples`` and ``seed``. ``ranking.rank_by``: "margin", "supply_power_w" (average supply power,
    ascending) or "yield" (needs ``samples``). What the core refuses whatever the candidates are is a
    DomainError; where only one switch kind's combinations draw it, they are refused each with its problem.
    """
    roles = [role for role in CHANNEL_INPUTS.roles if role.name in parts]
    if not roles:
        raise ValueError("search at least one role")
    chosen = {role.name: sorted(parts[role.name], key=lambda p: p.part_id) for role in roles}
    shape = tuple(len(chosen[role.name]) for role in roles)
    n = math.prod(shape)
    index = np.unravel_index(np.arange(n), shape)
    refuse_other_kinds_inputs(values, chosen)
    groups = _groups(roles, chosen, index, n)
    mixed = len(groups) > 1
    prepared = [
        _prepare(
            own_values(values, kinds, mixed),
            roles,
            chosen,
            kinds,
            rows,
            tuple(ix[rows] for ix in index) if mixed else index,
        )
        for kinds, rows in groups.items()
    ]
    objections = [p.objection() for p in prepared]
    first = objections[0]
    if first is not None and all(objections):
        raise first
    passes = [p.review() for p in prepared]
    checks = []
    accepted = np.zeros(n, dtype=bool)
    key = np.full(n, np.nan)
    for found in passes:
        mask = found.accepted_mask(n) if mixed else found.accepted
        accepted |= mask
        if found.worst is not None:
            checks += [
                RowCheck(c.name, mask, w.check.ok, w.margin(), ~np.isnan(c.limit))
                for c, w in zip(found.worst.nominal.checks, found.worst.checks, strict=True)
            ]
            key[mask] = found.worst.nominal.supply.results["average_power_w"]
    scores = score(~accepted, checks)
    if ranking.rank_by != "supply_power_w":
        key = scores.margin
    count = max(ranking.limit, YIELD_SHORTLIST) if samples else ranking.limit
    rows = rank(scores, key, ranking.rank_by != "supply_power_w", count, ranking.only_passing)
    yields: dict[int, monte_carlo.Yield] = {}
    if samples:
        shortlist = [int(row) for row in rows[accepted[rows]][:YIELD_SHORTLIST]]
        for row in shortlist:
            found, local = locate(passes, row)
            one = take(found.inputs, np.array([local]))
            yields[row] = monte_carlo.monte_carlo(one, samples, seed, **vf_options(found.shared))
        if ranking.rank_by == "yield":
            # The shortlist re-ranked by yield (a stable sort: ties keep their order); the rest after it.
            first = sorted(shortlist, key=lambda row: -yields[row].fraction)
            rows = np.concatenate([np.array(first, dtype=np.intp), rows[~np.isin(rows, first)]])
    # The inputs every combination shares: each pass's, less what any pass's parts provide.
    provided = {name for p in prepared for name in p.from_parts}
    common: dict[str, Any] = {}
    for p in prepared:
        common |= {k: v for k, v in p.shared.items() if k not in provided and k not in common}
    return ChannelSearch(roles, chosen, common, index, passes, accepted, scores, rows[: ranking.limit], yields)
