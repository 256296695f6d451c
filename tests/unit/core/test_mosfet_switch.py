"""The N-channel MOSFET low-side switch: gate resistor, on-resistance, losses, heat, PWM timing and flicker."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calcsvc.core.mosfet_switch import MosfetSwitchInputs, compute, validate
from calcsvc.core.outcome import DomainError, Outcome

NAN = math.nan
# A small logic-level part (invented, class-typical) switching 0.7 A from a 3.3 V pin rated 10 mA.
DEFAULTS: dict[str, Any] = {
    "vds_max_v": 30.0,
    "id_max_a": 3.0,
    "vgs_1_v": 2.5,
    "rds_on_1_ohm": 0.1,
    "vgs_2_v": 4.5,
    "rds_on_2_ohm": 0.06,
    "vgs_3_v": 10.0,
    "rds_on_3_ohm": 0.045,
    "vgs_th_max_v": 1.5,
    "qg_total_c": 2.5e-9,
    "power_max_w": 0.8,
    "tj_max_c": 150.0,
    "rth_ja_k_per_w": 150.0,
    "drain_current_a": 0.7,
    "supply_max_v": 12.6,
    "drive_high_v": 2.8,
    "drive_low_v": 0.0,
    "driver_current_max_a": 0.01,
    "drive_supply_v": 3.3,
    "switching_time_s": NAN,
    "gate_pulldown_ohm": 100e3,
    "e_series": "E24",
    "resistor_tolerance": NAN,
    "duty_cycle": 0.5,
    "ambient_c": 45.0,
    "pwm_frequency_hz": 1250.0,
    "pwm_resolution_bits": 5.0,
    "modulation_depth": 1.0,
    "camera_frame_rate_hz": NAN,
}


def make(**overrides: Any) -> MosfetSwitchInputs:
    values = {**DEFAULTS, **overrides}
    n = max((len(v) for v in values.values() if isinstance(v, list)), default=1)
    arrays = {
        name: np.broadcast_to(np.asarray(value, dtype=str if name == "e_series" else np.float64), (n,)).copy()
        for name, value in values.items()
    }
    return MosfetSwitchInputs(**arrays)


def result(out: Outcome, name: str) -> float:
    return float(out.results[name][0])


def check(out: Outcome, name: str) -> bool:
    return bool(next(c for c in out.checks if c.name == name).ok[0])


def test_design_passes_with_its_numbers_by_hand() -> None:
    out = compute(make())
    # Pin limit: 3.3 V / (10 mA · 0.95) = 347 Ω → 360 Ω (E24, at or above); the wanted edge (a twentieth of
    # 1/(1250·32) s = 1.25 µs) would allow only 1.25e-6·0.75/2.5e-9 = 375 Ω, so the pin decides.
    assert result(out, "rg_pin_min_ohm") == pytest.approx(3.3 / (0.01 * 0.95))
    assert result(out, "rg_exact_ohm") == pytest.approx(1.25e-6 * 0.75 / 2.5e-9)
    assert result(out, "rg_ohm") == 360.0
    # Gate: 2.8 V · 100k/(100k + 360); on-resistance interpolated between 2.5 V and 4.5 V.
    gate = 2.8 * 100e3 / (100e3 + 360.0)
    assert result(out, "gate_v") == pytest.approx(gate)
    assert result(out, "rds_on_ohm") == pytest.approx(0.1 + (gate - 2.5) / 2.0 * (0.06 - 0.1))
    # Conduction loss by Ohm's law, I²·R·D at the hot resistance.
    assert result(out, "conduction_loss_w") == pytest.approx(0.7**2 * result(out, "rds_on_hot_ohm") * 0.5)
    # Q = I·t on each edge.
    assert result(out, "turn_on_s") == pytest.approx(2.5e-9 * 360.0 / (gate - 1.5))
    assert result(out, "turn_off_s") == pytest.approx(2.5e-9 * 360.0 / 0.75)  # a pin low at 0 V: no resistance
    # Thermal Ohm's law with the total loss.
    assert result(out, "junction_c") == pytest.approx(45.0 + 150.0 * result(out, "mosfet_power_w"))
    assert all(bool(c.ok[0]) for c in out.checks)
    assert out.cautions == []
    # A pin low at 0.5 V at its rated 10 mA sinks through 50 Ω besides Rg (a resistive pin).
    slower = compute(make(drive_low_v=0.5))
    assert result(slower, "turn_off_s") == pytest.approx(2.5e-9 * (360.0 + 50.0) / 0.75)


def test_a_switching_time_the_pin_cannot_give_fails() -> None:
    out = compute(make(switching_time_s=100e-9))
    assert result(out, "rg_ohm") == 360.0  # the pin's smallest, not the 30 Ω the time would want
    assert not check(out, "edges_within_wanted_time")


def test_a_part_stated_only_at_10_v_is_refused_for_a_3v3_pin() -> None:
    standard = make(
        vgs_1_v=10.0, rds_on_1_ohm=0.16, vgs_2_v=NAN, rds_on_2_ohm=NAN, vgs_3_v=NAN, rds_on_3_ohm=NAN, vgs_th_max_v=2.0
    )
    with pytest.raises(DomainError) as refused:
        compute(standard)
    (violation,) = refused.value.violations
    assert violation.field == "drive_high_v"
    assert "not a logic-level part" in violation.message
    assert "vgs_1_v 10 V" in violation.message and "threshold up to 2 V" in violation.message


def test_a_threshold_above_the_pin_is_refused_as_unstated_drive() -> None:
    assert [
        v.field
        for v in validate(
            make(
                vgs_th_max_v=3.0,
                vgs_1_v=4.5,
                rds_on_1_ohm=0.06,
                vgs_2_v=10.0,
                rds_on_2_ohm=0.045,
                vgs_3_v=NAN,
                rds_on_3_ohm=NAN,
            )
        )
    ] == ["drive_high_v"]


def test_points_out_of_order_are_refused() -> None:
    fields = {v.field for v in validate(make(rds_on_2_ohm=0.2))}
    assert "rds_on_2_ohm" in fields
    fields = {v.field for v in validate(make(vgs_2_v=NAN))}
    assert "rds_on_2_ohm" in fields


def test_switching_loss_is_the_textbook_triangle() -> None:
    out = compute(make())
    edges = result(out, "turn_on_s") + result(out, "turn_off_s")
    assert result(out, "switching_loss_w") == pytest.approx(12.6 * 0.7 * edges * 1250.0 / 6.0)


def test_a_fine_pwm_fails_the_on_time_check_with_its_numbers() -> None:
    out = compute(make(pwm_resolution_bits=10.0))
    c = next(c for c in out.checks if c.name == "shortest_pulse_covers_edges")
    assert not bool(c.ok[0])
    assert float(c.limit[0]) == pytest.approx(1 / (1250.0 * 1024))
    assert float(c.value[0]) == pytest.approx(10 * (result(out, "turn_on_s") + result(out, "turn_off_s")))


def test_flicker_below_1250_hz_at_full_depth_is_cautioned() -> None:
    out = compute(make(pwm_frequency_hz=500.0))
    assert not check(out, "flicker_low_risk")
    assert result(out, "flicker_low_risk_limit") == pytest.approx(0.4)  # 0.08 %/Hz · 500 Hz (from memory)
    assert any("IEEE Std 1789-2015" in c.message for c in out.cautions)
    assert check(compute(make(pwm_frequency_hz=500.0, modulation_depth=0.3)), "flicker_low_risk")


def test_static_switch_has_no_switching_loss_and_no_pwm_checks() -> None:
    out = compute(make(pwm_frequency_hz=NAN))
    assert result(out, "switching_loss_w") == 0.0
    assert math.isnan(result(out, "shortest_on_time_s"))
    assert check(out, "shortest_pulse_covers_edges") and check(out, "flicker_low_risk")


def test_camera_near_a_multiple_warns() -> None:
    out = compute(make(pwm_frequency_hz=2011.0, camera_frame_rate_hz=30.0))
    assert result(out, "camera_alias_hz") == pytest.approx(1.0)
    assert any("frame rate" in w.message for w in out.warnings)


def test_no_pulldown_warns_and_recommends_one() -> None:
    out = compute(make(gate_pulldown_ohm=NAN))
    assert result(out, "gate_v") == 2.8
    # min(100 kΩ, 0.75 V/(2·1 µA)) = 100 kΩ (common practice 10–100 kΩ).
    assert result(out, "gate_pulldown_recommended_ohm") == 100e3
    assert any("pull-down" in w.message for w in out.warnings)


def test_overheating_part_is_cautioned() -> None:
    out = compute(make(drain_current_a=2.5, duty_cycle=1.0))
    assert not check(out, "junction_temperature")
    assert out.cautions


@settings(derandomize=True, max_examples=60, deadline=None)
@given(st.floats(0.01, 2.5), st.floats(0.0, 1.0), st.floats(-20.0, 60.0))
def test_more_current_never_cools(current: float, duty: float, ambient: float) -> None:
    low = compute(make(drain_current_a=current, duty_cycle=duty, ambient_c=ambient))
    high = compute(make(drain_current_a=current * 1.1, duty_cycle=duty, ambient_c=ambient))
    a, b = result(low, "junction_c"), result(high, "junction_c")
    assert math.isnan(b) or b >= a - 1e-9


@st.composite
def wide_inputs(draw: st.DrawFn) -> MosfetSwitchInputs:
    vth = draw(st.floats(0.5, 4.0))
    v1 = vth * draw(st.floats(1.01, 3.0))
    r1 = draw(st.floats(1e-3, 10.0))
    return make(
        vgs_th_max_v=vth,
        vgs_1_v=v1,
        rds_on_1_ohm=r1,
        vgs_2_v=draw(st.one_of(st.just(NAN), st.floats(1.01, 3.0).map(lambda k: v1 * k))),
        rds_on_2_ohm=r1 * draw(st.floats(0.3, 1.0)),
        vgs_3_v=NAN,
        rds_on_3_ohm=NAN,
        qg_total_c=draw(st.floats(1e-10, 1e-7)),
        drive_high_v=v1 * draw(st.floats(1.0, 3.0)),
        drive_low_v=draw(st.floats(0.0, 0.5)),
        drive_supply_v=NAN,
        driver_current_max_a=draw(st.one_of(st.just(NAN), st.floats(1e-3, 0.1))),
        drain_current_a=draw(st.floats(1e-3, 20.0)),
        gate_pulldown_ohm=draw(st.one_of(st.just(NAN), st.floats(1e3, 1e6))),
        duty_cycle=draw(st.floats(0.0, 1.0)),
        ambient_c=draw(st.floats(-40.0, 100.0)),
        pwm_frequency_hz=draw(st.one_of(st.just(NAN), st.floats(10.0, 1e5))),
        pwm_resolution_bits=float(draw(st.integers(1, 16))),
        modulation_depth=draw(st.floats(0.0, 1.0)),
    )


@settings(derandomize=True, max_examples=150, deadline=None)
@given(inputs=wide_inputs())
def test_property_valid_inputs_give_sound_results(inputs: MosfetSwitchInputs) -> None:
    # Rows that fit (vgs_2 given with its resistance, the pin above vgs_1 after the pull-down) compute; the
    # results are finite except where they do not apply, and every check agrees with its value and limit.
    if np.isnan(inputs.vgs_2_v[0]):
        inputs = dataclasses.replace(inputs, rds_on_2_ohm=np.array([NAN]))
    assert validate(inputs) == []
    out = compute(inputs)
    r = out.results
    if r["gate_v"][0] < inputs.vgs_1_v[0]:  # the pull-down divides the pin under the stated drive
        assert not bool(next(c for c in out.checks if c.name == "gate_reaches_stated_drive").ok[0])
        assert any("does not reach" in c.message for c in out.cautions)
        return
    no_pwm = bool(np.isnan(inputs.pwm_frequency_hz[0]))
    pwm_only = ("shortest_on_time_s", "duty_step", "flicker_low_risk_limit", "flicker_no_effect_limit")
    runaway = bool(np.isnan(r["junction_c"][0]))
    for name, value in r.items():
        if runaway and name in ("junction_c", "rds_on_hot_ohm", "conduction_loss_w", "mosfet_power_w"):
            continue  # cautioned, failing checks
        if (no_pwm and name in pwm_only) or name in ("camera_alias_hz", "rg_pin_min_ohm"):
            continue  # does not apply: no PWM, no camera, no pin rating
        assert np.isfinite(value[0]), name
    assert r["rg_ohm"][0] > 0 and r["turn_off_s"][0] > 0 and r["turn_on_s"][0] > 0
    for c in out.checks:
        if np.isfinite(c.limit[0]) and np.isfinite(c.value[0]):
            held = c.value[0] <= c.limit[0] * (1 + 1e-9) if c.sense == "max" else c.value[0] >= c.limit[0]
            assert bool(c.ok[0]) == bool(held), c.name
