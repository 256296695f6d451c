"""One value's range check (a single request's field) refuses exactly as the column check of a batch does."""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from calcsvc.core.registry import CALCULATIONS

INPUTS = [spec for calc in CALCULATIONS.values() for spec in calc.inputs if not spec.choices]
EDGES = [math.inf, -math.inf, math.nan, 0.0, -0.0, 1.0, 0.5, -1.0, 1e30, 2.5, 1000.0, 1000.5, 10000.0, 1e4 + 1]


def column_refusal(spec: object, value: float) -> str | None:
    found = spec.refusals(np.array([value]))  # type: ignore[attr-defined]
    return found[0][1] if found else None


def test_every_declared_input_at_its_edges() -> None:
    for spec in INPUTS:
        edges = [*EDGES, *(x for x in (spec.minimum, spec.maximum) if x is not None)]
        edges += [math.nextafter(x, s * math.inf) for x in edges[len(EDGES) :] for s in (-1, 1)]
        for value in edges:
            assert spec.refusal(value) == column_refusal(spec, value), (spec.name, value)


@settings(derandomize=True, max_examples=300, deadline=None)
@given(st.sampled_from(INPUTS), st.floats(allow_nan=True, allow_infinity=True))
def test_any_value(spec: object, value: float) -> None:
    assert spec.refusal(value) == column_refusal(spec, value)  # type: ignore[attr-defined]
