"""The request and response schemas of the searches (``/v1/select``)."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

from marshmallow import Schema, ValidationError, fields, validate

from calcsvc.core import bjt_switch, mosfet_switch
from calcsvc.core.channel_spec import CHANNEL_INPUTS
from calcsvc.core.registry import CALCULATIONS
from calcsvc.core.spec import CalculationSpec, Role
from calcsvc.data.kinds import KINDS, Param
from calcsvc.data.part_ids import MAX_LENGTH, PATTERN, is_part_id
from calcsvc.data.store import STATUSES
from calcsvc.service.search.channel import CHANNEL_RANKINGS, ROLE_KINDS, YIELD_SHORTLIST
from calcsvc.service.search.common import DEFAULT_STATUSES, PartFilter
from calcsvc.service.search.select import DEFAULT_LIMIT
from calcsvc.service.search.switch import RANKINGS, SWITCHES
from calcsvc.web.calc_schemas import PartUsedSchema, camel, input_field, request_schema, role_fields, safety_field
from calcsvc.web.quantity import Quantity
from calcsvc.web.review_schemas import YieldSchema

MAX_LIMIT = 1000
MAX_LISTED = 1000  # part_ids in one list
MAX_SAMPLES = 100_000  # per shortlisted design


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


def _filter_schema(kinds: Sequence[str], name: str) -> type[Schema]:
    """The filter object of a role whose parts are of ``kinds`` (the first its default), named ``name``Filter."""
    params: dict[str, Param] = {}
    for kind in kinds:
        for param in KINDS[kind]:
            if param.numeric:
                params.setdefault(param.name, param)  # a parameter both kinds have is declared alike
    where = Schema.from_dict({key: Bounds(param) for key, param in params.items()}, name=f"{name}Where")
    described = " or ".join(kinds)
    attributes: dict[str, fields.Field] = {
        "status": fields.List(
            fields.String(validate=validate.OneOf(STATUSES)),
            validate=validate.Length(min=1, max=len(STATUSES)),
            metadata={"description": f"statuses a candidate may have (default: {', '.join(DEFAULT_STATUSES)})"},
        ),
        "where": fields.Nested(
            where,
            metadata={
                "description": f"bounds on the parameters of a {described} part; all must hold (a part without "
                "a bounded parameter does not match)"
            },
        ),
    }
    if len(kinds) > 1:
        attributes["kind"] = fields.List(
            fields.String(validate=validate.OneOf(kinds)),
            validate=validate.Length(min=1, max=len(kinds)),
            metadata={"description": f"part kinds to search, ranked together (default: {kinds[0]})"},
        )
    return Schema.from_dict(attributes, name=f"{name}Filter")


FILTERS = {camel(kind): _filter_schema((kind,), camel(kind)) for kind in KINDS}
# A channel role that takes several part kinds (the transistor: NPN or N-MOSFET) has a filter over all of them.
CHANNEL_FILTERS = {
    role: _filter_schema(tuple(kinds), f"Channel{camel(role)}") for role, kinds in ROLE_KINDS.items() if len(kinds) > 1
}
FILTERS.update({f"Channel{camel(role)}": schema for role, schema in CHANNEL_FILTERS.items()})


class Candidates(fields.Field):
    """A role of a search: a part_id (fixed, as in a calculation), a list of part_ids or a filter object."""

    def __init__(self, role: Role, kinds: Sequence[str] = (), filter_name: str = "") -> None:
        """``kinds``: the role's part kinds when it takes several; their filter is ``filter_name``Filter."""
        self.role = role
        self.filter = filter_name or camel(role.kind)
        part_id = {"type": "string", "pattern": PATTERN, "maxLength": MAX_LENGTH}
        given = ", ".join(name for _, name in role.provides)
        kind = " or ".join(kinds or (role.kind,))
        super().__init__(
            metadata={
                "description": f"a {kind} part_id (fixed), or the {kind} parts to search: a list of "
                f"part_ids or a filter object; supplies {given} unless given explicitly",
                "oneOf": [
                    part_id,
                    {"type": "array", "items": part_id, "minItems": 1, "maxItems": MAX_LISTED, "uniqueItems": True},
                    {"$ref": f"#/components/schemas/{self.filter}Filter"},
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
            found = FILTERS[self.filter]().load(value)
            statuses = tuple(dict.fromkeys(found.get("status", DEFAULT_STATUSES)))
            kinds = tuple(dict.fromkeys(found["kind"])) if "kind" in found else None
            return PartFilter(statuses=statuses, where=found.get("where", {}), kinds=kinds)
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
INPUTS = {name: request_schema(calc) for name, calc in CALCULATIONS.items()}
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


def channel_schema() -> type[Schema]:
    attributes: dict[str, fields.Field] = {}
    for spec in CHANNEL_INPUTS.inputs:
        if spec.name == "samples":
            spec = dataclasses.replace(
                spec,
                default=0,
                maximum=MAX_SAMPLES,
                description=f"Monte Carlo builds per design, for the best {YIELD_SHORTLIST} (0: no yield)",
            )
        attributes[spec.name] = input_field(spec)
    for role in CHANNEL_INPUTS.roles:
        kinds = tuple(ROLE_KINDS[role.name]) if role.name in CHANNEL_FILTERS else ()
        attributes[role.name] = Candidates(role, kinds, f"Channel{camel(role.name)}" if kinds else "")
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
    safety = safety_field()


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
    safety = safety_field()


def switch_schema() -> type[Schema]:
    """The switch search's body: the load, the pin (a driver part or its values), the PWM and the ranking."""
    bjt = {spec.name: spec for spec in bjt_switch.SPEC.inputs}
    mos = {spec.name: spec for spec in mosfet_switch.SPEC.inputs}
    shared = ("supply_max_v", "drive_high_v", "drive_low_v", "driver_current_max_a", "drive_supply_v",
              "duty_cycle", "e_series", "resistor_tolerance", "pwm_frequency_hz", "pwm_resolution_bits",
              "modulation_depth", "camera_frame_rate_hz")  # fmt: skip
    attributes: dict[str, fields.Field] = {name: input_field(mos.get(name) or bjt[name]) for name in shared}
    attributes["supply_max_v"].required = True
    attributes["ambient_c"] = input_field(mos["ambient_c"])
    attributes["load_current_a"] = Quantity(
        "A", minimum=0, exclusive_minimum=True, description="the current the switch carries when on", required=True
    )
    driver = next(role for role in bjt_switch.SPEC.roles if role.name == "driver")
    attributes.update(role_fields(driver))
    attributes["kinds"] = fields.List(
        fields.String(validate=validate.OneOf(list(SWITCHES))),
        validate=validate.Length(min=1, max=len(SWITCHES)),
        metadata={"description": "switch part kinds to search (default: all)"},
    )
    attributes["rank_by"] = fields.String(
        validate=validate.OneOf(RANKINGS),
        metadata={"description": "margin (least margin over the checks, descending) or dissipation (ascending)"},
    )
    return Schema.from_dict(attributes, name="SelectSwitchRequest")


class SwitchCandidateSchema(CandidateSchema):
    calculation = fields.String(required=True)
    kind = fields.String(required=True)
    dissipation_w = fields.Float(required=True, allow_none=True, metadata={"description": "null if refused"})


class SwitchSearchSchema(Schema):
    calculation = fields.String(required=True)
    version = fields.String(required=True)
    inputs = fields.Dict(required=True)
    parts = fields.List(fields.Nested(PartUsedSchema), required=True)
    evaluated = fields.Integer(required=True)
    passing = fields.Integer(required=True)
    excluded = fields.List(fields.Nested(ExcludedSchema), required=True)
    warnings = fields.List(fields.String(), required=True)


class SwitchSelectionSchema(Schema):
    rank_by = fields.String(required=True)
    evaluated = fields.Integer(required=True)
    passing = fields.Integer(required=True)
    searches = fields.List(fields.Nested(SwitchSearchSchema), required=True)
    candidates = fields.List(fields.Nested(SwitchCandidateSchema), required=True)
    safety = safety_field()
