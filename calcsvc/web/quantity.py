"""A marshmallow field for physical quantities: a JSON number in SI units, or a string with a unit."""

from __future__ import annotations

import math
from typing import Any

from marshmallow import ValidationError, fields

from calcsvc.core.spec import Input
from calcsvc.units import MAX_QUANTITY_LENGTH, QUANTITY_PATTERN, VOLTAGE_RATIO, UnitError, parse_quantity


class Quantity(fields.Field):
    """Float in ``unit`` (SI), or a string such as ``"4.7 kohm"`` converted to it.

    ``minimum``/``exclusive_minimum``/``maximum`` are enforced after conversion (by ``Input.refusal``) and
    published in the spec.
    """

    def __init__(
        self,
        unit: str,
        *,
        minimum: float | None = None,
        exclusive_minimum: bool = False,
        maximum: float | None = None,
        integer: bool = False,
        description: str = "",
        pattern: str = QUANTITY_PATTERN,
        **kwargs: Any,
    ) -> None:
        self.unit = unit
        # The declared range, so the message comes from the one checker batches use too.
        self.range = Input(
            "",
            unit,
            description,
            minimum=minimum,
            exclusive_minimum=exclusive_minimum,
            maximum=maximum,
            integer=integer,
        )
        number: dict[str, Any] = {"type": "integer" if integer else "number"}
        if minimum is not None:
            number["exclusiveMinimum" if exclusive_minimum else "minimum"] = minimum
        if maximum is not None:
            number["maximum"] = maximum
        unit_text = "V/V" if unit == "dimensionless" else unit
        metadata = dict(kwargs.pop("metadata", {}))
        if unit == VOLTAGE_RATIO:
            description = f"{description}; a string in dB is read as 20·log10 of the voltage ratio".lstrip("; ")
        metadata.setdefault("description", f"{description} [{unit_text}]".strip())
        metadata["x-unit"] = unit_text
        if integer:
            metadata["oneOf"] = [number]
        else:
            # The parser's own pattern and length limit, so the published schema and the server agree.
            text = {"type": "string", "maxLength": MAX_QUANTITY_LENGTH, "pattern": pattern}
            metadata["oneOf"] = [number, text]
        super().__init__(metadata=metadata, **kwargs)

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> float:
        if isinstance(value, bool):
            raise ValidationError("must be a number, not a boolean")
        if isinstance(value, int | float):
            try:
                number = float(value)
            except OverflowError as exc:
                raise ValidationError("number is too large") from exc
        elif isinstance(value, str):
            try:
                number = parse_quantity(value, self.unit)
            except UnitError as exc:
                raise ValidationError(str(exc)) from exc
        else:
            raise ValidationError("must be a number or a string with a unit")
        if math.isnan(number):  # NaN means "not given" to the checker; a caller who sends one is refused here
            raise ValidationError("must be a finite number")
        refused = self.range.refusal(number)
        if refused:
            raise ValidationError(refused)
        return number

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> float | None:
        return None if value is None else float(value)
