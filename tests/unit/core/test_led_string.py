"""Tests for the LED string series-resistor calculation."""

from __future__ import annotations

import dataclasses
import itertools
import math
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from calcsvc.core import eseries, led_string, thermal_inputs
from calcsvc.core.led_string import LedStringInputs, compute, validate
from calcsvc.core.outcome import DomainError, Outcome
from calcsvc.core.thermal_inputs import AMBIENT_C

# Thermal voltage kT/q at 300 K from the exact SI 2019 values of k and q.
BOLTZMANN = 1.380649e-23
ELEMENTARY_CHARGE = 1.602176634e-19
VT_300K = BOLTZMANN * 300.0 / ELEMENTARY_CHARGE  # ≈ 25.85 mV

DEFAULTS: dict[str, Any] = {
    "supply_v": 12.0,
    "supply_tolerance": 0.0,
    "vf_typ_v": 2.0,
    "vf_min_v": 1.8,
    "vf_max_v": 2.2,
    "if_max_a": 0.03,
    "leds_in_series": 3.0,
    "strings": 1.0,
    "current_a": 0.02,
    "switch_drop_v": 0.0,
    "e_series": "E24",
    "resistor_tolerance": math.nan,
    # Heat at the declared defaults, but with a constant forward voltage, so the hand calculations of the
    # constant-drop model hold exactly; the drift is tested in test_led_heat.py.
    **{spec.name: math.nan if spec.default is None else spec.default for spec in (AMBIENT_C, *thermal_inputs.LED)},
    "vf_tempco_v_per_k": 0.0,
}


def make(**overrides: Any) -> LedStringInputs:
    """Inputs from DEFAULTS; each value a scalar (one row) or a list (several rows)."""
    values = {**DEFAULTS, **overrides}
    n = max((len(v) for v in values.values() if isinstance(v, list)), default=1)
    arrays: dict[str, np.ndarray] = {}
    for name, value in values.items():
        if name == "e_series":
            arrays[name] = np.broadcast_to(np.asarray(value, dtype=str), (n,)).copy()
        else:
            arrays[name] = np.broadcast_to(np.asarray(value, dtype=np.float64), (n,)).copy()
    return LedStringInputs(**arrays)


def checks(out: Outcome) -> dict[str, Any]:
    return {c.name: c for c in out.checks}


def messages(notices: list[Any]) -> str:
    return " | ".join(n.message for n in notices)


def fields_of(inputs: LedStringInputs) -> list[str]:
    with pytest.raises(DomainError) as err:
        compute(inputs)
    return [v.field for v in err.value.violations]


# ---- worked examples -------------------------------------------------------------------------------------


def test_worked_example_three_red_leds_on_12_v() -> None:
    # Hand calculation with Ohm's law and Kirchhoff's voltage law:
    # V_R = 12 − 3 × 2.0 = 6 V; R = 6 V / 20 mA = 300 Ω, which is in E24 (3.0, IEC 60063 from memory).
    out = compute(make(strings=4.0))
    r = out.results
    assert r["resistor_exact_ohm"][0] == pytest.approx(300.0, rel=1e-12)
    assert r["resistor_ohm"][0] == 300.0
    assert r["current_a"][0] == pytest.approx(0.020, rel=1e-12)  # 6 V / 300 Ω
    assert r["resistor_power_w"][0] == pytest.approx(0.12, rel=1e-12)  # (20 mA)² × 300 Ω
    assert r["led_power_w"][0] == pytest.approx(0.12, rel=1e-12)  # 3 × 2.0 V × 20 mA
    assert r["total_current_a"][0] == pytest.approx(0.08, rel=1e-12)  # 4 strings × 20 mA
    assert r["efficiency"][0] == pytest.approx(0.5, rel=1e-12)  # 6 V of LEDs / 12 V supply
    assert r["headroom_v"][0] == pytest.approx(6.0, rel=1e-12)
    # Worst case by hand, E24 default ±5 %: I_min = (12 − 6.6)/315, I_max = (12 − 5.4)/285.
    assert r["current_min_a"][0] == pytest.approx(5.4 / 315.0, rel=1e-12)
    assert r["current_max_a"][0] == pytest.approx(6.6 / 285.0, rel=1e-12)
    assert r["resistor_power_max_w"][0] == pytest.approx(6.6**2 / 285.0, rel=1e-12)  # 0.153 W
    assert r["resistor_rating_w"][0] == 0.5  # 2 × 0.153 W = 0.306 W → 0.5 W (common-practice derating)
    c = checks(out)
    assert c["led_current_rating"].ok[0] and c["headroom"].ok[0] and c["resistor_rating"].ok[0]
    assert out.warnings == [] and out.cautions == []


@pytest.mark.parametrize(
    "noisy",
    [
        {"current_a": 0.02 * (1 + 1e-12)},  # exact resistor 299.99999999940 Ω
        {"current_a": 0.02 * (1 - 1e-12)},  # exact resistor 300.00000000060 Ω
        {"supply_v": 12.0 + 1e-12},
        {"current_a": 0.01 + 0.01, "supply_v": 6.0 + 6.0},
    ],
)
def test_worked_example_is_robust_to_float_noise(noisy: dict[str, float]) -> None:
    # Same hand example: float noise must not push 300 Ω to the next E24 value (330 Ω).
    assert compute(make(**noisy)).results["resistor_ohm"][0] == 300.0


def test_worked_example_rounds_up_to_the_next_standard_value() -> None:
    # Hand calculation: 5 V, one 2.0 V LED, 15 mA → 3 V / 15 mA = 200 Ω; E12 (from memory) has 180, 220
    # → 220 Ω and 3 V / 220 Ω = 13.64 mA, below the target as intended.
    out = compute(make(supply_v=5.0, leds_in_series=1.0, current_a=0.015, e_series="E12"))
    assert out.results["resistor_exact_ohm"][0] == pytest.approx(200.0)
    assert out.results["resistor_ohm"][0] == 220.0
    assert out.results["current_a"][0] == pytest.approx(3.0 / 220.0, rel=1e-12)


def test_switch_drop_and_resistor_tolerance_given() -> None:
    # Hand calculation: V_R = 24 − 6 × 3.1 − 0.2 = 5.2 V; 5.2 V / 20 mA = 260 Ω → E6 330 Ω (from memory);
    # with an explicit ±1 % resistor: I_max = (24 − 6 × 2.8 − 0.2)/(330 × 0.99).
    out = compute(
        make(
            supply_v=24.0,
            leds_in_series=6.0,
            vf_typ_v=3.1,
            vf_min_v=2.8,
            vf_max_v=3.4,
            switch_drop_v=0.2,
            e_series="E6",
            resistor_tolerance=0.01,
        )
    )
    assert out.results["resistor_ohm"][0] == 330.0
    assert out.results["headroom_v"][0] == pytest.approx(5.2)
    assert out.results["current_max_a"][0] == pytest.approx(7.0 / (330.0 * 0.99))
    assert out.results["current_min_a"][0] == pytest.approx(3.4 / (330.0 * 1.01))


# ---- independent numerical check: Shockley diode ---------------------------------------------------------


@pytest.mark.parametrize(
    ("supply", "n_leds", "vf", "current", "switch", "series"),
    [
        (12.0, 3.0, 2.0, 0.020, 0.0, "E24"),
        (5.0, 1.0, 2.0, 0.015, 0.0, "E12"),
        (24.0, 6.0, 3.1, 0.020, 0.2, "E6"),
        (9.0, 2.0, 3.0, 0.350, 0.1, "E96"),
        (3.3, 1.0, 1.9, 0.005, 0.05, "E24"),
    ],
)
def test_current_agrees_with_shockley_diode_solution(
    supply: float, n_leds: float, vf: float, current: float, switch: float, series: str
) -> None:
    # Independent numerical solution with scipy: each LED follows the Shockley diode equation
    # I = Is·(exp(V/(n·Vt)) − 1), ideality n = 2 for LEDs (from memory), Vt = kT/q at 300 K, with Is fitted
    # so the diode drops vf at the design current. Solve Vs − Vsw − N·Vd(I) − I·R = 0 for I with brentq.
    out = compute(
        make(
            supply_v=supply,
            leds_in_series=n_leds,
            vf_typ_v=vf,
            vf_min_v=vf * 0.9,
            vf_max_v=vf * 1.1,
            if_max_a=current * 2,
            current_a=current,
            switch_drop_v=switch,
            e_series=series,
        )
    )
    r = out.results["resistor_ohm"][0]
    ideality = 2.0
    i_s = current / math.expm1(vf / (ideality * VT_300K))

    def loop(i: float) -> float:
        v_diode = ideality * VT_300K * math.log1p(i / i_s)
        return supply - switch - n_leds * v_diode - i * r

    i_shockley = brentq(loop, 0.0, (supply - switch) / r, xtol=1e-15, rtol=1e-14)
    assert out.results["current_a"][0] == pytest.approx(i_shockley, rel=0.05)
    assert i_shockley <= current * 1.001  # the rounded-up resistor keeps the diode current at or below target


# ---- worst case ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("seed", range(6))
def test_worst_case_matches_corner_enumeration(seed: int) -> None:
    # Independent brute force: evaluate Ohm's law at all 2^3 corners of supply (±ts), forward voltage
    # (min/max) and resistance (±tr) and take the extremes.
    rng = np.random.default_rng(seed)
    n_leds = float(rng.integers(1, 6))
    vf_typ = float(rng.uniform(1.7, 3.3))
    vf_min, vf_max = vf_typ * rng.uniform(0.8, 1.0), vf_typ * rng.uniform(1.0, 1.25)
    vsw = float(rng.uniform(0.0, 0.5))
    supply = (n_leds * vf_typ + vsw) * rng.uniform(1.05, 2.5)
    ts, tr = float(rng.uniform(0.0, 0.15)), float(rng.uniform(0.0, 0.1))
    inputs = make(
        supply_v=supply,
        supply_tolerance=ts,
        vf_typ_v=vf_typ,
        vf_min_v=vf_min,
        vf_max_v=vf_max,
        leds_in_series=n_leds,
        current_a=float(rng.uniform(0.005, 0.05)),
        switch_drop_v=vsw,
        resistor_tolerance=tr,
        e_series=str(rng.choice(list(eseries.SERIES))),
    )
    out = compute(inputs)
    r = out.results["resistor_ohm"][0]
    currents, powers = [], []
    for s, vf, rr in itertools.product((1 - ts, 1 + ts), (vf_min, vf_max), (1 - tr, 1 + tr)):
        v_r = supply * s - n_leds * vf - vsw
        currents.append(max(v_r / (r * rr), 0.0))
        powers.append(max(v_r, 0.0) ** 2 / (r * rr))
    assert out.results["current_min_a"][0] == pytest.approx(min(currents), rel=1e-12, abs=1e-15)
    assert out.results["current_max_a"][0] == pytest.approx(max(currents), rel=1e-12)
    assert out.results["resistor_power_max_w"][0] == pytest.approx(max(powers), rel=1e-12)


# ---- violations ------------------------------------------------------------------------------------------


def test_supply_too_low_names_supply_v_with_the_numbers() -> None:
    # 3 × 2.0 V LEDs + 0.3 V switch need more than 6.3 V.
    with pytest.raises(DomainError) as err:
        compute(make(supply_v=[12.0, 5.0], switch_drop_v=0.3))
    (violation,) = err.value.violations
    assert violation.field == "supply_v"
    assert "5 V" in violation.message and "6.3 V" in violation.message
    assert violation.rows.tolist() == [False, True]


def test_supply_equal_to_the_string_drop_is_a_violation() -> None:
    # "At or below": exactly 6 V leaves nothing across the resistor.
    assert fields_of(make(supply_v=6.0)) == ["supply_v"]


@pytest.mark.parametrize(
    ("overrides", "field"),
    [
        ({"supply_v": math.nan}, "supply_v"),
        ({"vf_max_v": math.inf}, "vf_max_v"),
        ({"resistor_tolerance": math.inf}, "resistor_tolerance"),
        ({"supply_v": -12.0}, "supply_v"),
        ({"supply_tolerance": 1.0}, "supply_tolerance"),
        ({"supply_tolerance": -0.01}, "supply_tolerance"),
        ({"vf_min_v": 0.0, "vf_typ_v": 0.1}, "vf_min_v"),
        ({"vf_typ_v": 2.5}, "vf_typ_v"),
        ({"vf_typ_v": 1.7}, "vf_typ_v"),
        ({"if_max_a": 0.0}, "if_max_a"),
        ({"current_a": 0.0}, "current_a"),
        ({"current_a": 1e-305}, "current_a"),  # exact resistor beyond any representable standard value
        ({"leds_in_series": 2.5}, "leds_in_series"),
        ({"leds_in_series": 0.0}, "leds_in_series"),
        ({"strings": 0.0}, "strings"),
        ({"strings": 1.5}, "strings"),
        ({"switch_drop_v": -0.1}, "switch_drop_v"),
        ({"resistor_tolerance": 1.0}, "resistor_tolerance"),
        ({"resistor_tolerance": -0.05}, "resistor_tolerance"),
        ({"e_series": "E7"}, "e_series"),
    ],
)
def test_violations(overrides: dict[str, Any], field: str) -> None:
    inputs = make(**overrides)
    found = validate(inputs)  # never raises
    assert field in [v.field for v in found]
    assert field in fields_of(inputs)
    assert all(v.message and v.rows.dtype == bool for v in found)


def test_unknown_series_message_lists_valid_names() -> None:
    (violation,) = validate(make(e_series=["E24", "E7"]))
    assert "'E7'" in violation.message and "E6, E12, E24, E48, E96, E192" in violation.message
    assert violation.rows.tolist() == [False, True]


def test_valid_inputs_have_no_violations() -> None:
    assert validate(make(supply_v=[12.0, 24.0], e_series=["E6", "E192"])) == []


# ---- checks, warnings, cautions --------------------------------------------------------------------------


def test_target_above_if_max_is_a_failing_check_not_a_violation() -> None:
    out = compute(make(current_a=0.05, if_max_a=0.03))
    check = checks(out)["led_current_rating"]
    assert not check.ok[0] and check.sense == "max"
    assert check.value[0] == out.results["current_max_a"][0] and check.limit[0] == 0.03
    assert "exceeds the LED's maximum forward current" in messages(out.cautions)


def test_low_headroom_fails_and_warns() -> None:
    # 5 × 2.2 V = 11 V of a 12 V supply: 1 V < 10 % × 12 V (common practice).
    out = compute(make(leds_in_series=5.0, vf_typ_v=2.2, vf_max_v=2.4))
    check = checks(out)["headroom"]
    assert not check.ok[0] and check.sense == "min"
    assert check.value[0] == pytest.approx(1.0) and check.limit[0] == pytest.approx(1.2)
    assert "vary widely" in messages(out.warnings)


def test_string_may_not_light_at_low_supply() -> None:
    # 12 V × 0.9 = 10.8 V < 5 × 2.3 V worst-case forward voltage: I_min clamps to 0 (Ohm's law).
    out = compute(make(leds_in_series=5.0, vf_typ_v=2.1, vf_max_v=2.3, supply_tolerance=0.1))
    assert out.results["current_min_a"][0] == 0.0
    assert "may not light" in messages(out.warnings)


def test_hot_resistor_high_power_leds_and_no_adequate_rating() -> None:
    # 48 V, one 3 V LED at 1 A: R = 45 Ω by Ohm's law dissipates about 45 W ≫ 5 W.
    out = compute(
        make(
            supply_v=48.0,
            leds_in_series=1.0,
            vf_typ_v=3.0,
            vf_min_v=2.8,
            vf_max_v=3.2,
            current_a=1.0,
            if_max_a=1.5,
        )
    )
    assert out.results["resistor_ohm"][0] == 47.0  # E24 (from memory) above 45 Ω
    assert np.isnan(out.results["resistor_rating_w"][0])
    check = checks(out)["resistor_rating"]
    assert not check.ok[0] and check.limit[0] == 5.0
    assert check.value[0] == pytest.approx(2 * out.results["resistor_power_max_w"][0])
    text = messages(out.cautions)
    assert "runs hot" in text and "High-power LEDs" in text and "No standard resistor rating" in text


def test_rating_picks_smallest_standard_rating_with_2x_margin() -> None:
    # Common-practice derating: rating ≥ 2 × worst-case dissipation, from 0.125/0.25/0.5/1/2/3/5 W.
    # One 2.0 V LED (1.8 V min), E24 ±5 %; worst-case P = (Vs − 1.8)² / (0.95 R), by hand:
    #   5 V, 10 mA → 300 Ω: 0.036 W;  5 V, 30 mA → 100 Ω: 0.108 W;  12 V, 20 mA → 510 Ω: 0.215 W;
    #   12 V, 40 mA → 270 Ω: 0.406 W; 24 V, 50 mA → 470 Ω: 1.10 W;  24 V, 80 mA → 300 Ω: 1.73 W.
    out = compute(
        make(
            supply_v=[5.0, 5.0, 12.0, 12.0, 24.0, 24.0],
            leds_in_series=1.0,
            current_a=[0.01, 0.03, 0.02, 0.04, 0.05, 0.08],
        )
    )
    assert out.results["resistor_ohm"].tolist() == [300.0, 100.0, 510.0, 270.0, 470.0, 300.0]
    assert out.results["resistor_rating_w"].tolist() == [0.125, 0.25, 0.5, 1.0, 3.0, 5.0]
    need = 2 * out.results["resistor_power_max_w"]
    for k, rating in enumerate(out.results["resistor_rating_w"]):
        assert rating == min(x for x in led_string.POWER_RATINGS_W if x >= need[k])


def test_notices_only_where_they_apply() -> None:
    out = compute(make(if_max_a=[0.03, 0.7]))
    (notice,) = out.cautions
    assert notice.rows.tolist() == [False, True] and "High-power" in notice.message


def test_batch_equals_single_rows() -> None:
    columns = {
        "supply_v": [12.0, 5.0, 24.0],
        "current_a": [0.02, 0.01, 0.03],
        "leds_in_series": [3.0, 1.0, 7.0],
        "e_series": ["E24", "E6", "E96"],
        "resistor_tolerance": [math.nan, 0.01, math.nan],
    }
    batch = compute(make(**columns))
    for k in range(3):
        single = compute(make(**{name: values[k] for name, values in columns.items()}))
        for name, value in single.results.items():
            np.testing.assert_array_equal(batch.results[name][k : k + 1], value)


def test_zero_rows() -> None:
    inputs = dataclasses.replace(
        make(),
        **{f.name: getattr(make(), f.name)[:0] for f in dataclasses.fields(LedStringInputs)},
    )
    assert validate(inputs) == []
    assert all(v.shape == (0,) for v in compute(inputs).results.values())


# ---- properties ------------------------------------------------------------------------------------------


@st.composite
def valid_inputs(draw: st.DrawFn) -> LedStringInputs:
    n = draw(st.integers(min_value=1, max_value=6))
    cols: dict[str, list[Any]] = {name: [] for name in DEFAULTS}
    for _ in range(n):
        leds = draw(st.integers(min_value=1, max_value=12))
        vf = draw(st.floats(min_value=1.5, max_value=4.0))
        vsw = draw(st.floats(min_value=0.0, max_value=1.0))
        cols["leds_in_series"].append(float(leds))
        cols["vf_typ_v"].append(vf)
        cols["vf_min_v"].append(vf * draw(st.floats(min_value=0.8, max_value=1.0)))
        cols["vf_max_v"].append(vf * draw(st.floats(min_value=1.0, max_value=1.3)))
        cols["switch_drop_v"].append(vsw)
        cols["supply_v"].append((leds * vf + vsw) * draw(st.floats(min_value=1.001, max_value=5.0)))
        cols["supply_tolerance"].append(draw(st.floats(min_value=0.0, max_value=0.3)))
        cols["current_a"].append(draw(st.floats(min_value=1e-4, max_value=2.0)))
        cols["if_max_a"].append(draw(st.floats(min_value=1e-4, max_value=3.0)))
        cols["strings"].append(float(draw(st.integers(min_value=1, max_value=50))))
        cols["e_series"].append(draw(st.sampled_from(list(eseries.SERIES))))
        cols["resistor_tolerance"].append(draw(st.one_of(st.just(math.nan), st.floats(0.0, 0.2))))
        cols["ambient_c"].append(draw(st.floats(min_value=-40.0, max_value=85.0)))
        cols["vf_tempco_v_per_k"].append(draw(st.floats(min_value=-0.004, max_value=0.0)))
        cols["if_derating_knee_c"].append(draw(st.one_of(st.just(math.nan), st.floats(-40.0, 100.0))))
        for name in ("led_tj_max_c", "led_rth_jb_k_per_w", "led_rth_ba_k_per_w", "resistor_rated_to_c",
                     "resistor_zero_power_c"):  # fmt: skip
            cols[name].append(DEFAULTS[name])
    return make(**cols)


@settings(max_examples=150, deadline=None, derandomize=True)
@given(inputs=valid_inputs())
def test_property_results_are_sound(inputs: LedStringInputs) -> None:
    assert validate(inputs) == []
    out = compute(inputs)
    r = out.results
    # No NaN for valid finite inputs, except the rating, which is NaN exactly when nothing up to 5 W fits, and
    # the junctions, NaN where a string runs away (the worst case's surely where the nominal one does).
    runaway = ~checks(out)["led_thermal_runaway"].ok
    np.testing.assert_array_equal(np.isnan(r["led_junction_max_c"]), runaway)
    assert not np.any(np.isnan(r["led_junction_c"]) & ~runaway)
    for name, value in r.items():
        if name not in ("resistor_rating_w", "led_junction_c", "led_junction_max_c"):
            assert np.all(np.isfinite(value)), name
    np.testing.assert_array_equal(np.isnan(r["resistor_rating_w"]), 2 * r["resistor_power_max_w"] > 5.0)
    # The chosen resistor is a standard value at or above the exact one (1e-9 noise allowance).
    assert np.all(r["resistor_ohm"] >= r["resistor_exact_ohm"] * (1 - 1e-9))
    for k, name in enumerate(inputs.e_series):
        assert eseries.is_standard(r["resistor_ohm"][k], str(name))
    # Currents non-negative and ordered; nominal at or below target (1e-9 noise allowance).
    assert np.all(r["current_min_a"] >= 0)
    assert np.all(r["current_min_a"] <= r["current_a"] * (1 + 1e-12))
    assert np.all(r["current_a"] <= r["current_max_a"] * (1 + 1e-12))
    assert np.all(r["current_a"] <= inputs.current_a * (1 + 1e-9))
    # Ohm's law and power bookkeeping.
    np.testing.assert_allclose(r["current_a"] * r["resistor_ohm"], r["headroom_v"], rtol=1e-12)
    assert np.all(r["resistor_power_max_w"] >= r["resistor_power_w"] * (1 - 1e-12))
    assert np.all((r["efficiency"] > 0) & (r["efficiency"] < 1))


@settings(max_examples=100, deadline=None, derandomize=True)
@given(
    base=valid_inputs(),
    targets=st.lists(st.floats(min_value=1e-4, max_value=2.0), min_size=2, max_size=12),
)
def test_property_current_falls_as_resistance_rises(base: LedStringInputs, targets: list[float]) -> None:
    # Same string, different target currents → different standard resistors; by Ohm's law with a fixed
    # voltage across the resistor, the string current must not increase with resistance.
    row = {f.name: getattr(base, f.name)[0].item() for f in dataclasses.fields(LedStringInputs)}
    out = compute(make(**{**row, "current_a": targets}))
    order = np.argsort(out.results["resistor_ohm"], kind="stable")
    resistances = out.results["resistor_ohm"][order]
    for name in ("current_a", "current_min_a", "current_max_a"):
        currents = out.results[name][order]
        assert np.all(np.diff(currents)[np.diff(resistances) > 0] <= 0), name


def test_minimum_rating_is_the_first_standard_rating_of_twice_the_dissipation() -> None:
    ratings = led_string.POWER_RATINGS_W.tolist()
    edges = [r / 2.0 for r in ratings] + [math.nextafter(r / 2.0, math.inf) for r in ratings]
    dissipation = np.array([*edges, 0.0, -0.0, 1e-300, 2.5000001, math.inf, math.nan, *np.linspace(0.0, 3.0, 301)])
    expected = [min((r for r in ratings if r >= 2.0 * d), default=math.nan) for d in dissipation.tolist()]
    np.testing.assert_array_equal(led_string.minimum_rating_w(dissipation), expected)
