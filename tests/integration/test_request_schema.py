"""A calculation's request body loads field by field when it holds no error: the same inputs, in the same order,
as marshmallow's own loop, and the same refusal (marshmallow's, word for word) when it holds one."""

from __future__ import annotations

from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from marshmallow import Schema, ValidationError

from calcsvc.core.registry import CALCULATIONS
from calcsvc.web.calc_schemas import request_schema
from tests.integration.test_envelope_response import BODIES

SCHEMAS = {name: request_schema(calc)() for name, calc in CALCULATIONS.items()}

VALUES = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.floats(min_value=1e-9, max_value=1e3),
    st.integers(min_value=-5, max_value=10**20),
    st.booleans(),
    st.none(),
    st.sampled_from(
        ["20 mA", "4.7 kohm", "12 V", "0.5 V/us", "20 kHz", "E24", "E12", "led-red-5mm", "nope", "", "1,5 V"]
    ),
    st.lists(st.integers(), max_size=2),
)


def bodies(schema: Schema) -> st.SearchStrategy[dict[str, Any]]:
    names = sorted(schema.load_fields)
    return st.dictionaries(st.sampled_from([*names, "unknown_field"]), VALUES, max_size=len(names))


def marshmallow_load(schema: Schema, body: Any) -> tuple[str, Any]:
    try:
        return "loaded", list(Schema.load(schema, body).items())  # marshmallow's own path
    except ValidationError as exc:
        return "refused", exc.messages


def fast_load(schema: Schema, body: Any) -> tuple[str, Any]:
    try:
        return "loaded", list(schema.load(body).items())
    except ValidationError as exc:
        return "refused", exc.messages


@pytest.mark.parametrize("name", sorted(SCHEMAS))
@settings(max_examples=150, deadline=None, derandomize=True)
@given(data=st.data())
def test_a_body_loads_as_marshmallow_loads_it(name: str, data: st.DataObject) -> None:
    schema = SCHEMAS[name]
    body = data.draw(bodies(schema))
    assert fast_load(schema, body) == marshmallow_load(schema, body)


@pytest.mark.parametrize("name", sorted(SCHEMAS))
def test_valid_bodies_load_as_marshmallow_loads_them(name: str) -> None:
    """Bodies every calculation answers (the random bodies above are mostly refused)."""
    schema = SCHEMAS[name]
    body = BODIES[name]
    loaded = fast_load(schema, body)
    assert loaded[0] == "loaded" and loaded == marshmallow_load(schema, body)
    assert fast_load(schema, {}) == marshmallow_load(schema, {})
    assert fast_load(schema, [body]) == marshmallow_load(schema, [body])
