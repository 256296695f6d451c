"""Evaluating in blocks of rows (calcsvc.core.blocks) answers exactly as one evaluation of every row: results,
checks, notices (rows and order) and, for invalid rows, the violations with their messages and row numbers."""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from typing import Any

import numpy as np
import pytest

from calcsvc.core import bjt_switch, blocks, led_string, thermal_inputs
from calcsvc.core.outcome import Check, DomainError, Outcome

ROWS = 1_000
SMALL_BLOCK = 64  # 16 blocks, the last one short


def led_rows(n: int, seed: int) -> led_string.LedStringInputs:
    """Varied valid LED strings: optional inputs given on some rows only, warm and hot ambients, three series."""
    rng = np.random.default_rng(seed)
    green = rng.random(n) < 0.5
    some = rng.random(n) < 0.3
    heat = {spec.name: np.full(n, math.nan if spec.default is None else spec.default) for spec in thermal_inputs.LED}
    heat["if_derating_knee_c"] = np.where(some, 40.0, math.nan)
    return led_string.LedStringInputs(
        supply_v=np.round(rng.uniform(7.5, 24.0, n), 3),
        supply_tolerance=rng.choice([0.0, 0.05, 0.1], n),
        vf_typ_v=np.where(green, 3.0, 2.1),
        vf_min_v=np.where(green, 2.7, 1.9),
        vf_max_v=np.where(green, 3.5, 2.5),
        if_max_a=rng.choice([0.02, 0.03, 0.35], n),
        leds_in_series=np.where(green, 2.0, 3.0),
        strings=rng.integers(1, 4, n).astype(np.float64),
        current_a=np.round(rng.uniform(0.004, 0.04, n), 5),
        switch_drop_v=np.full(n, 0.2),
        e_series=rng.choice(["E12", "E24", "E96"], n),
        resistor_tolerance=np.where(rng.random(n) < 0.2, 0.02, math.nan),
        ambient_c=rng.choice([25.0, 45.0, 70.0], n),
        **heat,
    )


def switch_rows(n: int, seed: int) -> bjt_switch.BjtSwitchInputs:
    """Varied valid NPN switches: PWM, rated voltages and pull-downs given on some rows only."""
    rng = np.random.default_rng(seed)
    some = rng.random(n) < 0.3
    defaults = {spec.name: spec.default for spec in bjt_switch.SPEC.inputs}
    columns: dict[str, Any] = {
        name: np.full(n, math.nan if value is None else value, dtype=str if name == "e_series" else np.float64)
        for name, value in defaults.items()
    }
    columns |= {
        "hfe_min": rng.uniform(30.0, 300.0, n),
        "vbe_sat_v": np.full(n, 0.75),
        "vce_sat_v": np.full(n, 0.2),
        "ic_max_a": rng.choice([0.2, 0.5, 1.0], n),
        "power_max_w": rng.choice([0.3, 0.5], n),
        "collector_current_a": rng.uniform(0.01, 0.4, n),
        "drive_high_v": rng.choice([3.3, 5.0], n),
        "drive_low_v": np.zeros(n),
        "vce_sat_forced_beta": np.full(n, 10.0),
        "base_junctions": np.ones(n),
        "vceo_max_v": np.where(some, 40.0, math.nan),
        "supply_max_v": np.where(rng.random(n) < 0.5, 12.0, math.nan),
        "rbe_ohm": np.where(some, 10_000.0, math.nan),
        "duty_cycle": rng.choice([0.5, 1.0], n),
        "pwm_frequency_hz": np.where(some, 1_000.0, math.nan),
        "e_series": rng.choice(["E12", "E24"], n),
    }
    return bjt_switch.BjtSwitchInputs(
        **{f.name: columns[f.name] for f in dataclasses.fields(bjt_switch.BjtSwitchInputs)}
    )


def evaluated(compute: Callable[[Any], Outcome], inputs: Any, block_rows: int, monkeypatch: Any) -> Any:
    """The outcome, or the DomainError's violations, with ``block_rows`` rows per block."""
    monkeypatch.setattr(blocks, "BLOCK_ROWS", block_rows)
    monkeypatch.setattr(blocks, "BLOCKED_FROM", 0)
    try:
        return compute(inputs)
    except DomainError as error:
        return error.violations


def assert_same(blocked: Any, whole: Any) -> None:
    """Identical answers: same names, messages and order, arrays equal in value and dtype."""
    if isinstance(whole, list):
        assert [(v.field, v.message) for v in blocked] == [(v.field, v.message) for v in whole]
        for a, b in zip(blocked, whole, strict=True):
            np.testing.assert_array_equal(a.rows, b.rows)
        return
    assert list(blocked.results) == list(whole.results)
    for name, column in whole.results.items():
        assert blocked.results[name].dtype == column.dtype, name
        np.testing.assert_array_equal(blocked.results[name], column, err_msg=name)
    assert [(c.name, c.sense, c.detail) for c in blocked.checks] == [(c.name, c.sense, c.detail) for c in whole.checks]
    for a, b in zip(blocked.checks, whole.checks, strict=True):
        for column in ("ok", "value", "limit"):
            np.testing.assert_array_equal(getattr(a, column), getattr(b, column), err_msg=f"{a.name}.{column}")
    for kind in ("warnings", "cautions"):
        assert [n.message for n in getattr(blocked, kind)] == [n.message for n in getattr(whole, kind)], kind
        for a, b in zip(getattr(blocked, kind), getattr(whole, kind), strict=True):
            np.testing.assert_array_equal(a.rows, b.rows, err_msg=a.message)


CASES = [(led_string.compute, led_rows), (bjt_switch.compute, switch_rows)]


@pytest.mark.parametrize(("compute", "rows"), CASES, ids=["led-string", "bjt-switch"])
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_blocks_answer_as_one_evaluation(compute: Any, rows: Any, seed: int, monkeypatch: Any) -> None:
    inputs = rows(ROWS, seed)
    whole = evaluated(compute, inputs, 10**9, monkeypatch)
    assert isinstance(whole, Outcome) and whole.warnings and whole.cautions
    assert_same(evaluated(compute, inputs, SMALL_BLOCK, monkeypatch), whole)


def shared(outcome: Outcome, inputs: Any) -> list[set[str]]:
    """Which of the outcome's arrays and the inputs are one and the same array."""
    arrays = {f"input {f.name}": getattr(inputs, f.name) for f in dataclasses.fields(inputs)}
    arrays |= {f"result {name}": column for name, column in outcome.results.items()}
    for c in outcome.checks:
        arrays |= {f"{c.name}.{column}": getattr(c, column) for column in ("ok", "value", "limit")}
    groups: dict[int, set[str]] = {}
    for label, array in arrays.items():
        groups.setdefault(id(array), set()).add(label)
    return sorted((group for group in groups.values() if len(group) > 1), key=sorted)


@pytest.mark.parametrize(("compute", "rows"), CASES, ids=["led-string", "bjt-switch"])
def test_blocks_share_arrays_as_one_evaluation_does(compute: Any, rows: Any, monkeypatch: Any) -> None:
    inputs = rows(ROWS, 6)
    whole = shared(evaluated(compute, inputs, 10**9, monkeypatch), inputs)
    assert whole  # a check's value that is also a result, a limit that is an input
    assert shared(evaluated(compute, inputs, SMALL_BLOCK, monkeypatch), inputs) == whole


@pytest.mark.parametrize(("compute", "rows"), CASES, ids=["led-string", "bjt-switch"])
def test_notices_keep_their_order_when_blocks_raise_different_ones(compute: Any, rows: Any, monkeypatch: Any) -> None:
    # Sorted by which notices a row raises, so the first blocks and the last raise different sets.
    inputs = rows(ROWS, 4)
    whole = evaluated(compute, inputs, 10**9, monkeypatch)
    key = np.zeros(ROWS, dtype=np.int64)
    for j, notice in enumerate(whole.warnings + whole.cautions):
        key += notice.rows.astype(np.int64) << j
    order = np.argsort(key, kind="stable")
    ordered = dataclasses.replace(
        inputs, **{f.name: getattr(inputs, f.name)[order] for f in dataclasses.fields(inputs)}
    )
    assert_same(evaluated(compute, ordered, SMALL_BLOCK, monkeypatch), evaluated(compute, ordered, 10**9, monkeypatch))


def test_a_refused_row_keeps_its_number_and_message(monkeypatch: Any) -> None:
    inputs = led_rows(ROWS, 5)
    bad = {"supply_v": (700, 1.0), "vf_min_v": (900, -1.0), "leds_in_series": (950, 2.5), "current_a": (999, 1e-310)}
    columns = {name: getattr(inputs, name).copy() for name in bad}
    for name, (row, value) in bad.items():
        columns[name][row] = value
    inputs = dataclasses.replace(inputs, **columns)
    whole = evaluated(led_string.compute, inputs, 10**9, monkeypatch)
    blocked = evaluated(led_string.compute, inputs, SMALL_BLOCK, monkeypatch)
    assert_same(blocked, whole)
    assert {v.field: int(np.flatnonzero(v.rows)[0]) for v in blocked} == {"supply_v": 700, "vf_min_v": 900,
                                                                            "leds_in_series": 950}  # fmt: skip
    # Once those rows are gone, the rule judged only when all else holds refuses the last row, as without blocks.
    kept = np.ones(ROWS, dtype=bool)
    kept[[700, 900, 950]] = False
    rest = dataclasses.replace(inputs, **{f.name: getattr(inputs, f.name)[kept] for f in dataclasses.fields(inputs)})
    blocked = evaluated(led_string.compute, rest, SMALL_BLOCK, monkeypatch)
    assert_same(blocked, evaluated(led_string.compute, rest, 10**9, monkeypatch))
    assert [(v.field, int(np.flatnonzero(v.rows)[0])) for v in blocked] == [("current_a", ROWS - 4)]


@dataclasses.dataclass(frozen=True)
class Levels:
    x: np.ndarray


def judged_when_high(i: Levels) -> Outcome:
    """A check only where some row is high: blocks without such a row do not line up with the others."""
    checks = [Check("high", i.x <= 90.0, i.x, np.full_like(i.x, 90.0), "max", "")] if (i.x > 50.0).any() else []
    return Outcome(results={"twice": 2.0 * i.x}, checks=checks)


def test_blocks_that_do_not_line_up_are_evaluated_as_one(monkeypatch: Any) -> None:
    inputs = Levels(np.arange(100.0))
    monkeypatch.setattr(blocks, "BLOCK_ROWS", 8)
    monkeypatch.setattr(blocks, "BLOCKED_FROM", 0)
    assert_same(blocks.evaluate(inputs, lambda i: [], judged_when_high, validated=False), judged_when_high(inputs))
