"""``/v1/select``: which parts we stock meet a requirement, and which has the most margin.

``POST /v1/select/<calculation>`` searches one role of a calculation; ``POST /v1/select/channel`` searches
the design space of a whole channel review. This module reads the request and the parts table; the
evaluation, one vectorized pass over every candidate, is calcsvc.web.candidates.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from flask import current_app
from flask.views import MethodView
from flask_smorest import Blueprint
from marshmallow import Schema, ValidationError, fields, validate
from sqlalchemy.orm import Session

from calcsvc.core import channel, tolerance
from calcsvc.core.registry import CALCULATIONS
from calcsvc.core.spec import CalculationSpec, Role
from calcsvc.data.kinds import KINDS, Param
from calcsvc.data.part_ids import MAX_LENGTH, PATTERN, is_part_id
from calcsvc.data.store import STATUSES, PartStore, PartView
from calcsvc.service.envelope import plain
from calcsvc.service.errors import ServiceError
from calcsvc.service.resolve import PartResolver, resolve
from calcsvc.web.auth import require_reader
from calcsvc.web.calc_schemas import PartUsedSchema, camel, input_field, request_schema
from calcsvc.web.candidates import (
    CHANNEL_RANKINGS,
    DEFAULT_STATUSES,
    IMPOSSIBLE,
    IMPOSSIBLE_DETAIL,
    YIELD_SHORTLIST,
    PartFilter,
    Ranking,
    Requirement,
    choose,
    combinations,
    search_channel,
    search_role,
)
from calcsvc.web.metrics import record_calculation
from calcsvc.web.problems import Problem, error_response
from calcsvc.web.quantity import Quantity
from calcsvc.web.review_api import REVIEW, YieldSchema

FILTER_FORM = (
    'A searched role is a filter object, {"status": ["approved"], "where": {"<parameter>": {"min": …, "max": …}}}: '
    "current parts of those statuses (default approved) whose parameters lie within the bounds (inclusive; SI "
    'numbers or strings with units such as "20 mA"; a part without the parameter does not match), or a list of '
    "part_ids (current revisions; retired ones are excluded)."
)
blp = Blueprint(
    "select",
    __name__,
    url_prefix="/v1/select",
    description="Candidate search over the parts table: which parts meet a requirement and which has the most "
    "margin, every candidate through the same calculation as a single request, in one vectorized pass. "
    + FILTER_FORM
    + " duty-cycle-power has no search: its loads are not parts. Margins rest on the table's values: a "
    "passing candidate is a shortlist for review, not a substitute for its datasheet.",
)

DEFAULT_LIMIT = 20
MAX_LIMIT = 1000
MAX_LISTED = 1000  # part_ids in one list
MAX_SAMPLES = 100_000  # per shortlisted design
ROLE_ORDER = {role.name: k for k, role in enumerate(REVIEW.roles)}


def _refuse(field: str, message: str) -> Problem:
    return Problem(422, message, "validation", {field: [message]})


# ---- request fields ------------------------------------------------------------------------------------------


class StrictBoolean(fields.Field):
    """true or false, nothing that merely looks like one."""

    def __init__(self, **kwargs: Any) -> None:
        super().__init__(metadata={"type": "boolean", **kwargs.pop("metadata", {})}, **kwargs)

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> bool:
        if not isinstance(value, bool):
            raise ValidationError("must be true or false")
        return value


class Bounds(fields.Field):
    """Inclusive bounds on one parameter: ``{"min": …, "max": …}`` in SI, or strings with units."""

    def __init__(self, param: Param) -> None:
        self.limits = {
            key: Quantity(param.unit, description=f"{key}imum {param.description}") for key in ("min", "max")
        }
        super().__init__(
            metadata={
                "type": "object",
                "description": f"bounds on {param.description}",
                "properties": {key: dict(field.metadata) for key, field in self.limits.items()},
                "additionalProperties": False,
                "minProperties": 1,
            }
        )

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> tuple[float | None, float | None]:
        if not isinstance(value, dict) or not value:
            raise ValidationError("give min, max or both")
        errors: dict[str, list[str]] = {key: ["Unknown field."] for key in value if key not in self.limits}
        found: dict[str, float] = {}
        for key, limit in self.limits.items():
            if key in value:
                try:
                    found[key] = limit.deserialize(value[key])
                except ValidationError as exc:
                    errors[key] = [str(message) for message in exc.messages]
        if errors:
            raise ValidationError(errors)
        if "min" in found and "max" in found and found["min"] > found["max"]:
            raise ValidationError({"max": ["must not be below min"]})
        return found.get("min"), found.get("max")


def _filter_schema(kind: str) -> type[Schema]:
    where = Schema.from_dict(
        {param.name: Bounds(param) for param in KINDS[kind] if param.numeric}, name=f"{camel(kind)}Where"
    )
    return Schema.from_dict(
        {
            "status": fields.List(
                fields.String(validate=validate.OneOf(STATUSES)),
                validate=validate.Length(min=1, max=len(STATUSES)),
                metadata={"description": f"statuses a candidate may have (default: {', '.join(DEFAULT_STATUSES)})"},
            ),
            "where": fields.Nested(
                where, metadata={"description": f"bounds on the parameters of a {kind} part; all must hold"}
            ),
        },
        name=f"{camel(kind)}Filter",
    )


FILTERS = {kind: _filter_schema(kind) for kind in KINDS}


class Candidates(fields.Field):
    """A role of a search: a part_id (fixed, as in a calculation), a list of part_ids or a filter object."""

    def __init__(self, role: Role) -> None:
        self.role = role
        part_id = {"type": "string", "pattern": PATTERN, "maxLength": MAX_LENGTH}
        given = ", ".join(name for _, name in role.provides)
        super().__init__(
            metadata={
                "description": f"a {role.kind} part_id (fixed), or the {role.kind} parts to search: a list of "
                f"part_ids or a filter object; supplies {given} unless given explicitly",
                "oneOf": [
                    part_id,
                    {"type": "array", "items": part_id, "minItems": 1, "maxItems": MAX_LISTED, "uniqueItems": True},
                    {"$ref": f"#/components/schemas/{camel(role.kind)}Filter"},
                ],
            }
        )

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> str | PartFilter:
        if isinstance(value, str):
            if not is_part_id(value):
                raise ValidationError("must be a part_id")
            return value
        if isinstance(value, list):
            bad = {str(k): ["must be a part_id"] for k, v in enumerate(value) if not is_part_id(v)}
            if bad:
                raise ValidationError(bad)
            if not 1 <= len(value) <= MAX_LISTED or len(set(value)) != len(value):
                raise ValidationError(f"list 1 to {MAX_LISTED} different part_ids")
            return PartFilter(part_ids=tuple(value))
        if isinstance(value, dict):
            found = FILTERS[self.role.kind]().load(value)
            statuses = tuple(dict.fromkeys(found.get("status", DEFAULT_STATUSES)))
            return PartFilter(statuses=statuses, where=found.get("where", {}))
        raise ValidationError("must be a part_id, a list of part_ids or a filter object")


def _options(rankings: Sequence[str], order: bool) -> dict[str, fields.Field]:
    found: dict[str, fields.Field] = {
        "rank_by": fields.String(
            validate=validate.OneOf(rankings),
            metadata={"description": "what orders the passing candidates (default: margin)"},
        ),
        "limit": fields.Integer(
            validate=validate.Range(min=1, max=MAX_LIMIT),
            metadata={"description": f"most candidates answered (default {DEFAULT_LIMIT})"},
        ),
        "only_passing": StrictBoolean(metadata={"description": "leave out the failing candidates (default false)"}),
    }
    if order:
        found["order"] = fields.String(
            validate=validate.OneOf(("asc", "desc")), metadata={"description": "direction of rank_by (default desc)"}
        )
    return found


RequirementSchema = Schema.from_dict(
    {
        "calculation": fields.String(required=True, validate=validate.OneOf(tuple(CALCULATIONS))),
        "inputs": fields.Dict(
            keys=fields.String(),
            required=True,
            metadata={"description": "its inputs, as its POST /v1/calc body, without the searched role"},
        ),
    },
    name="SelectRequirement",
)
_INPUTS = {name: request_schema(calc) for name, calc in CALCULATIONS.items()}
_QUALIFIED = tuple(f"{name}.{result}" for name, calc in CALCULATIONS.items() for result in calc.scalar_results())


def select_schema(calc: CalculationSpec) -> type[Schema]:
    attributes: dict[str, fields.Field] = dict(request_schema(calc)._declared_fields)
    attributes.update({role.name: Candidates(role) for role in calc.roles})
    attributes.update(_options(("margin", *calc.scalar_results(), *_QUALIFIED), order=True))
    attributes["search"] = fields.String(
        validate=validate.OneOf([role.name for role in calc.roles]),
        metadata={"description": "the role to search when it is left out of the body (all parts, default filter)"},
    )
    attributes["require"] = fields.List(
        fields.Nested(RequirementSchema),
        validate=validate.Length(max=len(CALCULATIONS)),
        metadata={"description": "calculations whose checks every candidate must also pass (same role)"},
    )
    return Schema.from_dict(attributes, name=f"Select{camel(calc.name)}Request")


def _channel_schema() -> type[Schema]:
    attributes: dict[str, fields.Field] = {}
    for spec in REVIEW.inputs:
        if spec.name == "samples":
            spec = dataclasses.replace(
                spec,
                default=0,
                maximum=MAX_SAMPLES,
                description=f"Monte Carlo builds per design, for the best {YIELD_SHORTLIST} (0: no yield)",
            )
        attributes[spec.name] = input_field(spec)
    attributes.update({role.name: Candidates(role) for role in REVIEW.roles})
    attributes.update(_options(CHANNEL_RANKINGS, order=False))
    return Schema.from_dict(attributes, name="SelectChannelRequest")


# ---- responses ---------------------------------------------------------------------------------------------


class ExcludedSchema(Schema):
    part_id = fields.String(required=True)
    revision = fields.Integer(required=True)
    status = fields.String(required=True)
    reason = fields.String(required=True)


class CandidateSchema(Schema):
    part_id = fields.String(required=True)
    revision = fields.Integer(required=True)
    status = fields.String(required=True)
    ok = fields.Boolean(required=True, metadata={"description": "every check of every calculation passes"})
    limiting_check = fields.String(required=True, allow_none=True, metadata={"description": "check of least margin"})
    margin = fields.Float(required=True, allow_none=True, metadata={"description": "its margin, a fraction"})
    failing = fields.List(fields.String(), required=True)
    results = fields.Dict(required=True, allow_none=True, metadata={"description": "scalar results; null if refused"})
    required_results = fields.Dict(keys=fields.String(), metadata={"description": "results of each required one"})
    problem = fields.Dict(
        keys=fields.String(),
        values=fields.List(fields.String()),
        metadata={"description": "why the core refused this candidate, by input"},
    )
    warnings = fields.List(fields.String(), required=True)
    cautions = fields.List(fields.String(), required=True)
    request = fields.Dict(required=True, metadata={"description": "the POST /v1/calc body of this candidate, pinned"})


class RequiredSchema(Schema):
    calculation = fields.String(required=True)
    inputs = fields.Dict(required=True)
    parts = fields.List(fields.Nested(PartUsedSchema), required=True)


class SelectionSchema(Schema):
    calculation = fields.String(required=True)
    version = fields.String(required=True)
    role = fields.String(required=True)
    kind = fields.String(required=True)
    filter = fields.Dict(required=True, metadata={"description": "the filter applied, SI bounds"})
    inputs = fields.Dict(required=True, metadata={"description": "the inputs every candidate shares"})
    from_candidates = fields.List(fields.String(), required=True, metadata={"description": "inputs parts supply"})
    parts = fields.List(fields.Nested(PartUsedSchema), required=True)
    require = fields.List(fields.Nested(RequiredSchema), required=True)
    rank_by = fields.String(required=True)
    order = fields.String(required=True)
    evaluated = fields.Integer(required=True, metadata={"description": "candidates evaluated"})
    passing = fields.Integer(required=True)
    excluded = fields.List(fields.Nested(ExcludedSchema), required=True, metadata={"description": "refused by role"})
    check_details = fields.Dict(keys=fields.String(), values=fields.String(), required=True)
    candidates = fields.List(fields.Nested(CandidateSchema), required=True)
    warnings = fields.List(fields.String(), required=True)


class DesignSchema(Schema):
    parts = fields.List(fields.Nested(PartUsedSchema), required=True)
    verdict = fields.String(required=True, metadata={"description": "pass when every check passes at every corner"})
    limiting_check = fields.String(required=True, allow_none=True)
    margin = fields.Float(required=True, allow_none=True, metadata={"description": "least worst-case margin"})
    failing = fields.List(fields.String(), required=True)
    numbers = fields.Dict(required=True, allow_none=True, metadata={"description": "key nominal results"})
    yield_ = fields.Nested(YieldSchema, allow_none=True, required=True, attribute="yield", data_key="yield")
    problem = fields.Dict(keys=fields.String(), values=fields.List(fields.String()))
    warnings = fields.List(fields.String(), required=True)
    cautions = fields.List(fields.String(), required=True)
    request = fields.Dict(required=True, metadata={"description": "the POST /v1/review/channel body, pinned"})


class ChannelSelectionSchema(Schema):
    review = fields.String(required=True)
    version = fields.String(required=True)
    searched = fields.Dict(keys=fields.String(), values=fields.Dict(), required=True)
    inputs = fields.Dict(required=True)
    parts = fields.List(fields.Nested(PartUsedSchema), required=True, metadata={"description": "fixed parts"})
    rank_by = fields.String(required=True)
    samples = fields.Integer(required=True)
    seed = fields.Integer(required=True)
    candidates = fields.Dict(keys=fields.String(), values=fields.Integer(), required=True)
    combinations = fields.Integer(required=True)
    passing = fields.Integer(required=True)
    excluded = fields.Dict(keys=fields.String(), values=fields.List(fields.Nested(ExcludedSchema)), required=True)
    check_details = fields.Dict(keys=fields.String(), values=fields.String(), required=True)
    designs = fields.List(fields.Nested(DesignSchema), required=True)
    warnings = fields.List(fields.String(), required=True)


# ---- shared steps ------------------------------------------------------------------------------------------


def _session() -> Any:
    return current_app.extensions["calcsvc.db"].transaction()


def _load(session: Session, role: Role, chosen: PartFilter) -> list[PartView]:
    """The parts a filter or list names; an unknown part_id is a 404 and a part of another kind a 422."""
    store = PartStore(session)
    if chosen.part_ids is None:
        return store.all_of_kind(role.kind, chosen.statuses)
    found = store.get_many(list(chosen.part_ids))
    missing = [part_id for part_id in chosen.part_ids if part_id not in found]
    if missing:
        message = ", ".join(f"no part '{part_id}'" for part_id in missing)
        raise Problem(404, message, "part-not-found", {role.name: [message]})
    wrong = [part for part in found.values() if part.kind != role.kind]
    if wrong:
        message = "; ".join(f"part '{p.part_id}' is a {p.kind}; {role.name} needs a {role.kind}" for p in wrong)
        raise Problem(422, message, "wrong-part-kind", {role.name: [message]})
    return list(found.values())


def _bound(count: int, what: str) -> None:
    limit = current_app.config["SELECT_MAX_COMBINATIONS"]
    if count > limit:
        message = f"{count:,} {what} is more than this server evaluates in one search ({limit:,}): narrow a filter"
        raise Problem(413, message, "selection-size")


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
            raise _refuse(f"{role.name}_revision", "a revision pins one part; a searched role takes candidates")


# ---- one role ----------------------------------------------------------------------------------------------


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
        raise Problem(422, message, "validation", {role.name: [message] for role in open_roles[1:]})
    if open_roles:
        role = open_roles[0]
        if search not in (None, role.name):
            raise _refuse("search", f"search names {search}, but {role.name} is the role given as candidates")
    elif search is None:
        raise _refuse("search", "give the role to search as a filter object or a list of part_ids, or name it here")
    else:
        role = next(r for r in roles if r.name == search)
        if body.get(role.name) is not None:
            raise _refuse("search", f"{role.name} is fixed to '{body[role.name]}'; leave it out to search it")
    _revision_free([role], body)
    chosen = body.get(role.name)
    return role, chosen if isinstance(chosen, PartFilter) else PartFilter()


def _requirement(index: int, item: dict[str, Any], searched: Role, resolver: PartResolver) -> _Required:
    calc = CALCULATIONS[item["calculation"]]
    where = f"require.{index}"
    role = next((r for r in calc.roles if r.name == searched.name and r.kind == searched.kind), None)
    if role is None:
        raise _refuse(f"{where}.calculation", f"{calc.name} has no {searched.name} role to search")
    try:
        inputs = _INPUTS[calc.name]().load(item["inputs"])
    except ValidationError as exc:
        messages = exc.normalized_messages()
        errors = {f"{where}.inputs.{k}": v if isinstance(v, list) else [str(v)] for k, v in messages.items()}
        raise Problem(422, "invalid input: " + ", ".join(sorted(errors)), "validation", errors) from exc
    if inputs.get(role.name) is not None or inputs.get(f"{role.name}_revision") is not None:
        raise _refuse(f"{where}.inputs.{role.name}", f"the {role.name} parts come from the search; leave it out")
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
        raise _refuse("rank_by", f"{rank_by} is not a result of this search: require its calculation")
    return Ranking(
        rank_by,
        options.get("order", "desc") == "desc",
        options.get("limit", DEFAULT_LIMIT),
        options.get("only_passing", False),
    )


def run_select(calc: CalculationSpec, body: dict[str, Any]) -> dict[str, Any]:
    options = {
        name: body.pop(name)
        for name in ("search", "require", "rank_by", "order", "limit", "only_passing")
        if name in body
    }
    role, chosen = _searched(calc.roles, body, options.get("search"))
    given = {k: v for k, v in body.items() if k not in (role.name, f"{role.name}_revision")}
    with _session() as session:
        resolver = PartResolver(session)
        fixed = resolve(tuple(r for r in calc.roles if r is not role), given, resolver)
        required = [_requirement(k, item, role, resolver) for k, item in enumerate(options.get("require", []))]
        names = [r.requirement.calc.name for r in required]
        for k, name in enumerate(names):
            if name in names[:k]:
                raise _refuse(f"require.{k}.calculation", f"{name} is already required")
        found = _load(session, role, chosen)
    ranking = _ranking(calc, options, required)
    parts, excluded = choose(found, chosen, [role, *(r.role for r in required)])
    _bound(len(parts), "candidates")
    search = search_role(calc, fixed.values, role, parts, [r.requirement for r in required], ranking)
    for evaluated in search.evaluations:
        record_calculation(evaluated.calc.name, int(evaluated.accepted.sum()))
    pinned = {k: plain(v) for k, v in {**given, **_pins(fixed.parts)}.items()}
    candidates = []
    for row in search.rows:
        entry = search.entry(int(row))
        entry["request"] = {**pinned, role.name: entry["part_id"], f"{role.name}_revision": entry["revision"]}
        candidates.append(entry)
    main = search.evaluations[0]
    return {
        "calculation": calc.name,
        "version": calc.version,
        "role": role.name,
        "kind": role.kind,
        "filter": chosen.describe(),
        "inputs": {k: plain(v) for k, v in main.shared.items()},
        "from_candidates": main.provided,
        "parts": fixed.parts,
        "require": [
            {
                "calculation": r.requirement.calc.name,
                "inputs": {k: plain(v) for k, v in e.shared.items()},
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


SELECT_DOC = (
    "The body of POST /v1/calc/{name} with one role open: given as a filter object or a list of part_ids, or "
    "left out and named in search. Other roles may be fixed part references; explicit values win over every "
    "candidate's. require adds calculations whose checks every candidate must also pass (the same role, their "
    "own inputs; their checks are named <calculation>.<check>, rank_by may name <calculation>.<result>). "
    "Order: passing candidates by the least margin over all checks, descending (or by rank_by in order); ties "
    "by that margin descending, then by the next-least margin and so on, then part_id ascending; then failing "
    "ones by margin descending; last those the core refuses as physically impossible (failing "
    "physically_possible, with the core's reasons in problem). Parts a role refuses (e.g. a pnp transistor "
    "where an npn is needed) are listed in excluded. More candidates than SELECT_MAX_COMBINATIONS: 413."
)


def _register(calc: CalculationSpec) -> None:
    class SelectView(MethodView):
        @blp.arguments(select_schema(calc))
        @blp.response(200, SelectionSchema)
        @error_response(blp, 404, "a referenced part does not exist")
        @error_response(blp, 413, "more candidates than SELECT_MAX_COMBINATIONS")
        @blp.doc(summary=f"Parts that meet a {calc.name} requirement, best first", description=SELECT_DOC)
        def post(self, body: dict[str, Any]) -> dict[str, Any]:
            return run_select(calc, body)

    SelectView.__name__ = f"Select{camel(calc.name)}View"
    blp.route(f"/{calc.name}", endpoint=calc.name)(SelectView)


for _calc in CALCULATIONS.values():
    _register(_calc)


# ---- a whole channel ---------------------------------------------------------------------------------------


def run_channel_select(body: dict[str, Any]) -> dict[str, Any]:
    options = {name: body.pop(name) for name in ("rank_by", "limit", "only_passing") if name in body}
    samples, seed = int(body.pop("samples", 0)), int(body.pop("seed", 0))
    searched = {role.name: body[role.name] for role in REVIEW.roles if isinstance(body.get(role.name), PartFilter)}
    if not searched:
        raise _refuse("body", "give at least one role as a filter object or a list of part_ids to search")
    roles = [role for role in REVIEW.roles if role.name in searched]
    _revision_free(roles, body)
    rank_by = options.get("rank_by", "margin")
    if rank_by == "yield" and not samples:
        raise _refuse("rank_by", "ranking by yield needs samples (Monte Carlo builds per design)")
    given = {k: v for k, v in body.items() if k not in searched}
    with _session() as session:
        fixed = resolve(tuple(r for r in REVIEW.roles if r.name not in searched), given, PartResolver(session))
        found = {role.name: _load(session, role, searched[role.name]) for role in roles}
    chosen = {role.name: choose(found[role.name], searched[role.name], [role]) for role in roles}
    by_role = {name: kept for name, (kept, _) in chosen.items()}
    _bound(combinations(by_role), "combinations")
    leds = int(fixed.values.get("strings", 1)) * int(fixed.values.get("leds_in_series", 1))
    if samples * leds * YIELD_SHORTLIST > tolerance.MAX_LED_DRAWS:
        most = tolerance.MAX_LED_DRAWS // (leds * YIELD_SHORTLIST)
        message = f"samples × strings × leds_in_series × {YIELD_SHORTLIST} designs exceeds the LED draws one search "
        raise _refuse("samples", message + f"may take ({tolerance.MAX_LED_DRAWS:,}): use at most {most:,} samples")
    ranking = Ranking(
        rank_by, limit=options.get("limit", DEFAULT_LIMIT), only_passing=options.get("only_passing", False)
    )
    search = search_channel(fixed.values, by_role, samples, seed, ranking)
    record_calculation(channel.NAME, int(search.accepted.sum()))
    pinned = {k: plain(v) for k, v in {**given, **_pins(fixed.parts), "samples": samples, "seed": seed}.items()}
    designs = []
    for row in search.rows:
        entry = search.entry(int(row))
        entry["parts"] = sorted(fixed.parts + entry["parts"], key=lambda p: ROLE_ORDER[p["role"]])
        entry["request"] = {**pinned, **_pins(entry["parts"])}
        designs.append(entry)
    details = {c.name: c.detail for c in search.worst.nominal.checks} if search.worst else {}
    return {
        "review": channel.NAME,
        "version": channel.VERSION,
        "searched": {name: chosen_filter.describe() for name, chosen_filter in searched.items()},
        "inputs": {k: plain(v) for k, v in search.shared.items() if k not in ("samples", "seed")},
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


CHANNEL_DOC = (
    "The body of POST /v1/review/channel where any role may be a list of part_ids or a filter object. Every "
    "combination of the candidates is reviewed as the single review does (string and base resistors chosen per "
    "combination) and taken to its worst tolerance corner, in one vectorized pass. Order: passing designs by "
    "the least worst-case margin over the checks (descending), or rank_by supply_power_w (average supply "
    f"power, ascending) or yield (with samples: Monte Carlo for the best {YIELD_SHORTLIST} by margin, re-ranked "
    "by yield, the rest after them by margin); ties by margin descending, then by the next-least margin and so "
    "on (a check all designs share, such as a fixed driver's, does not hide their differences), then the parts' "
    "ids in role order. Failing designs follow by margin, then combinations the core refuses (failing "
    "physically_possible, with its reasons in problem). Each design's request re-runs it through POST "
    "/v1/review/channel, every part pinned to its revision. More combinations than SELECT_MAX_COMBINATIONS: 413."
)


@blp.route("/channel", endpoint="channel")
class ChannelSelect(MethodView):
    @blp.arguments(_channel_schema())
    @blp.response(200, ChannelSelectionSchema)
    @error_response(blp, 404, "a referenced part does not exist")
    @error_response(blp, 413, "more combinations than SELECT_MAX_COMBINATIONS")
    @blp.doc(description=CHANNEL_DOC)
    def post(self, body: dict[str, Any]) -> dict[str, Any]:
        """Channel designs from the parts table, best worst-case margin first."""
        return run_channel_select(body)


@blp.record_once
def _filter_components(state: Any) -> None:
    # The role fields refer to the filter objects by $ref; nothing else makes apispec register them.
    spec = state.app.extensions["calcsvc.api"].spec
    for kind, schema in FILTERS.items():
        spec.components.schema(f"{camel(kind)}Filter", schema=schema)


@blp.before_request
def _reads_may_need_a_token() -> None:
    # Searches read the parts table, so they follow its read protection.
    require_reader()
