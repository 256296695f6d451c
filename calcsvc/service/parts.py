"""What a part write must satisfy before the store sees it: the id rule, the fields of a new part, and parameter
values converted to SI. Used by the parts endpoints and by the parts file import alike."""

from __future__ import annotations

import sys
from typing import Any

from marshmallow import Schema, ValidationError, fields, validate

from calcsvc.data import part_ids
from calcsvc.data.kinds import KINDS, MAX_DESCRIPTION_LENGTH, MAX_TEXT_LENGTH, params_of
from calcsvc.service.errors import InvalidInput
from calcsvc.units import UnitError, parse_quantity

MAX_REVISION = 2**31 - 1  # the store keeps revisions in 32-bit integer columns; larger ones cannot be looked up
# PostgreSQL cannot store a NUL character in a text column (SQLite can): refuse it in the request.
NO_NUL = validate.ContainsNoneOf("\x00", error="must not contain a NUL character")
_KIND_DOC = "; ".join(
    f"{kind}: "
    + ", ".join(
        p.name + (" (optional)" if p.optional else "") + (" (informational)" if p.informational else "") for p in params
    )
    for kind, params in KINDS.items()
)


def _valid_part_id(value: Any) -> None:
    """marshmallow validator for the shared id rule."""
    if not part_ids.is_part_id(value):
        raise ValidationError(part_ids.RULE)


def part_id_field(**kwargs: Any) -> fields.String:
    metadata = {"pattern": part_ids.PATTERN, "maxLength": part_ids.MAX_LENGTH, **kwargs.pop("metadata", {})}
    return fields.String(validate=_valid_part_id, metadata=metadata, **kwargs)


class ParametersField(fields.Dict):
    """Parameter values as published: a number, or a string of at most MAX_TEXT_LENGTH characters (a unit
    quantity or text), refused here, before If-Match or the kind's rules, and keyed by the parameter's name."""

    def __init__(self, **kwargs: Any) -> None:
        text = {"type": "string", "maxLength": MAX_TEXT_LENGTH}
        super().__init__(
            keys=fields.String(),
            values=fields.Raw(metadata={"oneOf": [{"type": "number"}, text]}),
            metadata={
                "description": "Parameters in SI units (numbers) or as strings with units ('4.7 kohm'). "
                f"By kind: {_KIND_DOC}",
            },
            **kwargs,
        )

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> dict[str, Any]:
        parameters: dict[str, Any] = super()._deserialize(value, attr, data, **kwargs)
        errors = {}
        for name, each in parameters.items():
            if isinstance(each, bool) or not isinstance(each, int | float | str):
                errors[name] = ["must be a number or a string"]
            elif isinstance(each, str) and len(each) > MAX_TEXT_LENGTH:
                errors[name] = [f"must be at most {MAX_TEXT_LENGTH} characters"]
        if errors:
            raise ValidationError(errors)
        return parameters


class PartCreateSchema(Schema):
    part_id = part_id_field(required=True)
    kind = fields.String(required=True, validate=validate.OneOf(list(KINDS)))
    description = fields.String(load_default="", validate=[validate.Length(max=MAX_DESCRIPTION_LENGTH), NO_NUL])
    parameters = ParametersField(required=True)


def convert_parameters(kind: str, raw: dict[str, Any]) -> dict[str, Any]:
    """Parameters in SI floats; strings with units are converted, a wrong dimension names the field."""
    spec = params_of(kind)
    converted: dict[str, Any] = {}
    errors: dict[str, list[str]] = {}
    for name, value in raw.items():
        param = spec.get(name)
        if param is None or not param.numeric:
            converted[name] = value  # unknown names and text are judged by the kind's rules
            continue
        if isinstance(value, str):
            try:
                converted[name] = parse_quantity(value, param.unit)
            except UnitError as exc:
                errors[f"parameters.{name}"] = [str(exc)]
        elif isinstance(value, int) and abs(value) > sys.float_info.max:
            errors[f"parameters.{name}"] = ["number is too large"]  # a JSON integer of 400 digits, say
        else:
            converted[name] = value
    if errors:
        raise InvalidInput("invalid parameters: " + ", ".join(errors), errors)
    return converted
