"""Tests for the slew-rate and output-swing limits."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calcsvc.core.outcome import DomainError
from calcsvc.core.slew import SlewInputs, compute, validate

NAN = np.nan


def make(
    *,
    slew_rate_v_per_s: float = 1e6,
    output_headroom_v: float = NAN,
    frequency_hz: float = NAN,
    amplitude_v: float = NAN,
    triangle: bool = False,
    supply_v: float = NAN,
    step_v: float = NAN,
    opamp_supply_min_v: float = NAN,
    opamp_supply_max_v: float = NAN,
) -> SlewInputs:
    """One row of inputs."""

    def arr(x: float) -> np.ndarray:
        return np.array([x], dtype=np.float64)

    return SlewInputs(
        slew_rate_v_per_s=arr(slew_rate_v_per_s),
        output_headroom_v=arr(output_headroom_v),
        frequency_hz=arr(frequency_hz),
        amplitude_v=arr(amplitude_v),
        triangle=np.array([triangle]),
        supply_v=arr(supply_v),
        step_v=arr(step_v),
        opamp_supply_min_v=arr(opamp_supply_min_v),
        opamp_supply_max_v=arr(opamp_supply_max_v),
    )


def rate_limited_follower(x: np.ndarray, dt: float, slew_rate: float) -> np.ndarray:
    """Time-domain model of a unity follower whose output moves at most ``slew_rate·dt`` per sample."""
    step = slew_rate * dt
    y = float(x[0])
    out = [y]
    for target in x[1:].tolist():
        y += min(step, max(-step, target - y))
        out.append(y)
    return np.asarray(out)


def simulate(amplitude: float, frequency: float, slew_rate: float, triangle: bool) -> tuple[float, float]:
    """Peak tracking error (fraction of amplitude) and harmonic distortion of the last of 4 periods.

    The distortion is relative to the input's own harmonics (a triangle has odd harmonics of its own).
    """
    per_period, periods = 2000, 4
    t = np.arange(periods * per_period + 1) / (per_period * frequency)
    if triangle:
        phase = (t * frequency + 0.25) % 1.0  # starts at 0 V, rising, like the sine
        x = amplitude * (4 * np.abs(phase - 0.5) - 1)
    else:
        x = amplitude * np.sin(2 * np.pi * frequency * t)
    y = rate_limited_follower(x, 1 / (per_period * frequency), slew_rate)
    last = slice((periods - 1) * per_period, periods * per_period)
    peak_error = float(np.max(np.abs(y[last] - x[last]))) / amplitude
    spectrum = np.fft.rfft(y[last])
    reference = np.fft.rfft(x[last])
    thd = float(np.sqrt(np.sum(np.abs(spectrum[2:] - reference[2:]) ** 2)) / np.abs(reference[1]))
    return peak_error, thd


@pytest.mark.parametrize("triangle", [False, True])
def test_time_domain_simulation_of_slew_limit(triangle):
    sr, f = 0.5e6, 20e3
    limit = compute(make(slew_rate_v_per_s=sr, frequency_hz=f, triangle=triangle)).results["slew_limited_amplitude_v"][
        0
    ]
    # Independent numerical solution: a waveform just below SR/(2πf) (sine) or SR/(4f) (triangle) passes a
    # rate-limited follower untouched...
    error_below, thd_below = simulate(0.9 * limit, f, sr, triangle)
    assert error_below < 1e-9
    assert thd_below < 1e-9
    # ...and just above it the output lags and distorts clearly.
    error_above, thd_above = simulate(1.1 * limit, f, sr, triangle)
    assert error_above > 0.02
    assert thd_above > 0.01
    out = compute(make(slew_rate_v_per_s=sr, frequency_hz=f, amplitude_v=1.1 * limit, triangle=triangle))
    assert out.results["slew_limited"][0]
    assert not {c.name: c for c in out.checks}["slew_rate"].ok[0]
    out = compute(make(slew_rate_v_per_s=sr, frequency_hz=f, amplitude_v=0.9 * limit, triangle=triangle))
    assert not out.results["slew_limited"][0]


def test_sine_formulas_full_power_bandwidth():
    # Sedra & Smith, Microelectronic Circuits, 7th ed., §2.8.4 "Full-power bandwidth" (from memory):
    # f_M = SR / (2π·V_omax).
    out = compute(make(slew_rate_v_per_s=1e6, amplitude_v=10.0, frequency_hz=10e3)).results
    assert out["full_power_bandwidth_hz"][0] == pytest.approx(1e6 / (2 * np.pi * 10.0))
    assert out["full_power_bandwidth_hz"][0] == pytest.approx(15.9e3, rel=1e-3)  # SR 1 V/µs, 10 V peak
    assert out["required_slew_rate_v_per_s"][0] == pytest.approx(2 * np.pi * 10e3 * 10.0)
    assert out["slew_limited_amplitude_v"][0] == pytest.approx(1e6 / (2 * np.pi * 10e3))


def test_step_slew_time_check_value():
    # Definition of slew rate (Sedra & Smith, 7th ed., §2.8.3, from memory): a 10 V step at 0.5 V/µs takes 20 µs.
    out = compute(make(slew_rate_v_per_s=0.5e6, step_v=10.0, frequency_hz=1e3)).results
    assert out["step_slew_time_s"][0] == pytest.approx(20e-6)
    out = compute(make(slew_rate_v_per_s=0.5e6, step_v=-10.0, frequency_hz=1e3)).results
    assert out["step_slew_time_s"][0] == pytest.approx(20e-6)


def test_triangle_slope_by_numerical_differentiation():
    # Independent numerical solution: the steepest slope of a sampled triangle wave, by np.gradient.
    f, vp = 1e3, 2.5
    t = np.linspace(0, 2 / f, 80001)
    phase = (t * f) % 1.0
    x = vp * (4 * np.abs(phase - 0.5) - 1)  # symmetric triangle, ±vp
    slope = np.max(np.abs(np.gradient(x, t)))
    out = compute(make(frequency_hz=f, amplitude_v=vp, triangle=True, slew_rate_v_per_s=slope)).results
    assert out["required_slew_rate_v_per_s"][0] == pytest.approx(slope, rel=1e-6)
    assert out["slew_limited_amplitude_v"][0] == pytest.approx(vp, rel=1e-6)
    assert out["full_power_bandwidth_hz"][0] == pytest.approx(f, rel=1e-6)


def test_swing_limit_and_max_amplitude():
    # ±15 V rails (30 V span) and 1.5 V headroom: 13.5 V peak (definition of output swing; from memory, a
    # typical non-rail-to-rail output).
    kwargs = {"supply_v": 30.0, "opamp_supply_min_v": 5.0, "opamp_supply_max_v": 36.0, "output_headroom_v": 1.5}
    out = compute(make(**kwargs, frequency_hz=1e3, slew_rate_v_per_s=1e6))
    r = out.results
    assert r["swing_limited_amplitude_v"][0] == pytest.approx(13.5)
    assert r["max_amplitude_v"][0] == pytest.approx(13.5)  # the slew limit (159 V) does not bind
    assert r["max_amplitude_vpp"][0] == pytest.approx(27.0)
    assert out.warnings == []
    # Unknown headroom: rail-to-rail assumed and said so.
    out = compute(make(supply_v=30.0, frequency_hz=1e3))
    assert out.results["swing_limited_amplitude_v"][0] == pytest.approx(15.0)
    assert any("output_headroom_v" in n.message for n in out.warnings)


def test_checks():
    # Sedra & Smith, 7th ed., §2.8.3-2.8.4 (from memory): a sine needs a slew rate of 2π·f·Vp; the output
    # cannot swing past its rails (§2.8.1, output voltage saturation).
    out = compute(make(slew_rate_v_per_s=0.5e6, frequency_hz=20e3, amplitude_v=5.0, supply_v=10.0))
    check = {c.name: c for c in out.checks}
    assert not check["slew_rate"].ok[0]  # needs 2π·20 kHz·5 V = 0.63 V/µs
    assert check["slew_rate"].value[0] == pytest.approx(2 * np.pi * 20e3 * 5.0)
    assert check["slew_rate"].limit[0] == 0.5e6
    assert check["output_swing"].ok[0]  # 5 V ≤ 10/2 V exactly
    out = compute(make(frequency_hz=20e3, supply_v=10.0))
    check = {c.name: c for c in out.checks}
    assert check["slew_rate"].ok[0] and np.isnan(check["slew_rate"].limit[0])
    assert check["output_swing"].ok[0] and np.isnan(check["output_swing"].limit[0])
    out = compute(make(amplitude_v=6.0, supply_v=10.0, output_headroom_v=0.5))
    assert not {c.name: c for c in out.checks}["output_swing"].ok[0]


def test_results_nan_where_they_do_not_apply():
    # f_M = SR/(2π·Vp) (Sedra & Smith, 7th ed., §2.8.4, from memory) at 1 V/µs and 1 V peak.
    r = compute(make(amplitude_v=1.0)).results
    assert np.isnan(r["slew_limited_amplitude_v"][0])
    assert np.isnan(r["swing_limited_amplitude_v"][0])
    assert np.isnan(r["max_amplitude_v"][0])
    assert np.isnan(r["required_slew_rate_v_per_s"][0])
    assert np.isnan(r["step_slew_time_s"][0])
    assert not r["slew_limited"][0]
    assert r["full_power_bandwidth_hz"][0] == pytest.approx(1e6 / (2 * np.pi))


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"slew_rate_v_per_s": 0.0, "frequency_hz": 1e3}, "slew_rate_v_per_s"),
        ({"slew_rate_v_per_s": NAN, "frequency_hz": 1e3}, "slew_rate_v_per_s"),
        ({}, "frequency_hz"),
        ({"frequency_hz": -1.0}, "frequency_hz"),
        ({"frequency_hz": np.inf}, "frequency_hz"),
        ({"amplitude_v": 0.0}, "amplitude_v"),
        ({"frequency_hz": 1e3, "supply_v": 0.0}, "supply_v"),
        ({"frequency_hz": 1e3, "supply_v": 3.0, "output_headroom_v": 1.5}, "supply_v"),
        ({"frequency_hz": 1e3, "output_headroom_v": -0.1}, "output_headroom_v"),
        ({"frequency_hz": 1e3, "step_v": 0.0}, "step_v"),
    ],
)
def test_violations(kwargs, field):
    inputs = make(**kwargs)
    assert field in {v.field for v in validate(inputs)}
    with pytest.raises(DomainError):
        compute(inputs)


def test_batch_is_vectorized():
    # Triangle: SR/(4·Vp) (it travels 2·Vp in half a period; definition); swing 12/2 - 1 V; step |ΔV|/SR.
    inputs = SlewInputs(
        slew_rate_v_per_s=np.array([1e6, 2e6]),
        output_headroom_v=np.array([NAN, 1.0]),
        frequency_hz=np.array([1e4, NAN]),
        amplitude_v=np.array([NAN, 3.0]),
        triangle=np.array([False, True]),
        supply_v=np.array([NAN, 12.0]),
        step_v=np.array([NAN, 4.0]),
        opamp_supply_min_v=np.array([NAN, 4.0]),
        opamp_supply_max_v=np.array([NAN, 30.0]),
    )
    r = compute(inputs).results
    assert r["slew_limited_amplitude_v"][0] == pytest.approx(1e6 / (2 * np.pi * 1e4))
    assert r["full_power_bandwidth_hz"][1] == pytest.approx(2e6 / (4 * 3.0))
    assert r["swing_limited_amplitude_v"][1] == pytest.approx(5.0)
    assert r["step_slew_time_s"][1] == pytest.approx(2e-6)


@settings(max_examples=80, deadline=None, derandomize=True)
@given(
    sr=st.floats(min_value=1e3, max_value=1e10),
    f=st.floats(min_value=1e-2, max_value=1e9),
    vp=st.floats(min_value=1e-6, max_value=1e3),
    headroom=st.floats(min_value=0.0, max_value=5.0),
    extra=st.floats(min_value=1e-3, max_value=100.0),
    triangle=st.booleans(),
    step=st.floats(min_value=-100.0, max_value=100.0).filter(lambda s: s != 0.0),
)
def test_no_nan_and_max_within_each_limit(sr, f, vp, headroom, extra, triangle, step):
    supply = 2 * headroom + extra
    inputs = make(
        slew_rate_v_per_s=sr,
        frequency_hz=f,
        amplitude_v=vp,
        triangle=triangle,
        supply_v=supply,
        output_headroom_v=headroom,
        step_v=step,
    )
    out = compute(inputs)
    for name, value in out.results.items():
        assert not np.any(np.isnan(value)), name
    r = out.results
    assert r["max_amplitude_v"][0] <= r["slew_limited_amplitude_v"][0]
    assert r["max_amplitude_v"][0] <= r["swing_limited_amplitude_v"][0]
    assert r["max_amplitude_v"][0] > 0
    # Consistent results: slew-limited when the amplitude is beyond the slew-limited amplitude, not below it.
    if vp > 1.001 * r["slew_limited_amplitude_v"][0]:
        assert r["slew_limited"][0]
    elif vp < 0.999 * r["slew_limited_amplitude_v"][0]:
        assert not r["slew_limited"][0]
    assert r["full_power_bandwidth_hz"][0] * vp == pytest.approx(f * r["slew_limited_amplitude_v"][0])


def test_full_power_bandwidth_at_the_rated_swing_without_an_amplitude():
    # The datasheet's full-power bandwidth is at the rated output swing: Sedra & Smith, Microelectronic
    # Circuits, 7th ed., §2.8.4 (from memory), f_M = SR / (2π·V_omax), V_omax = 30 V/2 - 1.5 V = 13.5 V here.
    out = compute(make(slew_rate_v_per_s=0.5e6, supply_v=30.0, output_headroom_v=1.5))
    f_m = out.results["full_power_bandwidth_hz"][0]
    assert f_m == pytest.approx(0.5e6 / (2 * np.pi * 13.5), rel=1e-12)
    assert f_m == pytest.approx(5894.7, rel=1e-4)
    # Independent numerical solution: the rate-limited follower tracks 13.5 V peak just below f_M, not above.
    assert simulate(13.5, 0.99 * f_m, 0.5e6, triangle=False)[0] < 1e-9
    assert simulate(13.5, 1.1 * f_m, 0.5e6, triangle=False)[0] > 0.02
    assert np.isnan(out.results["required_slew_rate_v_per_s"][0])


def test_supply_outside_the_op_amp_range_fails_and_cautions():
    # The rated operating supply range is the datasheet's own limit (common practice): a 5.5 V-maximum
    # op-amp on a 12 V rail may be destroyed; a 10 V-minimum one on 9 V is not specified to work.
    out = compute(make(amplitude_v=1.0, supply_v=12.0, opamp_supply_min_v=1.8, opamp_supply_max_v=5.5))
    check = {c.name: c for c in out.checks}
    assert not check["opamp_supply_max"].ok[0] and check["opamp_supply_min"].ok[0]
    assert (check["opamp_supply_max"].value[0], check["opamp_supply_max"].limit[0]) == (12.0, 5.5)
    assert any("destroy" in c.message for c in out.cautions)
    out = compute(make(amplitude_v=1.0, supply_v=9.0, opamp_supply_min_v=10.0, opamp_supply_max_v=36.0))
    check = {c.name: c for c in out.checks}
    assert not check["opamp_supply_min"].ok[0] and check["opamp_supply_max"].ok[0]
    assert check["opamp_supply_min"].margin()[0] == pytest.approx(-0.1)
    assert out.cautions == []
    # Without a range nothing is checked, and the answer says so.
    out = compute(make(amplitude_v=1.0, supply_v=9.0))
    assert all(c.ok[0] for c in out.checks if c.name.startswith("opamp_supply"))
    assert any("supply range" in n.message for n in out.warnings)


def test_supply_range_must_be_ordered():
    found = validate(make(amplitude_v=1.0, opamp_supply_min_v=5.0, opamp_supply_max_v=5.0))
    assert [v.field for v in found] == ["opamp_supply_max_v"]
