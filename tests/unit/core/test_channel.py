"""Tests for the whole-channel review (drive pin → NPN switch → LED strings → supply, optional front stage)."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calcsvc.core import channel_thermal, eseries
from calcsvc.core.channel import FRONT_STAGE_FIELDS, ChannelInputs, review, validate
from calcsvc.core.channel_front import OPAMP_STAGE_FIELDS
from calcsvc.core.channel_mosfet import MOSFET_ONLY
from calcsvc.core.outcome import DomainError

# The greenhouse grow-light demo channel. Part values are the project's demo parts (typical-class values from
# memory): 12 V ±5 % 2 A adapter; 3.3 V microcontroller pin with VOH 2.9 V and VOL 0.4 V guaranteed,
# sourcing at most 8 mA; small-signal NPN; red LEDs. Front stage: a sensor preamp, non-inverting gain 10, on
# a 1 MHz op-amp with 100 dB open-loop gain, 0.5 V/µs slew rate and 1.5 V output headroom.
DEMO: dict[str, Any] = {
    "supply_v": 12.0,
    "supply_tolerance": 0.05,
    "supply_min_v": math.nan,
    "supply_max_v": math.nan,
    "current_max_a": 2.0,
    "capacity_ah": math.nan,
    "drive_high_v": 2.9,
    "drive_low_v": 0.4,
    "source_current_max_a": 0.008,
    "hfe_min": 100.0,
    "hfe_typ": 200.0,
    "vbe_sat_v": 0.85,
    "vce_sat_v": 0.2,
    "ic_max_a": 0.2,
    "power_max_w": 0.625,
    "vf_typ_v": 2.0,
    "vf_min_v": 1.8,
    "vf_max_v": 2.4,
    "if_max_a": 0.03,
    "leds_in_series": 3.0,
    "strings": 2.0,
    "current_a": 0.02,
    "duty_cycle": 0.5,
    "channels": 6.0,
    "e_series": "E24",
    "forced_beta": 10.0,
    "vce_sat_forced_beta": 10.0,
    "base_junctions": 1.0,
    "vceo_max_v": 40.0,
    "rbe_ohm": math.nan,
    "drive_supply_v": 3.3,
    "resistor_tolerance": math.nan,
    "inverting": False,
    "gain": 10.0,
    "gbw_hz": 1e6,
    "open_loop_gain": 1e5,
    "slew_rate_v_per_s": 5e5,
    "output_headroom_v": 1.5,
    "signal_hz": 1e3,
    "amplitude_v": 1.0,
    "opamp_supply_min_v": 6.0,
    "opamp_supply_max_v": 30.0,
    "input_offset_v": 0.0025,
    "output_offset_max_v": math.nan,
    # Heat: the seed red 5 mm LED's and small NPN's invented class-typical figures, at 25 °C, but without
    # forward-voltage drift, so the electrical hand calculations here hold exactly; test_channel_thermal adds it.
    "ambient_c": 25.0,
    "ambient_min_c": math.nan,
    "ambient_max_c": math.nan,
    "tj_max_c": 150.0,
    "rth_ja_k_per_w": 250.0,
    "rth_jc_k_per_w": math.nan,
    "heatsink_k_per_w": math.nan,
    "led_tj_max_c": 100.0,
    "led_rth_jb_k_per_w": 200.0,
    "led_rth_ba_k_per_w": 150.0,
    "vf_tempco_v_per_k": 0.0,
    "if_derating_knee_c": 60.0,
    "resistor_rated_to_c": 70.0,
    "resistor_zero_power_c": 155.0,
    **{name: math.nan for name in OPAMP_STAGE_FIELDS},
    "phase_margin_min_deg": 45.0,
    # The small NPN's invented class-typical switching times; no PWM stage unless a test gives a frequency.
    "td_s": 4e-8,
    "tr_s": 4e-8,
    "ts_s": 2.5e-7,
    "tf_s": 8e-8,
    "pwm_frequency_hz": math.nan,
    "pwm_resolution_bits": 8.0,
    "modulation_depth": 1.0,
    "camera_frame_rate_hz": math.nan,
    **{name: math.nan for name in MOSFET_ONLY},  # an NPN switch
}
NO_FRONT_STAGE = {name: math.nan for name in ("gbw_hz", *FRONT_STAGE_FIELDS)}


def make(**overrides: Any) -> ChannelInputs:
    """Inputs from DEMO; each value a scalar (one row) or a list (several rows)."""
    values = {**DEMO, **overrides}
    n = max((len(v) for v in values.values() if isinstance(v, list)), default=1)
    arrays: dict[str, np.ndarray] = {}
    for name, value in values.items():
        dtype = str if name == "e_series" else bool if name == "inverting" else np.float64
        arrays[name] = np.broadcast_to(np.asarray(value, dtype=dtype), (n,)).copy()
    return ChannelInputs(**arrays)


def fields_of(inputs: ChannelInputs) -> list[str]:
    return [v.field for v in validate(inputs)]


# ---- the greenhouse demo, by hand ------------------------------------------------------------------------


def test_greenhouse_demo_channel_by_hand() -> None:
    # Hand calculation with Ohm's law and Kirchhoff's voltage law:
    # LED string: V_R = 12 − 3 × 2.0 − 0.2 (Vce_sat) = 5.8 V; R = 5.8 V / 20 mA = 290 Ω → E24 at or above: 300 Ω
    # (2.7, 3.0 in E24, IEC 60063 from memory). I = 5.8 / 300 = 19.333 mA per string, Ic = 2 × I = 38.667 mA.
    # Worst-case high: V_R = 12.6 − 3 × 1.8 − 0.2 = 7.0 V over 300 × 0.95 = 285 Ω → 24.561 mA per string,
    # so Ic_max = 49.123 mA; resistor dissipation 7.0² / 285 = 0.17193 W, twice that 0.34386 W.
    # Base, sized for Ic_max at forced beta 10: Ib = 4.9123 mA, Rb = (2.9 − 0.85) / 4.9123 mA = 417.32 Ω
    # → E24 at or below: 390 Ω. Pin current 2.05 V / 390 Ω = 5.2564 mA; actual forced beta 49.123 / 5.2564 =
    # 9.3453; transistor (0.2 V × 49.123 mA + 0.85 V × 5.2564 mA) × 0.5 = 7.1463 mW.
    # Supply: six channels × 38.667 mA = 0.232 A peak, × 0.5 = 0.116 A average, 5.8 % of 2 A; all six could
    # share any duty cycle (2 A / 0.232 A > 1).
    out = review(make())
    led, sw, sup = out.led_string.results, out.switch.results, out.supply.results
    assert led["resistor_exact_ohm"][0] == pytest.approx(290.0, rel=1e-12)
    assert led["resistor_ohm"][0] == 300.0
    assert led["current_a"][0] == pytest.approx(5.8 / 300, rel=1e-12)
    assert led["current_max_a"][0] == pytest.approx(7.0 / 285, rel=1e-12)
    assert led["current_min_a"][0] == pytest.approx(4.0 / 315, rel=1e-12)  # (11.4 − 7.2 − 0.2) / 315 Ω
    assert out.collector_current_a[0] == pytest.approx(2 * 5.8 / 300, rel=1e-12)
    assert out.collector_current_max_a[0] == pytest.approx(2 * 7.0 / 285, rel=1e-12)
    ic_max = 2 * 7.0 / 285
    assert sw["rb_exact_ohm"][0] == pytest.approx(2.05 / (ic_max / 10), rel=1e-12)
    assert sw["rb_exact_ohm"][0] == pytest.approx(417.32, abs=0.01)
    assert sw["rb_ohm"][0] == 390.0
    assert sw["drive_current_a"][0] == pytest.approx(2.05 / 390, rel=1e-12)
    assert sw["forced_beta_actual"][0] == pytest.approx(ic_max / (2.05 / 390), rel=1e-12)
    assert sw["forced_beta_actual"][0] == pytest.approx(9.3453, abs=1e-4)
    assert sw["transistor_power_w"][0] == pytest.approx((0.2 * ic_max + 0.85 * 2.05 / 390) * 0.5, rel=1e-12)
    assert sup["peak_current_a"][0] == pytest.approx(6 * 2 * 5.8 / 300, rel=1e-12)
    assert sup["peak_current_a"][0] == pytest.approx(0.232, rel=1e-12)
    assert sup["average_current_a"][0] == pytest.approx(0.116, rel=1e-12)
    assert sup["supply_utilization"][0] == pytest.approx(0.058, rel=1e-12)
    assert out.max_duty_cycle[0] == 1.0
    assert out.ok[0]
    assert out.failing() == [[]]
    # Every check of the chain is reported once, in chain order.
    assert [c.name for c in out.checks] == [
        "led_current_rating",
        "headroom",
        "resistor_rating",
        "saturation",
        "vce_sat_guarantee",
        "driver_current",
        "collector_current_rating",
        "voltage_rating",
        "power_rating",
        "off_state",
        "shortest_pulse_covers_edges",
        "flicker_low_risk",
        "supply_average_current",
        "supply_peak_current",
        "gain_achievable",
        "signal_in_band",
        "output_offset",
        "slew_rate",
        "output_swing",
        "opamp_supply_min",
        "opamp_supply_max",
        "input_common_mode_low",
        "input_common_mode_high",
        "output_swing_low",
        "output_swing_high",
        "output_error",
        "noise_bits",
        "phase_margin",
        *channel_thermal.CHECKS,
    ]
    # The pin at its stress corner: at its 3.3 V supply, Vbe hot (0.85 − 0.2 V), Rb at E24's −5 %.
    assert out.check("driver_current").value[0] == pytest.approx(2.65 / (390 * 0.95), rel=1e-12)
    assert out.check("driver_current").limit[0] == 0.008


def test_greenhouse_front_stage_by_hand() -> None:
    # Single-pole model (Sedra & Smith, Microelectronic Circuits, 7th ed., §2.7.3, from memory): bandwidth =
    # GBW/NG + GBW/A0 = 1 MHz/10 + 1 MHz/1e5 = 100.01 kHz; the sine needs 2π × 1 kHz × 1 V = 6283 V/s of slew
    # (§2.8.4, from memory); the output swings to 12/2 − 1.5 = 4.5 V peak (§2.8.1, output saturation).
    out = review(make())
    fs = out.front_stage.results
    assert fs["bandwidth_hz"][0] == pytest.approx(100_010.0, rel=1e-12)
    assert fs["required_slew_rate_v_per_s"][0] == pytest.approx(2 * math.pi * 1e3, rel=1e-12)
    assert fs["swing_limited_amplitude_v"][0] == pytest.approx(4.5, rel=1e-12)
    assert out.check("signal_in_band").limit[0] == pytest.approx(100_010.0, rel=1e-12)
    assert out.check("output_swing").limit[0] == pytest.approx(4.5, rel=1e-12)
    assert out.has_front_stage[0]
    # The op-amp runs from the 12 V supply, inside its rated 6-30 V; its 2.5 mV offset times the noise gain
    # 10 (Franco, Design with Operational Amplifiers and Analog Integrated Circuits, 3rd ed., §5.4, from
    # memory; A0 = 1e5 takes 0.01 % off) is 25 mV at the output, not checked without an allowed error.
    assert (out.check("opamp_supply_min").value[0], out.check("opamp_supply_min").limit[0]) == (12.0, 6.0)
    assert (out.check("opamp_supply_max").value[0], out.check("opamp_supply_max").limit[0]) == (12.0, 30.0)
    assert fs["output_offset_v"][0] == pytest.approx(0.025 / (1 + 10 / 1e5), rel=1e-12)
    assert out.check("output_offset").ok[0] and np.isnan(out.check("output_offset").limit[0])
    tight = review(make(output_offset_max_v=0.02))
    assert tight.failing() == [["output_offset"]]


def test_base_is_sized_for_the_worst_case_collector_current() -> None:
    # The switch stage sees Ic_max, so its ratings are checked there too; the supply sees the nominal Ic.
    out = review(make())
    assert out.check("collector_current_rating").value[0] == out.collector_current_max_a[0]
    assert out.check("supply_peak_current").value[0] == pytest.approx(6 * out.collector_current_a[0], rel=1e-12)
    assert out.collector_current_max_a[0] > out.collector_current_a[0]


# ---- failures and batches --------------------------------------------------------------------------------


def test_under_driven_channel_fails_saturation() -> None:
    # Ohm's law; E24 (IEC 60063, from memory). A pin that sources only 2.5 mA pushed the forced beta to 30, above
    # hfe_min 20: Rb = 2.05 V × 30 / 49.12 mA = 1252 Ω → E24 at or below: 1.2 kΩ, so Ib = 2.05 V / 1.2 kΩ =
    # 1.708 mA and Ic_max/Ib = 28.8 > 20.
    out = review(
        make(hfe_min=20.0, hfe_typ=40.0, forced_beta=30.0, vce_sat_forced_beta=40.0, source_current_max_a=0.0025)
    )
    assert out.switch.results["rb_ohm"][0] == 1200.0
    assert out.check("saturation").value[0] == pytest.approx((2 * 7.0 / 285) / (2.05 / 1200), rel=1e-12)
    assert not out.ok[0]
    assert out.failing() == [["saturation"]]
    assert any("does not saturate" in w.message for w in out.warnings)


def test_supply_overload_limits_the_duty_cycle() -> None:
    # Average current = peak × duty (rectangular pulses, definition): 0.232 A peak against a 0.1 A supply,
    # so all six channels may share at most 0.1/0.232 = 43 % duty.
    out = review(make(current_max_a=0.1))
    assert out.max_duty_cycle[0] == pytest.approx(0.1 / 0.232, rel=1e-12)
    assert out.failing() == [["supply_average_current", "supply_peak_current"]]
    assert any("overheat" in c.message for c in out.cautions)


def test_rows_are_independent_and_front_stage_optional_per_row() -> None:
    batch = make(
        current_a=[0.02, 0.01, 0.025],
        **{name: [DEMO[name], math.nan, DEMO[name]] for name in ("gbw_hz", *FRONT_STAGE_FIELDS)},
    )
    out = review(batch)
    assert out.has_front_stage.tolist() == [True, False, True]
    # Without a front stage its results are NaN and its checks pass without a value (do not apply).
    assert np.isnan(out.front_stage.results["bandwidth_hz"][1])
    assert not out.front_stage.results["slew_limited"][1]
    for name in ("gain_achievable", "signal_in_band", "slew_rate", "output_swing"):
        assert out.check(name).ok[1] and np.isnan(out.check(name).limit[1])
    for k, current in enumerate([0.02, 0.01, 0.025]):
        extra = NO_FRONT_STAGE if k == 1 else {}
        alone = review(make(current_a=current, **extra))
        for c in alone.checks:
            np.testing.assert_array_equal(out.check(c.name).value[k], c.value[0])
            assert out.check(c.name).ok[k] == c.ok[0]
        assert out.max_duty_cycle[k] == alone.max_duty_cycle[0]


# ---- validation ------------------------------------------------------------------------------------------


def test_demo_is_valid_and_invalid_rows_raise() -> None:
    assert validate(make()) == []
    with pytest.raises(DomainError) as err:
        review(make(supply_v=[12.0, 5.0]))
    (violation,) = err.value.violations
    assert violation.field == "supply_v"
    assert violation.rows.tolist() == [False, True]
    assert "6.2 V" in violation.message  # 3 × 2.0 V + 0.2 V


@pytest.mark.parametrize(
    ("overrides", "field"),
    [
        ({"hfe_typ": 50.0}, "hfe_typ"),
        ({"hfe_typ": math.nan}, "hfe_typ"),
        ({"channels": 0.0}, "channels"),
        ({"channels": 2.5}, "channels"),
        ({"current_max_a": math.nan}, "current_max_a"),
        ({"current_max_a": 0.0}, "current_max_a"),
        ({"capacity_ah": -1.0}, "capacity_ah"),
        ({"vce_sat_v": -0.1}, "vce_sat_v"),
        ({"source_current_max_a": 0.0}, "source_current_max_a"),
        ({"strings": 1.5}, "strings"),
        ({"duty_cycle": 1.5}, "duty_cycle"),
        ({"forced_beta": 0.5}, "forced_beta"),
        ({"drive_high_v": 0.8}, "drive_high_v"),
        ({"vf_typ_v": 2.5}, "vf_typ_v"),
        ({"gain": math.nan}, "gain"),
        ({"slew_rate_v_per_s": math.nan}, "slew_rate_v_per_s"),
        ({"signal_hz": -1.0}, "signal_hz"),
        ({"output_headroom_v": 6.0}, "supply_v"),  # no room to swing on a 12 V span
        ({"gbw_hz": math.nan}, "gbw_hz"),  # front-stage values without the op-amp
    ],
)
def test_violation_names_the_flat_input(overrides: dict[str, Any], field: str) -> None:
    assert field in fields_of(make(**overrides))


def test_one_message_per_input_and_row_under_the_flat_names() -> None:
    # Both the LED and the switch stage reject an unknown series, and both check Vce_sat (the LED stage
    # as its "switch_drop_v"): the engineer sees each input once, under its own name.
    found = validate(make(e_series="E7", vce_sat_v=-0.1))
    assert sorted(v.field for v in found) == ["e_series", "vce_sat_v"]
    assert all("switch_drop_v" not in v.message for v in found)


def test_resistor_range_rule_found_next_to_other_row_errors() -> None:
    # The LED stage checks the resistor's range only when nothing else is wrong; here row 0 is bad
    # otherwise and row 1 needs an absurd 5.8 V / 1e-305 A resistor: both are reported.
    found = validate(make(vf_min_v=[-1.0, 1.8], current_a=[0.02, 1e-305]))
    assert {(v.field, tuple(v.rows)) for v in found} == {("vf_min_v", (True, False)), ("current_a", (False, True))}


# ---- properties ------------------------------------------------------------------------------------------


@st.composite
def channel_rows(draw: st.DrawFn, front_stage: bool | None = None) -> dict[str, Any]:
    """One valid channel: a supply comfortably above the string drop, a pin above Vbe_sat, any ratings."""
    n_leds = draw(st.integers(1, 4))
    vf_typ = draw(st.floats(1.6, 3.4))
    vce = draw(st.floats(0.0, 0.5))
    vbe = draw(st.floats(0.6, 1.0))
    hfe_min = draw(st.floats(10.0, 300.0))
    current = draw(st.floats(1e-3, 0.1))
    row: dict[str, Any] = {
        "supply_v": (n_leds * vf_typ + vce) * draw(st.floats(1.1, 3.0)),
        "supply_tolerance": draw(st.floats(0.0, 0.2)),
        "supply_min_v": math.nan,
        "supply_max_v": math.nan,
        "current_max_a": draw(st.floats(0.05, 5.0)),
        "capacity_ah": draw(st.one_of(st.just(math.nan), st.floats(0.1, 10.0))),
        "drive_high_v": vbe + draw(st.floats(0.3, 4.0)),
        "drive_low_v": draw(st.floats(0.0, 0.8)),
        "source_current_max_a": draw(st.one_of(st.just(math.nan), st.floats(1e-3, 0.05))),
        "hfe_min": hfe_min,
        "hfe_typ": hfe_min * draw(st.floats(1.0, 3.0)),
        "vbe_sat_v": vbe,
        "vce_sat_v": vce,
        "ic_max_a": draw(st.floats(0.05, 2.0)),
        "power_max_w": draw(st.floats(0.05, 2.0)),
        "vf_typ_v": vf_typ,
        "vf_min_v": vf_typ * draw(st.floats(0.8, 1.0)),
        "vf_max_v": vf_typ * draw(st.floats(1.0, 1.25)),
        "if_max_a": current * draw(st.floats(0.5, 3.0)),
        "leds_in_series": float(n_leds),
        "strings": float(draw(st.integers(1, 4))),
        "current_a": current,
        "duty_cycle": draw(st.floats(0.0, 1.0)),
        "channels": float(draw(st.integers(1, 8))),
        "e_series": draw(st.sampled_from(list(eseries.SERIES))),
        "forced_beta": draw(st.one_of(st.just(math.nan), st.floats(1.0, 50.0))),
        "vce_sat_forced_beta": draw(st.floats(1.0, 500.0)),
        "base_junctions": draw(st.sampled_from([1.0, 2.0])),
        "vceo_max_v": draw(st.one_of(st.just(math.nan), st.floats(5.0, 100.0))),
        "rbe_ohm": draw(st.one_of(st.just(math.nan), st.floats(1e3, 1e6))),
        "drive_supply_v": draw(st.one_of(st.just(math.nan), st.floats(5.0, 6.0))),
        "resistor_tolerance": draw(st.one_of(st.just(math.nan), st.floats(0.0, 0.2))),
        "inverting": draw(st.booleans()),
        "phase_margin_min_deg": draw(st.floats(30.0, 70.0)),
    }
    ambient = draw(st.floats(-20.0, 60.0))
    led_tj_max = draw(st.floats(80.0, 150.0))
    row |= {
        "ambient_c": ambient,
        "ambient_min_c": ambient - draw(st.floats(0.0, 40.0)),
        "ambient_max_c": ambient + draw(st.floats(0.0, 20.0)),
        "tj_max_c": draw(st.floats(100.0, 175.0)),
        "rth_ja_k_per_w": draw(st.one_of(st.just(math.nan), st.floats(20.0, 400.0))),
        "rth_jc_k_per_w": math.nan,
        "heatsink_k_per_w": math.nan,
        "led_tj_max_c": led_tj_max,
        "led_rth_jb_k_per_w": draw(st.floats(5.0, 300.0)),
        "led_rth_ba_k_per_w": draw(st.floats(0.0, 200.0)),
        "vf_tempco_v_per_k": -vf_typ * draw(st.floats(0.0, 0.002)),
        "if_derating_knee_c": draw(st.one_of(st.just(math.nan), st.floats(20.0, led_tj_max - 10.0))),
        "resistor_rated_to_c": 70.0,
        "resistor_zero_power_c": 155.0,
        **{name: draw(st.floats(0.0, 2e-6)) for name in ("td_s", "tr_s", "ts_s", "tf_s")},
        "pwm_frequency_hz": draw(st.one_of(st.just(math.nan), st.floats(50.0, 20e3))),
        "pwm_resolution_bits": float(draw(st.integers(1, 12))),
        "modulation_depth": draw(st.floats(0.0, 1.0)),
        "camera_frame_rate_hz": draw(st.one_of(st.just(math.nan), st.floats(10.0, 120.0))),
    }
    if draw(st.booleans()):  # a band of its own, such as a battery's (end of discharge to fresh)
        row["supply_min_v"] = row["supply_v"] * draw(st.floats(0.6, 1.0))
        row["supply_max_v"] = row["supply_v"] * draw(st.floats(1.0, 1.2))
    with_front = draw(st.booleans()) if front_stage is None else front_stage
    if with_front:
        row |= {
            "gain": draw(st.floats(1.0, 100.0)),
            "gbw_hz": draw(st.floats(1e4, 1e8)),
            "open_loop_gain": draw(st.one_of(st.just(math.nan), st.floats(1e3, 1e7))),
            "slew_rate_v_per_s": draw(st.floats(1e4, 1e8)),
            "output_headroom_v": draw(st.one_of(st.just(math.nan), st.floats(0.0, 0.4 * row["supply_v"]))),
            "signal_hz": draw(st.floats(1.0, 1e6)),
            "amplitude_v": draw(st.floats(1e-3, 10.0)),
            "opamp_supply_min_v": row["supply_v"] * draw(st.floats(0.5, 1.2)),
            "opamp_supply_max_v": row["supply_v"] * draw(st.floats(1.25, 3.0)),
            "input_offset_v": draw(st.floats(0.0, 0.01)),
            "output_offset_max_v": draw(st.one_of(st.just(math.nan), st.floats(1e-3, 1.0))),
            **opamp_stage(draw, row["supply_v"]),
        }
    else:
        row |= NO_FRONT_STAGE
    return row


def opamp_stage(draw: st.DrawFn, supply_v: float) -> dict[str, float]:
    """The windows, DC error, noise and stability inputs of a front stage, each possibly absent."""

    def maybe(low: float, high: float) -> float:
        return draw(st.one_of(st.just(math.nan), st.floats(low, high)))

    adc = draw(st.one_of(st.just((math.nan, math.nan)), st.tuples(st.floats(1.0, 10.0), st.integers(8, 24))))
    return {
        "input_low_headroom_v": maybe(-0.2, 0.3 * supply_v),
        "input_high_headroom_v": maybe(-0.2, 0.3 * supply_v),
        "output_low_headroom_v": maybe(0.0, 0.3 * supply_v),
        "output_high_headroom_v": maybe(0.0, 0.3 * supply_v),
        "reference_v": maybe(0.0, supply_v),
        "rf_ohm": maybe(1e3, 1e6),
        "plus_input_ohm": maybe(0.0, 1e5),
        "input_bias_current_a": maybe(0.0, 1e-6),
        "input_offset_current_a": maybe(0.0, 1e-6),
        "output_error_max_v": maybe(1e-4, 1.0),
        "adc_full_scale_v": adc[0],
        "adc_bits": float(adc[1]),
        "voltage_noise_v_per_rthz": maybe(1e-9, 1e-7),
        "current_noise_a_per_rthz": maybe(0.0, 1e-11),
        "second_pole_hz": maybe(1e4, 1e8),
        "output_resistance_ohm": maybe(0.0, 1e3),
        "load_capacitance_f": maybe(1e-12, 1e-6),
        "isolation_ohm": maybe(0.0, 1e3),
    }


def rows_to_inputs(rows: list[dict[str, Any]]) -> ChannelInputs:
    return make(**{name: [row.get(name, DEMO[name]) for row in rows] for name in DEMO})


FRONT_CHECKS = {
    "gain_achievable",
    "signal_in_band",
    "slew_rate",
    "output_swing",
    "opamp_supply_min",
    "opamp_supply_max",
    "output_offset",
    "input_common_mode_low",
    "input_common_mode_high",
    "output_swing_low",
    "output_swing_high",
    "output_error",
    "noise_bits",
    "phase_margin",
}


# Front-stage checks that apply only when an optional input is given (their limit is NaN otherwise).
OPTIONAL_CHECKS = FRONT_CHECKS - {"gain_achievable", "signal_in_band", "slew_rate", "output_swing"}
OPTIONAL_CHECKS -= {"opamp_supply_min", "opamp_supply_max"}
# The flicker check reads the PWM frequency itself: without one there is nothing to judge.
OPTIONAL_CHECKS |= {"flicker_low_risk"}


@settings(max_examples=60, deadline=None, derandomize=True)
@given(rows=st.lists(channel_rows(), min_size=1, max_size=5))
def test_property_review_is_sound(rows: list[dict[str, Any]]) -> None:
    inputs = rows_to_inputs(rows)
    assert validate(inputs) == []
    out = review(inputs)
    front = out.has_front_stage
    for check in out.checks:
        applies = front if check.name in FRONT_CHECKS else np.ones_like(front)
        if check.name in OPTIONAL_CHECKS:  # applies where its optional inputs are given: where it has a limit
            applies = applies & ~np.isnan(check.limit)
        assert np.all(np.isfinite(check.value[applies])), check.name
        known = ~np.isnan(check.limit)
        assert np.all(check.ok[~known]), check.name
        if check.name == "saturation":
            np.testing.assert_array_equal(check.ok, check.value < check.limit)
        elif check.sense == "max":
            np.testing.assert_array_equal(check.ok[known], check.value[known] <= check.limit[known])
        else:
            np.testing.assert_array_equal(check.ok[known], check.value[known] >= check.limit[known])
    np.testing.assert_array_equal(out.ok, np.logical_and.reduce([c.ok for c in out.checks]))
    # The common duty is 0 exactly when channels always on already draw more than the supply's rating.
    overloaded = (inputs.duty_cycle == 1.0) & (inputs.channels * out.collector_current_a > inputs.current_max_a)
    assert np.all((out.max_duty_cycle > 0) & (out.max_duty_cycle <= 1) | overloaded & (out.max_duty_cycle == 0))
    assert np.all(out.collector_current_max_a >= out.collector_current_a)
    # NaN only where a result does not apply: no standard rating large enough, no PWM, no camera.
    no_pwm = np.isnan(inputs.pwm_frequency_hz)
    pwm_only = ("shortest_on_time_s", "duty_step", "flicker_low_risk_limit", "flicker_no_effect_limit")
    exempt = {name: no_pwm for name in pwm_only} | {"camera_alias_hz": no_pwm | np.isnan(inputs.camera_frame_rate_hz)}
    for section in (out.led_string, out.switch):
        for name, value in section.results.items():
            if name != "resistor_rating_w":
                applies = ~exempt.get(name, np.zeros(value.shape, dtype=bool))
                assert np.all(np.isfinite(value[applies])), name
