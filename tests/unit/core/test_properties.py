"""Properties of every calculation over the whole input domain the API accepts, not only realistic values.

The per-module tests draw realistic magnitudes; here each quantity spans 1e-300 to 1e300 (anything finite and
positive that the request schemas let through), several rows at once. For every row ``validate`` accepts:

- every result is finite, or NaN exactly where the calculation documents "does not apply";
- currents and powers are not negative;
- chosen standard values belong to their IEC 60063 series and round the documented way (led-string rounds
  the resistor up so the current never exceeds the target; bjt-switch rounds the base resistor down so the
  base current never falls short).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from typing import Any

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from calcsvc.core import bjt_switch, closed_loop, duty_power, eseries, led_string, slew
from calcsvc.core.outcome import PRACTICAL_MAX, PRACTICAL_MIN, Outcome, take

SETTINGS = settings(max_examples=60, deadline=None, derandomize=True, database=None)
SERIES_NAMES = list(eseries.SERIES)
ROWS = st.integers(min_value=1, max_value=4)


def magnitudes(low: int = -30, high: int = 29) -> st.SearchStrategy[float]:
    """Positive floats spread evenly over decades (uniform floats would almost never be small), by default
    over the whole practical range, its ends included."""
    spread = st.floats(float(low), high + 0.999).map(lambda exponent: 10.0**exponent)
    return st.one_of(st.sampled_from([PRACTICAL_MIN, PRACTICAL_MAX]), spread) if low <= -30 else spread


def signed(strategy: st.SearchStrategy[float]) -> st.SearchStrategy[float]:
    return st.builds(lambda s, m: s * m, st.sampled_from([-1.0, 1.0]), strategy)


def optional(strategy: st.SearchStrategy[float]) -> st.SearchStrategy[float]:
    return st.one_of(st.just(math.nan), strategy)


FRACTIONS = st.one_of(st.sampled_from([0.0, 1.0]), st.floats(0.0, 1.0))


def columns(draw: st.DrawFn, row: Callable[[st.DrawFn], dict[str, Any]]) -> dict[str, np.ndarray]:
    """A few rows drawn with ``row``, as the column arrays the core takes."""
    rows = [row(draw) for _ in range(draw(ROWS))]
    out: dict[str, np.ndarray] = {}
    for name in rows[0]:
        values = [r[name] for r in rows]
        out[name] = np.array(values, dtype=str if isinstance(values[0], str) else np.float64)
    return out


def valid_rows(inputs: Any, validate: Callable[[Any], list[Any]], settle: Callable[[Any], Any] = lambda x: x) -> Any:
    """The rows ``validate`` accepts (at least one, or the example is discarded); ``settle`` mends what spans
    rows after some are dropped."""
    n = len(next(v for v in vars(inputs).values() if isinstance(v, np.ndarray)))
    bad = np.zeros(n, dtype=bool)
    for violation in validate(inputs):
        bad |= violation.rows
    assume(not bad.all())
    kept = settle(take(inputs, ~bad))
    # Some rules run only once a row's other inputs hold, so a dropped row can reveal more on the rest.
    return kept if not validate(kept) else valid_rows(kept, validate, settle)


def assert_finite_except(outcome: Outcome, does_not_apply: dict[str, np.ndarray]) -> None:
    """Each result is finite, or NaN exactly on the rows where ``does_not_apply`` says it does not apply."""
    for name, value in outcome.results.items():
        value = np.asarray(value, dtype=np.float64)
        assert not np.isinf(value).any(), f"{name} overflows: {value}"
        nan = np.isnan(value) if value.ndim == 1 else np.isnan(value).all(axis=1)
        expected = does_not_apply.get(name, np.zeros(nan.shape, dtype=bool))
        np.testing.assert_array_equal(nan, expected, err_msg=f"{name}: NaN where it applies, or a value where not")


def assert_not_negative(outcome: Outcome, names: list[str]) -> None:
    for name in names:
        value = outcome.results[name]
        assert np.all(np.isnan(value) | (value >= 0.0)), f"{name} is negative: {value}"


# ---- led-string ----------------------------------------------------------------------------------------------


def led_heat_row(draw: st.DrawFn) -> dict[str, float]:
    """The LED string's heat inputs over their declared ranges (``thermal_inputs``)."""
    rated_to = draw(st.floats(-60.0, 250.0))
    return {
        "ambient_c": draw(st.floats(-60.0, 200.0)),
        "led_tj_max_c": draw(st.floats(26.0, 250.0)),
        "led_rth_jb_k_per_w": draw(st.one_of(st.just(0.0), magnitudes())),
        "led_rth_ba_k_per_w": draw(st.one_of(st.just(0.0), magnitudes())),
        "vf_tempco_v_per_k": draw(st.one_of(st.just(0.0), st.floats(-0.1, 0.0))),
        "if_derating_knee_c": draw(optional(st.floats(-60.0, 250.0))),
        "resistor_rated_to_c": rated_to,
        "resistor_zero_power_c": draw(st.floats(rated_to, 300.0)),
    }


@st.composite
def led_inputs(draw: st.DrawFn) -> led_string.LedStringInputs:
    def row(draw: st.DrawFn) -> dict[str, Any]:
        vf = sorted(draw(magnitudes()) for _ in range(3))
        leds = float(draw(st.integers(1, 1000)))
        drop = draw(st.one_of(st.just(0.0), magnitudes()))
        # Supply above the string's drop by a margin of any size, so most rows are valid.
        supply = (leds * vf[1] + drop) * (1.0 + draw(magnitudes(-15, 15)))
        return {
            "supply_v": supply,
            "supply_tolerance": draw(st.one_of(st.just(0.0), st.floats(0.0, 0.99))),
            "vf_typ_v": vf[1],
            "vf_min_v": vf[0],
            "vf_max_v": vf[2],
            "if_max_a": draw(magnitudes()),
            "leds_in_series": leds,
            "strings": float(draw(st.integers(1, 10000))),
            "current_a": draw(magnitudes()),
            "switch_drop_v": drop,
            "e_series": draw(st.sampled_from(SERIES_NAMES)),
            "resistor_tolerance": draw(optional(st.floats(0.0, 0.99))),
            **led_heat_row(draw),
        }

    return led_string.LedStringInputs(**columns(draw, row))


@SETTINGS
@given(inputs=led_inputs())
def test_led_string_results_are_sound_everywhere(inputs: led_string.LedStringInputs) -> None:
    inputs = valid_rows(inputs, led_string.validate)
    out = led_string.compute(inputs)
    r = out.results
    # The rating is NaN when twice the worst-case dissipation exceeds every standard rating (a failing check).
    over = ~next(c for c in out.checks if c.name == "resistor_rating").ok
    # The junctions are NaN where a string runs away (the nominal string only where the worst case does too).
    runaway = ~next(c for c in out.checks if c.name == "led_thermal_runaway").ok
    nominal_runaway = np.isnan(r["led_junction_c"]) & runaway
    assert_finite_except(
        out, {"resistor_rating_w": over, "led_junction_max_c": runaway, "led_junction_c": nominal_runaway}
    )
    assert_not_negative(out, [n for n in r if n.endswith(("_a", "_w"))])
    for k, series in enumerate(inputs.e_series):
        assert eseries.is_standard(r["resistor_ohm"][k], str(series)).all()
    # Rounded up (to the 1e-9 picking tolerance), and to the nearest value: one step down would be too small.
    assert np.all(r["resistor_ohm"] >= r["resistor_exact_ohm"] * (1 - eseries.REL_TOL))
    below = eseries.pick_at_or_below_rows(r["resistor_ohm"] * (1 - 1e-6), inputs.e_series)
    assert np.all(below < r["resistor_exact_ohm"] * (1 + eseries.REL_TOL))
    assert np.all(r["current_a"] <= inputs.current_a * (1 + 2 * eseries.REL_TOL))
    # Worst-case corners bracket the nominal current, up to the rounding of the supply voltage they are taken
    # from (a headroom of a few ulps of the supply is all rounding; the headroom check fails there anyway).
    smallest_resistor = r["resistor_ohm"] * (1 - 0.99)  # resistor tolerances are drawn below 0.99
    rounding = 8 * np.finfo(float).eps * inputs.supply_v * (1 + inputs.supply_tolerance) / smallest_resistor
    assert np.all(r["current_min_a"] <= r["current_a"] * (1 + 1e-12) + rounding)
    assert np.all(r["current_a"] <= r["current_max_a"] * (1 + 1e-12) + rounding)
    assert np.all(np.isin(r["resistor_rating_w"][~over], led_string.POWER_RATINGS_W))


# ---- bjt-switch ----------------------------------------------------------------------------------------------


@st.composite
def bjt_inputs(draw: st.DrawFn) -> bjt_switch.BjtSwitchInputs:
    def row(draw: st.DrawFn) -> dict[str, Any]:
        vbe = draw(magnitudes())
        high = vbe * (1.0 + draw(magnitudes(-15, 15)))
        return {
            "hfe_min": draw(magnitudes()),
            "vbe_sat_v": vbe,
            "vce_sat_v": draw(st.one_of(st.just(0.0), magnitudes())),
            "ic_max_a": draw(magnitudes()),
            "power_max_w": draw(magnitudes()),
            "collector_current_a": draw(magnitudes()),
            "drive_high_v": high,
            "drive_low_v": draw(st.one_of(st.just(0.0), signed(magnitudes()))),
            "forced_beta": draw(optional(st.just(1.0) | magnitudes().map(lambda x: 1.0 + x))),
            "vce_sat_forced_beta": 1.0 + draw(st.one_of(st.just(0.0), magnitudes())),
            "base_junctions": draw(st.sampled_from([1.0, 2.0])),
            "vceo_max_v": draw(optional(magnitudes())),
            "supply_max_v": draw(optional(magnitudes())),
            "e_series": draw(st.sampled_from(SERIES_NAMES)),
            "resistor_tolerance": draw(optional(FRACTIONS)),
            "rbe_ohm": draw(optional(magnitudes())),
            "driver_current_max_a": draw(optional(magnitudes())),
            "drive_supply_v": draw(optional(st.just(high) | magnitudes().map(lambda x: high * (1.0 + x)))),
            "duty_cycle": draw(FRACTIONS),
            "ambient_c": draw(st.floats(-60.0, 200.0)),
            "tj_max_c": draw(st.floats(26.0, 250.0)),
            "rth_ja_k_per_w": draw(optional(magnitudes())),
            **dict(zip(("rth_jc_k_per_w", "heatsink_k_per_w"), draw(sink), strict=True)),
            **{name: draw(st.one_of(st.just(0.0), magnitudes())) for name in ("td_s", "tr_s", "ts_s", "tf_s")},
            "pwm_frequency_hz": draw(optional(magnitudes())),
            "pwm_resolution_bits": float(draw(st.integers(1, 24))),
            "modulation_depth": draw(FRACTIONS),
            "camera_frame_rate_hz": draw(optional(magnitudes())),
        }

    sink = st.one_of(st.just((math.nan, math.nan)), st.tuples(optional(magnitudes()), magnitudes()))
    return bjt_switch.BjtSwitchInputs(**columns(draw, row))


@SETTINGS
@given(inputs=bjt_inputs())
def test_bjt_switch_results_are_sound_everywhere(inputs: bjt_switch.BjtSwitchInputs) -> None:
    inputs = valid_rows(inputs, bjt_switch.validate)
    out = bjt_switch.compute(inputs)
    r = out.results
    no_pwm = np.isnan(inputs.pwm_frequency_hz)
    pwm_only = ("shortest_on_time_s", "duty_step", "flicker_low_risk_limit", "flicker_no_effect_limit")
    does_not_apply = {name: no_pwm for name in pwm_only}
    does_not_apply["switching_loss_w"] = ~no_pwm & np.isnan(inputs.supply_max_v)
    does_not_apply["camera_alias_hz"] = no_pwm | np.isnan(inputs.camera_frame_rate_hz)
    assert_finite_except(out, does_not_apply)
    assert_not_negative(out, ["base_current_required_a", "drive_current_a", "base_current_a", "transistor_power_w"])
    for k, series in enumerate(inputs.e_series):
        assert eseries.is_standard(r["rb_ohm"][k], str(series)).all()
    # Rounded down (to the 1e-9 picking tolerance), and to the nearest value: one step up would be too large.
    assert np.all(r["rb_ohm"] <= r["rb_exact_ohm"] * (1 + eseries.REL_TOL))
    above = eseries.pick_at_or_above_rows(r["rb_ohm"] * (1 + 1e-6), inputs.e_series)
    assert np.all(above > r["rb_exact_ohm"] * (1 - eseries.REL_TOL))
    assert np.all(r["drive_current_a"] >= r["base_current_a"])


# ---- slew-limit ----------------------------------------------------------------------------------------------


@st.composite
def slew_inputs(draw: st.DrawFn) -> slew.SlewInputs:
    def row(draw: st.DrawFn) -> dict[str, Any]:
        headroom = draw(optional(st.one_of(st.just(0.0), magnitudes())))
        supply = draw(optional(magnitudes()))
        return {
            "slew_rate_v_per_s": draw(magnitudes()),
            "output_headroom_v": headroom,
            "frequency_hz": draw(optional(magnitudes())),
            "amplitude_v": draw(optional(magnitudes())),
            "triangle": draw(st.booleans()),
            "supply_v": supply,
            "step_v": draw(optional(signed(magnitudes()))),
            "opamp_supply_min_v": draw(optional(magnitudes())),
            "opamp_supply_max_v": draw(optional(magnitudes())),
        }

    return slew.SlewInputs(**columns(draw, row))


@SETTINGS
@given(inputs=slew_inputs())
def test_slew_limit_results_are_sound_everywhere(inputs: slew.SlewInputs) -> None:
    inputs = valid_rows(inputs, slew.validate)
    out = slew.compute(inputs)
    f, vp, supply = np.isnan(inputs.frequency_hz), np.isnan(inputs.amplitude_v), np.isnan(inputs.supply_v)
    assert_finite_except(
        out,
        {
            "slew_limited_amplitude_v": f,
            "swing_limited_amplitude_v": supply,
            "max_amplitude_v": f & supply,
            "max_amplitude_vpp": f & supply,
            "full_power_bandwidth_hz": vp & supply,
            "required_slew_rate_v_per_s": f | vp,
            "step_slew_time_s": np.isnan(inputs.step_v),
        },
    )
    assert_not_negative(out, [name for name in out.results if name != "slew_limited"])


# ---- closed-loop-bandwidth -----------------------------------------------------------------------------------


@st.composite
def closed_loop_inputs(draw: st.DrawFn) -> closed_loop.ClosedLoopInputs:
    def row(draw: st.DrawFn) -> dict[str, Any]:
        by_gain = draw(st.booleans())
        start = draw(optional(magnitudes()))
        points = draw(st.integers(2, closed_loop.MAX_SWEEP_POINTS))
        return {
            "inverting": float(draw(st.booleans())),
            "gain": 1.0 + draw(magnitudes()) if by_gain else math.nan,
            "rf_ohm": math.nan if by_gain else draw(magnitudes()),
            "rg_ohm": math.nan if by_gain else draw(magnitudes()),
            "gbw_hz": draw(magnitudes()),
            "open_loop_gain": draw(optional(st.builds(lambda m: 1.0 + m, magnitudes()))),
            "stages": float(draw(st.integers(1, closed_loop.MAX_STAGES))),
            "signal_hz": draw(optional(magnitudes())),
            "sweep_start_hz": start,
            "sweep_stop_hz": math.nan if math.isnan(start) else start * (1.0 + draw(magnitudes(-15, 15))),
            "sweep_points": math.nan if math.isnan(start) else float(points),
            "input_offset_v": draw(optional(st.one_of(st.just(0.0), magnitudes()))),
            "output_offset_max_v": draw(optional(magnitudes())),
        }

    arrays = columns(draw, row)
    arrays["inverting"] = arrays["inverting"].astype(bool)
    return closed_loop.ClosedLoopInputs(**arrays)


@SETTINGS
@given(inputs=closed_loop_inputs())
def test_closed_loop_results_are_sound_everywhere(inputs: closed_loop.ClosedLoopInputs) -> None:
    inputs = valid_rows(inputs, closed_loop.validate)
    out = closed_loop.compute(inputs)
    no_signal = np.isnan(inputs.signal_hz)
    no_offset = np.isnan(inputs.input_offset_v)
    assert_finite_except(
        out,
        {
            "gain_at_signal_db": no_signal,
            "phase_at_signal_deg": no_signal,
            "output_offset_v": no_offset,
        },
    )
    r = out.results
    sweeping = ~np.isnan(inputs.sweep_points)
    if sweeping.any():  # the flat sweep holds exactly the points each row asked for, row after row
        expected = np.repeat(np.flatnonzero(sweeping), inputs.sweep_points[sweeping].astype(int))
        np.testing.assert_array_equal(r["sweep_row"], expected)
    assert_not_negative(out, ["noise_gain", "bandwidth_hz", "cascade_bandwidth_hz", "rise_time_s"])
    assert np.all(r["cascade_bandwidth_hz"] <= r["bandwidth_hz"] * (1 + 1e-12))
    assert np.all(np.isnan(r["phase_at_signal_deg"]) | (r["phase_at_signal_deg"] <= 0.0))


# ---- duty-cycle-power ----------------------------------------------------------------------------------------


@st.composite
def duty_inputs(draw: st.DrawFn) -> duty_power.DutyPowerInputs:
    n = draw(ROWS)
    loads = []
    for row in range(n):
        for _ in range(draw(st.integers(1, 3))):
            peak = draw(st.one_of(st.just(0.0), magnitudes()))
            if draw(st.booleans()):
                loads.append((row, peak, draw(FRACTIONS), math.nan, math.nan, draw(st.integers(1, 100_000))))
            else:  # a sampled waveform's statistics: 0 ≤ average ≤ rms ≤ peak
                rms = peak * draw(st.floats(0.0, 1.0))
                loads.append((row, peak, math.nan, rms * draw(st.floats(0.0, 1.0)), rms, draw(st.integers(1, 100))))
    load_row, peak, duty, average, rms, count = (np.array(c, dtype=np.float64) for c in zip(*loads, strict=True))
    return duty_power.DutyPowerInputs(
        supply_v=np.array([draw(magnitudes()) for _ in range(n)]),
        current_max_a=np.array([draw(optional(magnitudes())) for _ in range(n)]),
        capacity_ah=np.array([draw(optional(magnitudes())) for _ in range(n)]),
        load_row=load_row.astype(np.int64),
        peak_current_a=peak,
        duty_cycle=duty,
        average_current_a=average,
        rms_current_a=rms,
        count=count,
        fixed=np.array([draw(st.booleans()) for _ in loads], dtype=bool),
    )


@SETTINGS
@given(inputs=duty_inputs())
def test_duty_cycle_power_results_are_sound_everywhere(inputs: duty_power.DutyPowerInputs) -> None:
    assume(duty_power.validate(inputs) == [])  # loads span rows, so rows cannot be dropped one by one
    out = duty_power.compute(inputs)
    r = out.results
    rating_unknown = np.isnan(inputs.current_max_a)
    with np.errstate(divide="ignore", over="ignore"):
        unbounded = ~np.isfinite(inputs.capacity_ah / r["average_current_a"])  # no drain, or a vanishing one
    assert_finite_except(
        out,
        {
            "supply_utilization": rating_unknown,
            "runtime_h": unbounded,
            "max_common_duty_cycle": rating_unknown,
        },
    )
    assert_not_negative(out, [name for name in r if name.endswith(("_a", "_w"))])
    assert np.all(r["average_current_a"] <= r["peak_current_a"] * (1 + 1e-12))
    # 0 only when the fixed loads alone fill the rating.
    assert np.all(rating_unknown | ((r["max_common_duty_cycle"] >= 0.0) & (r["max_common_duty_cycle"] <= 1.0)))


# ---- the practical range -------------------------------------------------------------------------------------

QUANTITIES = {  # per calculation: inputs bounded above, and those also bounded below (divisors)
    "led-string": (led_inputs, led_string.validate, ["supply_v", "vf_typ_v", "if_max_a", "current_a"], []),
    "bjt-switch": (bjt_inputs, bjt_switch.validate, ["hfe_min", "vce_sat_v", "drive_low_v"], ["rbe_ohm"]),
    "slew-limit": (slew_inputs, slew.validate, ["supply_v", "step_v"], ["slew_rate_v_per_s", "frequency_hz"]),
    "closed-loop-bandwidth": (closed_loop_inputs, closed_loop.validate, ["rf_ohm", "signal_hz"], ["gbw_hz"]),
    "duty-cycle-power": (duty_inputs, duty_power.validate, ["supply_v", "peak_current_a"], ["current_max_a"]),
}


@pytest.mark.parametrize("calculation", QUANTITIES)
@settings(max_examples=20, deadline=None, derandomize=True, database=None)
@given(data=st.data())
def test_magnitudes_beyond_the_practical_range_are_refused_by_name(calculation: str, data: st.DataObject) -> None:
    """1e31 V would overflow a square or a product to infinity: a violation naming the input, never a result."""
    strategy, validate, bounded, divisors = QUANTITIES[calculation]
    inputs = data.draw(strategy())
    name = data.draw(st.sampled_from(bounded + divisors))
    beyond = [PRACTICAL_MAX * 10, -PRACTICAL_MAX * 10] + ([PRACTICAL_MIN / 10] if name in divisors else [])
    column = getattr(inputs, name).copy()
    column[0] = data.draw(st.sampled_from(beyond))
    violations = validate(dataclasses.replace(inputs, **{name: column}))
    assert any(v.field == name and v.rows[0] and "outside the magnitudes" in v.message for v in violations)
