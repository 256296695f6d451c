"""marshmallow schemas generated from the calculation table, so the spec and the server never drift."""

from __future__ import annotations

from typing import Any

from marshmallow import RAISE, Schema, ValidationError, fields, missing, validate, validates_schema

from calcsvc.core.spec import BudgetSpec, Input, InputSet, Items, Result, Role, Samples
from calcsvc.service.parts import MAX_REVISION, part_id_field
from calcsvc.service.safety import SAFETY_LINE
from calcsvc.units import QUANTITY_PATTERN
from calcsvc.web.quantity import Quantity


def camel(name: str) -> str:
    return "".join(part.capitalize() for part in name.replace("_", "-").split("-"))


def input_field(spec: Input, pattern: str = QUANTITY_PATTERN) -> fields.Field:
    if spec.max_length is not None:
        return fields.String(
            load_default=spec.default,
            validate=validate.Length(max=spec.max_length),
            metadata={"description": spec.description},
        )
    if spec.flag:
        return fields.Boolean(load_default=spec.default, metadata={"description": spec.description})
    if spec.choices:
        return fields.String(
            validate=validate.OneOf(spec.choices), metadata={"description": spec.description, "default": spec.default}
        )
    default = "" if spec.default is None else f" (default {spec.default:g})"
    return Quantity(
        spec.unit,
        minimum=spec.minimum,
        exclusive_minimum=spec.exclusive_minimum,
        maximum=spec.maximum,
        integer=spec.integer,
        description=spec.description + default,
        pattern=pattern,
    )


def role_fields(role: Role) -> dict[str, fields.Field]:
    given = ", ".join(f"{parameter} as {name}" if parameter != name else name for parameter, name in role.provides)
    return {
        role.name: part_id_field(
            metadata={"description": f"part_id of a {role.kind} part; supplies {given} unless given explicitly"}
        ),
        f"{role.name}_revision": fields.Integer(
            validate=validate.Range(min=1, max=MAX_REVISION),
            metadata={"description": f"pin a revision of the {role.name} part (default: current)"},
        ),
    }


class RequestSchema(Schema):
    """A calculation's inputs. A body that loads without an error is loaded field by field, as marshmallow's own
    loop would (each field's ``deserialize``, in declared order, a missing one's default included), without the
    loop's error bookkeeping, which costs more than the fields of one request; a body with any error takes
    marshmallow's whole way, for its error document."""

    def load(self, data: Any, *, many: Any = None, partial: Any = None, unknown: Any = None) -> Any:
        if many is None and partial is None and unknown is None and type(data) is dict:
            loaded = self._without_errors(data)
            if loaded is not None:
                return loaded
        return super().load(data, many=many, partial=partial, unknown=unknown)

    def _without_errors(self, data: dict[str, Any]) -> dict[str, Any] | None:
        """The loaded body, or None where marshmallow must answer (an error; a setting this loop does not take)."""
        if self.many or self.partial or self.unknown != RAISE or any(self._hooks.values()):
            return None
        load_fields = self.load_fields
        if not data.keys() <= load_fields.keys():  # an unknown field: refused
            return None
        loaded: dict[str, Any] = {}
        for name, field in load_fields.items():
            if field.data_key is not None:
                return None
            try:
                value = field.deserialize(data.get(name, missing), name, data)
            except ValidationError:
                return None
            if value is not missing:
                loaded[field.attribute or name] = value
        return loaded


def request_schema(calc: InputSet, pattern: str = QUANTITY_PATTERN) -> type[Schema]:
    """The inputs as a body (``pattern`` of quantity strings: a decimal point) or, with the query form's pattern,
    as query parameters."""
    attributes: dict[str, Any] = {spec.name: input_field(spec, pattern) for spec in calc.inputs}
    for role in calc.roles:
        attributes.update(role_fields(role))
    return RequestSchema.from_dict(attributes, name=f"{camel(calc.name)}Request")


class _SamplesSchema(Schema):
    samples: Samples

    @validates_schema
    def same_length(self, data: dict[str, Any], **_kwargs: Any) -> None:
        first, *others = (array.name for array in self.samples.arrays)
        for name in others:
            if len(data[name]) != len(data[first]):
                raise ValidationError(f"{first} and {name} must have the same length", name)


def samples_schema(samples: Samples) -> type[Schema]:
    length = validate.Length(min=samples.min_length, max=samples.max_length)
    attributes: dict[str, Any] = {
        array.name: fields.List(fields.Float(), required=True, validate=length, metadata={"x-unit": array.unit})
        for array in samples.arrays
    }
    return type(camel(samples.name), (_SamplesSchema,), {**attributes, "samples": samples})


class _ItemSchema(Schema):
    items: Items

    @validates_schema
    def described_once(self, data: dict[str, Any], **_kwargs: Any) -> None:
        fault = self.items.describe(data.keys())
        if fault is not None:
            raise ValidationError(fault[1], fault[0])


def items_field(items: Items) -> fields.Field:
    """A list of items, each checked by the declared rule of what describes one."""
    attributes: dict[str, Any] = {spec.name: input_field(spec) for spec in items.inputs}
    attributes[items.samples.name] = fields.Nested(
        samples_schema(items.samples), metadata={"description": items.samples.description}
    )
    item = type(camel(items.name.removesuffix("s")), (_ItemSchema,), {**attributes, "items": items})
    return fields.List(
        fields.Nested(item),
        required=True,
        validate=validate.Length(min=items.min_items, max=items.max_items),
        metadata={"description": items.description},
    )


def budget_request_schema(spec: BudgetSpec) -> type[Schema]:
    attributes = dict(request_schema(spec)._declared_fields)
    attributes[spec.items.name] = items_field(spec.items)
    return Schema.from_dict(attributes, name=f"{camel(spec.name)}Request")


class PartUsedSchema(Schema):
    role = fields.String(required=True)
    part_id = fields.String(required=True)
    revision = fields.Integer(required=True)
    status = fields.String(required=True, validate=validate.OneOf(("draft", "approved", "retired")))


def safety_field() -> fields.String:
    """The standing safety line, a field of its own on every JSON answer."""
    return fields.String(
        required=True,
        dump_default=SAFETY_LINE,
        metadata={"description": "standing line deferring to local codes, the parts' datasheets and licensed practice"},
    )


class CheckSchema(Schema):
    name = fields.String(required=True)
    unit = fields.String(required=True, metadata={"description": "unit of value and limit (empty: a ratio)"})
    ok = fields.Boolean(required=True)
    value = fields.Float(required=True, allow_none=True)
    limit = fields.Float(required=True)
    margin = fields.Float(
        required=True, allow_none=True, metadata={"description": "how far inside the limit, as a fraction of it"}
    )
    detail = fields.String(required=True)


def result_field(result: Result) -> fields.Field:
    description = result.text
    if result.type == "boolean":
        return fields.Boolean(metadata={"description": description})
    if result.type == "sweep":
        return fields.Dict(
            keys=fields.String(), values=fields.List(fields.Float()), metadata={"description": description}
        )
    if result.type == "records":
        return fields.List(fields.Dict(), metadata={"description": description})
    return fields.Float(allow_none=True, metadata={"description": description + " (null: does not apply)"})


def response_schema(calc_name: str, results: tuple[Result, ...]) -> type[Schema]:
    prefix = camel(calc_name)
    results_schema = Schema.from_dict(
        {result.name: result_field(result) for result in results}, name=f"{prefix}Results"
    )
    return Schema.from_dict(
        {
            "calculation": fields.String(required=True),
            "inputs": fields.Dict(required=True, metadata={"description": "every resolved input, in SI units"}),
            "parts": fields.List(fields.Nested(PartUsedSchema), required=True),
            "results": fields.Nested(results_schema, required=True),
            "checks": fields.List(fields.Nested(CheckSchema), required=True),
            "warnings": fields.List(fields.String(), required=True),
            "cautions": fields.List(fields.String(), required=True),
            "safety": safety_field(),
            "fingerprint": fields.String(
                required=True, metadata={"description": "SHA-256 of the inputs, part revisions and version"}
            ),
        },
        name=f"{prefix}Response",
    )
