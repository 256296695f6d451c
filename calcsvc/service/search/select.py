"""A search request, loaded: the searched role (or roles) and its candidates from the parts table, the fixed
parts resolved, the search run (calcsvc.service.search.role and .channel), and the answer, each candidate with the
request that re-runs it, pinned to its parts' revisions."""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from sqlalchemy.orm import Session

from calcsvc.core import channel, monte_carlo
from calcsvc.core.channel_spec import ALTERNATIVE_ROLES, CHANNEL_INPUTS
from calcsvc.core.registry import CALCULATIONS
from calcsvc.core.spec import CalculationSpec, Role
from calcsvc.data.database import Database
from calcsvc.data.store import PartStore, PartView
from calcsvc.service.envelope import to_json_value
from calcsvc.service.errors import InvalidInput, ServiceError, TooLarge, UnknownPart, WrongPartKind
from calcsvc.service.resolve import PartResolver, resolve
from calcsvc.service.safety import supply_cautions
from calcsvc.service.search.channel import ROLE_KINDS, YIELD_SHORTLIST, combinations, own_values, search_channel
from calcsvc.service.search.common import IMPOSSIBLE, IMPOSSIBLE_DETAIL, PartFilter, choose
from calcsvc.service.search.ranking import Ranking
from calcsvc.service.search.role import Requirement, search_role

DEFAULT_LIMIT = 20
ROLE_ORDER = {role.name: k for k, role in enumerate(CHANNEL_INPUTS.roles)}
# Loads a required calculation's inputs as its own request body is loaded; raises InvalidInput keyed by field.
Parse = Callable[[CalculationSpec, Mapping[str, Any]], dict[str, Any]]


@dataclass(frozen=True)
class Selection:
    """A search's answer, and how many rows each calculation evaluated (for the metrics)."""

    document: dict[str, Any]
    evaluated: list[tuple[str, int]]


def _load(session: Session, role: Role, chosen: PartFilter, kinds: Sequence[str] = ()) -> list[PartView]:
    """The parts a filter or list names; an unknown part_id is a 404 and a part of another kind a 422. A list
    may also name parts of the role's alternative ``kinds`` (the channel's transistor: a MOSFET); a filter
    reads the kinds it names, by default the role's own."""
    store = PartStore(session)
    if chosen.part_ids is None:
        return [part for kind in chosen.kinds or (role.kind,) for part in store.all_of_kind(kind, chosen.statuses)]
    found = store.get_many(list(chosen.part_ids))
    missing = [part_id for part_id in chosen.part_ids if part_id not in found]
    if missing:
        message = ", ".join(f"no part '{part_id}'" for part_id in missing)
        raise UnknownPart.on(role.name, message)
    allowed = (role.kind, *kinds)
    wrong = [part for part in found.values() if part.kind not in allowed]
    if wrong:
        needs = " or ".join(allowed)
        message = "; ".join(f"part '{p.part_id}' is a {p.kind}; {role.name} needs a {needs}" for p in wrong)
        raise WrongPartKind.on(role.name, message)
    return list(found.values())


def _choose_kinds(parts: list[PartView], chosen: PartFilter, role: str) -> tuple[list[PartView], list[dict[str, Any]]]:
    """``choose`` for a role whose parts may be of several kinds, each kind's parts under its own role's rules
    (a MOSFET for the transistor must be N-channel); the kept ones by part_id."""
    kept: list[PartView] = []
    excluded: list[dict[str, Any]] = []
    for kind, own in ROLE_KINDS[role].items():
        found = choose([p for p in parts if p.kind == kind], chosen, [own])
        kept += found[0]
        excluded += found[1]
    return sorted(kept, key=lambda p: p.part_id), sorted(excluded, key=lambda e: e["part_id"])


def _bound(count: int, what: str, limit: int) -> None:
    if count > limit:
        message = f"{count:,} {what} is more than this server evaluates in one search ({limit:,}): narrow a filter"
        raise TooLarge(message, slug="selection-size")


def _pins(parts: list[dict[str, Any]]) -> dict[str, Any]:
    """Part references pinned to the revisions used."""
    pinned: dict[str, Any] = {}
    for part in parts:
        pinned[part["role"]] = part["part_id"]
        pinned[f"{part['role']}_revision"] = part["revision"]
    return pinned


def _revision_free(roles: Sequence[Role], body: dict[str, Any]) -> None:
    for role in roles:
        if body.get(f"{role.name}_revision") is not None:
            raise InvalidInput.on(f"{role.name}_revision", "a revision pins one part; a searched role takes candidates")


@dataclass(frozen=True)
class _Required:
    requirement: Requirement
    role: Role
    parts: list[dict[str, Any]]
    warnings: list[str]


def _searched(roles: tuple[Role, ...], body: dict[str, Any], search: str | None) -> tuple[Role, PartFilter]:
    """The one role searched: the one given as candidates, or the one ``search`` names."""
    open_roles = [role for role in roles if isinstance(body.get(role.name), PartFilter)]
    if len(open_roles) > 1:
        message = f"one role per search: {', '.join(r.name for r in open_roles)} are all open; fix all but one"
        raise InvalidInput(message, {role.name: [message] for role in open_roles[1:]})
    if open_roles:
        role = open_roles[0]
        if search not in (None, role.name):
            raise InvalidInput.on("search", f"search names {search}, but {role.name} is the role given as candidates")
    elif search is None:
        raise InvalidInput.on(
            "search", "give the role to search as a filter object or a list of part_ids, or name it here"
        )
    else:
        role = next(r for r in roles if r.name == search)
        if body.get(role.name) is not None:
            raise InvalidInput.on("search", f"{role.name} is fixed to '{body[role.name]}'; leave it out to search it")
    _revision_free([role], body)
    chosen = body.get(role.name)
    return role, chosen if isinstance(chosen, PartFilter) else PartFilter()


def _requirement(index: int, item: dict[str, Any], searched: Role, resolver: PartResolver, parse: Parse) -> _Required:
    calc = CALCULATIONS[item["calculation"]]
    where = f"require.{index}"
    role = next((r for r in calc.roles if r.name == searched.name and r.kind == searched.kind), None)
    if role is None:
        raise InvalidInput.on(f"{where}.calculation", f"{calc.name} has no {searched.name} role to search")
    try:
        inputs = parse(calc, item["inputs"])
    except InvalidInput as error:
        errors = {f"{where}.inputs.{k}": v for k, v in (error.errors or {}).items()}
        raise InvalidInput("invalid input: " + ", ".join(sorted(errors)), errors) from error
    if inputs.get(role.name) is not None or inputs.get(f"{role.name}_revision") is not None:
        raise InvalidInput.on(
            f"{where}.inputs.{role.name}", f"the {role.name} parts come from the search; leave it out"
        )
    try:
        fixed = resolve(tuple(r for r in calc.roles if r is not role), inputs, resolver)
    except ServiceError as error:
        errors = {f"{where}.inputs.{k}": v for k, v in (error.errors or {}).items()}
        raise type(error)(error.detail, errors, error.slug) from error
    return _Required(Requirement(calc, fixed.values, f"{where}.inputs."), role, fixed.parts, fixed.warnings)


def _ranking(calc: CalculationSpec, options: dict[str, Any], required: list[_Required]) -> Ranking:
    rank_by = options.get("rank_by", "margin")
    allowed = {"margin", *calc.scalar_results()}
    allowed |= {f"{r.requirement.calc.name}.{name}" for r in required for name in r.requirement.calc.scalar_results()}
    if rank_by not in allowed:
        raise InvalidInput.on("rank_by", f"{rank_by} is not a result of this search: require its calculation")
    return Ranking(
        rank_by,
        options.get("order", "desc") == "desc",
        options.get("limit", DEFAULT_LIMIT),
        options.get("only_passing", False),
    )


def run_select(
    database: Database, calc: CalculationSpec, body: dict[str, Any], parse: Parse, max_combinations: int
) -> Selection:
    """The search of one role of ``calc`` for a loaded request body: candidates best first (order:
    calcsvc.service.search), with the parts a role refuses; ``parse`` loads a required calculation's inputs."""
    options = {
        name: body.pop(name)
        for name in ("search", "require", "rank_by", "order", "limit", "only_passing")
        if name in body
    }
    role, chosen = _searched(calc.roles, body, options.get("search"))
    given = {k: v for k, v in body.items() if k not in (role.name, f"{role.name}_revision")}
    with database.transaction() as session:
        resolver = PartResolver(session)
        fixed = resolve(tuple(r for r in calc.roles if r is not role), given, resolver)
        required = [_requirement(k, item, role, resolver, parse) for k, item in enumerate(options.get("require", []))]
        names = [r.requirement.calc.name for r in required]
        for k, name in enumerate(names):
            if name in names[:k]:
                raise InvalidInput.on(f"require.{k}.calculation", f"{name} is already required")
        found = _load(session, role, chosen)
    ranking = _ranking(calc, options, required)
    parts, excluded = choose(found, chosen, [role, *(r.role for r in required)])
    _bound(len(parts), "candidates", max_combinations)
    search = search_role(calc, fixed.values, role, parts, [r.requirement for r in required], ranking)
    pinned = {k: to_json_value(v) for k, v in {**given, **_pins(fixed.parts)}.items()}
    by_id = {part.part_id: part for part in parts}
    candidates = []
    for row in search.rows:
        entry = search.entry(int(row))
        entry["request"] = {**pinned, role.name: entry["part_id"], f"{role.name}_revision": entry["revision"]}
        searched = supply_cautions(by_id[entry["part_id"]].parameters) if role.kind == "supply" else []
        entry["cautions"] = list(dict.fromkeys(entry["cautions"] + fixed.cautions + searched))
        candidates.append(entry)
    main = search.evaluations[0]
    document = {
        "calculation": calc.name,
        "version": calc.version,
        "role": role.name,
        "kind": role.kind,
        "filter": chosen.describe(),
        "inputs": {k: to_json_value(v) for k, v in main.shared.items()},
        "from_candidates": main.provided,
        "parts": fixed.parts,
        "require": [
            {
                "calculation": r.requirement.calc.name,
                "inputs": {k: to_json_value(v) for k, v in e.shared.items()},
                "parts": r.parts,
            }
            for r, e in zip(required, search.evaluations[1:], strict=True)
        ],
        "rank_by": ranking.rank_by,
        "order": "desc" if ranking.descending else "asc",
        "evaluated": len(parts),
        "passing": int(search.scores.ok.sum()),
        "excluded": excluded,
        "check_details": search.check_details(),
        "candidates": candidates,
        "warnings": fixed.warnings + [w for r in required for w in r.warnings],
    }
    return Selection(document, [(e.calc.name, int(e.accepted.sum())) for e in search.evaluations])


def run_channel_select(database: Database, body: dict[str, Any], max_combinations: int) -> Selection:
    """The search of a whole channel's design space for a loaded request body: designs best first (order:
    calcsvc.service.search)."""
    options = {name: body.pop(name) for name in ("rank_by", "limit", "only_passing") if name in body}
    samples, seed = int(body.pop("samples", 0)), int(body.pop("seed", 0))
    searched = {
        role.name: body[role.name] for role in CHANNEL_INPUTS.roles if isinstance(body.get(role.name), PartFilter)
    }
    if not searched:
        raise InvalidInput.on("body", "give at least one role as a filter object or a list of part_ids to search")
    roles = [role for role in CHANNEL_INPUTS.roles if role.name in searched]
    _revision_free(roles, body)
    rank_by = options.get("rank_by", "margin")
    if rank_by == "yield" and not samples:
        raise InvalidInput.on("rank_by", "ranking by yield needs samples (Monte Carlo builds per design)")
    given = {k: v for k, v in body.items() if k not in searched}
    with database.transaction() as session:
        fixed_roles = tuple(r for r in CHANNEL_INPUTS.roles if r.name not in searched)
        fixed = resolve(fixed_roles, given, PartResolver(session), ALTERNATIVE_ROLES)  # a MOSFET switch, held fixed
        found = {role.name: _load(session, role, searched[role.name], list(ROLE_KINDS[role.name])) for role in roles}
    chosen = {role.name: _choose_kinds(found[role.name], searched[role.name], role.name) for role in roles}
    by_role = {name: kept for name, (kept, _) in chosen.items()}
    _bound(combinations(by_role), "combinations", max_combinations)
    leds = int(fixed.values.get("strings", 1)) * int(fixed.values.get("leds_in_series", 1))
    if samples * leds * YIELD_SHORTLIST > monte_carlo.MAX_LED_DRAWS:
        most = monte_carlo.MAX_LED_DRAWS // (leds * YIELD_SHORTLIST)
        message = f"samples × strings × leds_in_series × {YIELD_SHORTLIST} designs exceeds the LED draws one search "
        raise InvalidInput.on(
            "samples", message + f"may take ({monte_carlo.MAX_LED_DRAWS:,}): use at most {most:,} samples"
        )
    ranking = Ranking(
        rank_by, limit=options.get("limit", DEFAULT_LIMIT), only_passing=options.get("only_passing", False)
    )
    search = search_channel(fixed.values, by_role, samples, seed, ranking)
    pinned = {k: to_json_value(v) for k, v in {**given, **_pins(fixed.parts), "samples": samples, "seed": seed}.items()}
    designs = []
    for row in search.rows:
        entry = search.entry(int(row))
        entry["parts"] = sorted(fixed.parts + entry["parts"], key=lambda p: ROLE_ORDER[p["role"]])
        reviewed, _ = search.locate(int(row))  # the request as that switch kind's single review takes it
        entry["request"] = own_values({**pinned, **_pins(entry["parts"])}, reviewed.kinds, len(search.passes) > 1)
        searched_supply = [p.parameters for p in search.parts_of(int(row)) if p.kind == "supply"]
        entry["cautions"] += fixed.cautions + [c for supply in searched_supply for c in supply_cautions(supply)]
        designs.append(entry)
    details = search.check_details()
    document = {
        "review": channel.NAME,
        "version": channel.VERSION,
        "searched": {name: chosen_filter.describe() for name, chosen_filter in searched.items()},
        "inputs": {k: to_json_value(v) for k, v in search.shared.items() if k not in ("samples", "seed")},
        "parts": fixed.parts,
        "rank_by": rank_by,
        "samples": samples,
        "seed": seed,
        "candidates": {name: len(parts) for name, parts in by_role.items()},
        "combinations": combinations(by_role),
        "passing": int(search.scores.ok.sum()),
        "excluded": {name: excluded for name, (_, excluded) in chosen.items()},
        "check_details": {**details, IMPOSSIBLE: IMPOSSIBLE_DETAIL},
        "designs": designs,
        "warnings": fixed.warnings,
    }
    return Selection(document, [(channel.NAME, int(search.accepted.sum()))])
