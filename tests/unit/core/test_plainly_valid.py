"""The LED string's combined validity test (``led_string_inputs.plainly_valid`` with ``led_heat.plainly_valid``) lets a
call skip its rules only where none of them objects: ``validate`` answers exactly as the rules alone, on valid
rows, on rows with an input at or just past a rule's edge, and on rows with inputs missing or infinite."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
import pytest

from calcsvc.core import led_string, led_string_inputs, thermal_inputs
from calcsvc.core.outcome import PRACTICAL_MAX, Violation

FIELDS = [f.name for f in dataclasses.fields(led_string.LedStringInputs) if f.name != "e_series"]
EDGES = [math.nan, math.inf, -math.inf, 0.0, -0.0, 5e-324, 1e-300, 0.5, np.nextafter(1.0, 0.0), 1.0, 2.5, -1.0,
         -273.15, 25.0, PRACTICAL_MAX, np.nextafter(PRACTICAL_MAX, math.inf), 1e300, 1.7e308]  # fmt: skip
CASES = 4_000


def valid_row(rng: np.random.Generator) -> dict[str, Any]:
    green = rng.random() < 0.5
    row: dict[str, Any] = {
        spec.name: math.nan if spec.default is None else spec.default for spec in thermal_inputs.LED
    } | {
        "supply_v": rng.uniform(7.5, 24.0),
        "supply_tolerance": rng.choice([0.0, 0.05]),
        "vf_typ_v": 3.0 if green else 2.1,
        "vf_min_v": 2.7 if green else 1.9,
        "vf_max_v": 3.5 if green else 2.5,
        "if_max_a": 0.03,
        "leds_in_series": 2.0 if green else 3.0,
        "strings": float(rng.integers(1, 4)),
        "current_a": rng.uniform(0.004, 0.025),
        "switch_drop_v": 0.2,
        "e_series": rng.choice(["E12", "E24", "E96"]),
        "resistor_tolerance": rng.choice([math.nan, 0.01]),
        "ambient_c": rng.choice([25.0, 45.0]),
        "if_derating_knee_c": rng.choice([math.nan, 40.0]),
    }
    return row


def perturbed(row: dict[str, Any], rng: np.random.Generator) -> dict[str, Any]:
    """One input at an edge value, at another input's value, or just beside it."""
    row = dict(row)
    name = str(rng.choice(FIELDS))
    kind = rng.integers(4)
    if kind == 0:
        row[name] = float(rng.choice(EDGES))
    elif kind == 1:
        row[name] = float(np.nextafter(row[str(rng.choice(FIELDS))], rng.choice([-math.inf, math.inf])))
    elif kind == 2:
        row[name] = row[str(rng.choice(FIELDS))]
    else:
        row["e_series"] = rng.choice(["E7", "E192", ""])
    return row


def inputs_of(rows: list[dict[str, Any]]) -> led_string.LedStringInputs:
    columns = {name: np.array([row[name] for row in rows]) for name in rows[0]}
    columns["e_series"] = columns["e_series"].astype(str)
    return led_string.LedStringInputs(**columns)


def by_rules(inputs: led_string.LedStringInputs, monkeypatch: Any) -> list[Violation]:
    with monkeypatch.context() as patch:
        patch.setattr(led_string_inputs, "plainly_valid", lambda i: False)
        return led_string.validate(inputs)


def same(a: list[Violation], b: list[Violation]) -> bool:
    return [(v.field, v.message, v.rows.tolist()) for v in a] == [(v.field, v.message, v.rows.tolist()) for v in b]


@pytest.mark.parametrize("seed", [1, 2])
def test_validate_answers_as_its_rules_alone(seed: int, monkeypatch: Any) -> None:
    rng = np.random.default_rng(seed)
    skipped = refused = 0
    for _ in range(CASES):
        rows = [valid_row(rng) for _ in range(int(rng.integers(1, 4)))]
        for _ in range(int(rng.integers(0, 3))):
            k = int(rng.integers(len(rows)))
            rows[k] = perturbed(rows[k], rng)
        inputs = inputs_of(rows)
        expected = by_rules(inputs, monkeypatch)
        assert same(led_string.validate(inputs), expected), rows
        plainly = led_string_inputs.plainly_valid(inputs)
        assert not (plainly and expected), rows
        skipped += plainly
        refused += bool(expected)
    assert skipped > CASES // 5 and refused > CASES // 5  # both sides well exercised


def test_valid_rows_take_the_combined_test() -> None:
    rng = np.random.default_rng(3)
    assert all(led_string_inputs.plainly_valid(inputs_of([valid_row(rng) for _ in range(3)])) for _ in range(200))


def test_inputs_of_other_shapes_are_left_to_the_rules(monkeypatch: Any) -> None:
    rng = np.random.default_rng(4)
    inputs = inputs_of([valid_row(rng) for _ in range(3)])
    for name in ("supply_v", "vf_min_v", "if_derating_knee_c"):
        scalar = dataclasses.replace(inputs, **{name: getattr(inputs, name)[:1].reshape(())})
        assert not led_string_inputs.plainly_valid(scalar)
        assert same(led_string.validate(scalar), by_rules(scalar, monkeypatch))
