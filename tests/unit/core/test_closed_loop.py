"""Tests for the closed-loop bandwidth calculation (single-pole op-amp model)."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq
from scipy.signal import freqs

from calcsvc.core.closed_loop import ClosedLoopInputs, compute, validate
from calcsvc.core.outcome import DomainError

NAN = np.nan


def make(
    *,
    inverting: bool = False,
    gain: float = NAN,
    rf_ohm: float = NAN,
    rg_ohm: float = NAN,
    gbw_hz: float = 1e6,
    open_loop_gain: float = NAN,
    stages: float = 1.0,
    signal_hz: float = NAN,
    sweep_start_hz: float = NAN,
    sweep_stop_hz: float = NAN,
    sweep_points: float = NAN,
    input_offset_v: float = NAN,
    output_offset_max_v: float = NAN,
) -> ClosedLoopInputs:
    """One row of inputs."""

    def arr(x: float) -> np.ndarray:
        return np.array([x], dtype=np.float64)

    return ClosedLoopInputs(
        inverting=np.array([inverting]),
        gain=arr(gain),
        rf_ohm=arr(rf_ohm),
        rg_ohm=arr(rg_ohm),
        gbw_hz=arr(gbw_hz),
        open_loop_gain=arr(open_loop_gain),
        stages=arr(stages),
        signal_hz=arr(signal_hz),
        sweep_start_hz=arr(sweep_start_hz),
        sweep_stop_hz=arr(sweep_stop_hz),
        sweep_points=arr(sweep_points),
        input_offset_v=arr(input_offset_v),
        output_offset_max_v=arr(output_offset_max_v),
    )


# --- independent reference: the feedback formula on polynomials, evaluated by scipy.signal.freqs ---


def reference_tf(
    signal_gain: float, noise_gain: float, gbw_hz: float, a0: float | None, n: int
) -> tuple[np.ndarray, np.ndarray]:
    """b, a of ``(G_ideal · βA/(1 + βA))^n`` for a single-pole op-amp, built with polynomial arithmetic."""
    wt = 2 * np.pi * gbw_hz
    if a0 is None:  # ideal at DC: an integrator wt/s
        b_open, a_open = np.array([wt]), np.array([1.0, 0.0])
    else:
        wa = wt / a0
        b_open, a_open = np.array([a0 * wa]), np.array([1.0, wa])
    beta = 1.0 / noise_gain
    b_stage = signal_gain * beta * b_open
    a_stage = np.polyadd(a_open, beta * b_open)
    b, a = np.array([1.0]), np.array([1.0])
    for _ in range(n):
        b, a = np.polymul(b, b_stage), np.polymul(a, a_stage)
    return b, a


def response(b: np.ndarray, a: np.ndarray, f_hz: np.ndarray | float) -> np.ndarray:
    _, h = freqs(b, a, worN=2 * np.pi * np.atleast_1d(np.asarray(f_hz, dtype=float)))
    return h


def minus_3db(b: np.ndarray, a: np.ndarray, upper_hz: float) -> float:
    """The -3 dB frequency found numerically with brentq on |H|."""
    dc = abs(b[-1] / a[-1])
    return brentq(
        lambda f: abs(response(b, a, f)[0]) - dc / np.sqrt(2.0),
        1e-9 * upper_hz,
        upper_hz,
        xtol=1e-14,
        rtol=1e-14,
    )


CASES = [
    # inverting, gain, rf, rg, gbw, a0, stages
    (False, 100.0, NAN, NAN, 1e6, None, 1),
    (True, 10.0, NAN, NAN, 1e6, 1e5, 2),
    (False, 1.0, NAN, NAN, 10e6, 2e5, 3),
    (True, 4.7, NAN, NAN, 3e6, 1e3, 4),
    (False, NAN, 9e3, 1e3, 1e6, 50.0, 2),
    (True, NAN, 22e3, 4.7e3, 5e6, None, 5),
]


@pytest.mark.parametrize(("inverting", "gain", "rf", "rg", "gbw", "a0", "n"), CASES)
def test_matches_scipy_freqs(inverting, gain, rf, rg, gbw, a0, n):
    signal_hz = 0.3 * gbw / 100
    out = compute(
        make(
            inverting=inverting,
            gain=gain,
            rf_ohm=rf,
            rg_ohm=rg,
            gbw_hz=gbw,
            open_loop_gain=NAN if a0 is None else a0,
            stages=n,
            signal_hz=signal_hz,
            sweep_start_hz=gbw * 1e-5,
            sweep_stop_hz=gbw * 10,
            sweep_points=300,
        )
    ).results
    ratio = gain if np.isfinite(gain) else rf / rg
    ng = 1 + ratio if inverting else (gain if np.isfinite(gain) else 1 + ratio)
    ideal = -ratio if inverting else ng
    sign = -1.0 if inverting else 1.0

    # Independent numerical solution: scipy.signal.freqs on the feedback formula, -3 dB by brentq.
    b1, a1 = reference_tf(ideal, ng, gbw, a0, 1)
    bn, an = reference_tf(ideal, ng, gbw, a0, n)
    assert out["bandwidth_hz"][0] == pytest.approx(minus_3db(b1, a1, 10 * gbw), rel=1e-6)
    assert out["cascade_bandwidth_hz"][0] == pytest.approx(minus_3db(bn, an, 10 * gbw), rel=1e-6)
    assert out["closed_loop_gain"][0] == pytest.approx(b1[-1] / a1[-1], rel=1e-12)

    # Gain and phase at the signal frequency (phase without the inversion, compared modulo 360°).
    h = response(bn, an, signal_hz)[0]
    assert out["gain_at_signal_db"][0] == pytest.approx(20 * np.log10(abs(h)), abs=1e-9)
    lag = np.degrees(np.angle(h * sign**n))
    assert ((out["phase_at_signal_deg"][0] - lag + 180) % 360) - 180 == pytest.approx(0, abs=1e-9)

    # The sweep: log-spaced points, gain and (unwrapped) phase against freqs.
    f = out["sweep_frequency_hz"]
    np.testing.assert_allclose(f, np.geomspace(gbw * 1e-5, gbw * 10, 300), rtol=1e-12)
    hs = response(bn, an, f)
    np.testing.assert_allclose(out["sweep_gain_db"], 20 * np.log10(np.abs(hs)), atol=1e-9)
    np.testing.assert_allclose(out["sweep_phase_deg"], np.degrees(np.unwrap(np.angle(hs * sign**n))), atol=1e-9)


def test_textbook_gbw_over_noise_gain():
    # Sedra & Smith, Microelectronic Circuits, 7th ed., §2.7.3 (single-pole op-amp model, from memory):
    # f3dB = ft / (1 + R2/R1) ≈ GBW / NG.
    out = compute(make(gain=25.0, gbw_hz=2e6)).results
    assert out["bandwidth_hz"][0] == pytest.approx(2e6 / 25.0, rel=1e-12)
    # With a large but finite A0 the exact result is only slightly above GBW/NG (same source, approximation).
    out = compute(make(gain=25.0, gbw_hz=2e6, open_loop_gain=1e5)).results
    assert out["bandwidth_hz"][0] == pytest.approx(2e6 / 25.0, rel=1e-3)
    assert out["bandwidth_hz"][0] > 2e6 / 25.0


@pytest.mark.parametrize(("gain", "expected_hz"), [(100.0, 10e3), (10.0, 100e3)])
def test_gain_bandwidth_trade(gain, expected_hz):
    # Common practice: a 1 MHz GBW op-amp gives about 10 kHz at gain 100 and about 100 kHz at gain 10.
    out = compute(make(gain=gain, gbw_hz=1e6, open_loop_gain=2e5)).results
    assert out["bandwidth_hz"][0] == pytest.approx(expected_hz, rel=0.01)


def test_inverting_noise_gain_and_signs():
    # Sedra & Smith, Microelectronic Circuits, 7th ed., §2.7.3 (from memory): the inverting amplifier's noise
    # gain is 1 + R2/R1.
    out = compute(make(inverting=True, gain=10.0)).results
    assert out["noise_gain"][0] == pytest.approx(11.0)
    assert out["signal_gain"][0] == pytest.approx(-10.0)
    assert out["bandwidth_hz"][0] == pytest.approx(1e6 / 11.0)
    out = compute(make(inverting=True, rf_ohm=100e3, rg_ohm=10e3)).results
    assert out["noise_gain"][0] == pytest.approx(11.0)
    out = compute(make(inverting=False, rf_ohm=9e3, rg_ohm=1e3)).results
    assert out["noise_gain"][0] == pytest.approx(10.0)
    assert out["signal_gain"][0] == pytest.approx(10.0)


def test_finite_open_loop_gain_error():
    # Sedra & Smith, Microelectronic Circuits, 7th ed., §2.7.1 (from memory): G = G_ideal / (1 + (1 + R2/R1)/A).
    out = compute(make(gain=10.0, open_loop_gain=1e3)).results
    assert out["closed_loop_gain"][0] == pytest.approx(10.0 / 1.01)
    assert out["gain_error_pct"][0] == pytest.approx(-100 * 0.01 / 1.01)
    out = compute(make(inverting=True, gain=10.0, open_loop_gain=1e3)).results
    assert out["closed_loop_gain"][0] == pytest.approx(-10.0 / 1.011)
    ideal = compute(make(gain=10.0)).results
    assert ideal["closed_loop_gain"][0] == 10.0
    assert ideal["gain_error_pct"][0] == 0.0


def test_minus_45_degrees_and_3_db_at_f1():
    # Definition of a single real pole: at f = f1 the phase is -45° and |H| is 1/√2 of DC
    # (Sedra & Smith, Microelectronic Circuits, 7th ed., §1.6, STC networks, from memory).
    f1 = compute(make(gain=20.0, open_loop_gain=1e4)).results["bandwidth_hz"][0]
    out = compute(make(gain=20.0, open_loop_gain=1e4, signal_hz=f1)).results
    assert out["phase_at_signal_deg"][0] == pytest.approx(-45.0, abs=1e-9)
    dc_db = 20 * np.log10(abs(out["closed_loop_gain"][0]))
    assert out["gain_at_signal_db"][0] == pytest.approx(dc_db - 10 * np.log10(2), abs=1e-9)
    # n identical stages lag n·45° there.
    out = compute(make(gain=20.0, open_loop_gain=1e4, signal_hz=f1, stages=3)).results
    assert out["phase_at_signal_deg"][0] == pytest.approx(-135.0, abs=1e-9)


def test_cascade_bandwidth_formula_and_rise_time():
    # (1 + (f/f1)²)^n = 2 → f = f1·√(2^(1/n) − 1); two stages: 0.6436·f1
    # (identical real poles; derived from the STC response, Sedra & Smith, 7th ed., §1.6, from memory).
    out = compute(make(gain=10.0, stages=2)).results
    assert out["cascade_bandwidth_hz"][0] == pytest.approx(1e5 * 0.643594, rel=1e-5)
    # Rise time 10-90 % of one pole is ln 9 / (2π f1) ≈ 0.35/f1 (common practice, 0.35 rule).
    assert out["rise_time_s"][0] == pytest.approx(np.log(9) / (2 * np.pi * 1e5), rel=2e-3)
    assert out["cascade_rise_time_s"][0] == pytest.approx(0.35 / out["cascade_bandwidth_hz"][0])


def test_checks_and_warnings():
    # Common practice: keep at least 20 dB of loop gain, i.e. noise gain ≤ A0/10.
    out = compute(make(gain=200.0, open_loop_gain=1e3, signal_hz=5e3))
    check = {c.name: c for c in out.checks}
    assert not check["gain_achievable"].ok[0]
    assert check["gain_achievable"].limit[0] == pytest.approx(100.0)
    assert check["signal_in_band"].ok[0]  # 5 kHz is inside the ~6 kHz bandwidth
    messages = " ".join(n.message for n in out.warnings)
    assert "gain_error_pct" in messages  # 200/1000 → about 17 % gain loss
    assert "tenth of the cascade bandwidth" in messages

    out = compute(make(gain=10.0, signal_hz=1e6))
    check = {c.name: c for c in out.checks}
    assert not check["signal_in_band"].ok[0]
    assert check["gain_achievable"].ok[0]
    assert np.isnan(check["gain_achievable"].limit[0])  # no A0: does not apply

    out = compute(make(gain=10.0))
    check = {c.name: c for c in out.checks}
    assert check["signal_in_band"].ok[0] and np.isnan(check["signal_in_band"].value[0])
    assert out.warnings == []
    assert np.isnan(out.results["gain_at_signal_db"][0])
    assert "sweep_gain_db" not in out.results


def fields_of(inputs: ClosedLoopInputs) -> set[str]:
    return {v.field for v in validate(inputs) if v.rows.any()}


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"gain": 0.5}, "gain"),
        ({"inverting": True, "gain": 0.0}, "gain"),
        ({"gain": 10.0, "rf_ohm": 1e3, "rg_ohm": 1e3}, "gain"),
        ({}, "gain"),
        ({"rf_ohm": 1e3}, "gain"),
        ({"rf_ohm": -1e3, "rg_ohm": 1e3}, "rf_ohm"),
        ({"gain": 2.0, "gbw_hz": 0.0}, "gbw_hz"),
        ({"gain": 2.0, "gbw_hz": np.inf}, "gbw_hz"),
        ({"gain": 2.0, "open_loop_gain": 1.0}, "open_loop_gain"),
        ({"gain": 2.0, "stages": 0.0}, "stages"),
        ({"gain": 2.0, "stages": 1.5}, "stages"),
        ({"gain": 2.0, "stages": 21.0}, "stages"),
        ({"gain": 2.0, "signal_hz": 0.0}, "signal_hz"),
        ({"gain": 2.0, "signal_hz": np.inf}, "signal_hz"),
        ({"gain": 2.0, "sweep_start_hz": 10.0, "sweep_stop_hz": 1e3, "sweep_points": 1}, "sweep_points"),
        ({"gain": 2.0, "sweep_start_hz": 10.0, "sweep_stop_hz": 1e3, "sweep_points": 2001}, "sweep_points"),
        ({"gain": 2.0, "sweep_start_hz": 10.0, "sweep_stop_hz": 1e3}, "sweep_points"),
        ({"gain": 2.0, "sweep_start_hz": 1e3, "sweep_stop_hz": 10.0, "sweep_points": 10}, "sweep_stop_hz"),
        ({"gain": 2.0, "sweep_start_hz": 0.0, "sweep_stop_hz": 10.0, "sweep_points": 10}, "sweep_start_hz"),
        ({"gain": 2.0, "sweep_start_hz": 10.0, "sweep_points": 10}, "sweep_stop_hz"),
        ({"gain": 2.0, "sweep_points": 10}, "sweep_start_hz"),
    ],
)
def test_violations(kwargs, field):
    inputs = make(**kwargs)
    assert field in fields_of(inputs)
    with pytest.raises(DomainError) as err:
        compute(inputs)
    assert any(v.field == field for v in err.value.violations)


def test_violation_message_names_the_rule():
    messages = [v.message for v in validate(make(gain=0.5))]
    assert any("0.5" in m and "cannot have gain below 1 V/V" in m for m in messages)
    messages = [v.message for v in validate(make(gain=2.0, stages=25.0))]
    assert any("20" in m and "cap" in m for m in messages)


def test_each_row_sweeps_its_own_points_as_it_would_alone():
    rows = [
        make(gain=10.0, sweep_start_hz=10.0, sweep_stop_hz=1e6, sweep_points=50),
        make(inverting=True, gain=3.0, stages=2.0),
        make(gain=2.0, sweep_start_hz=1e3, sweep_stop_hz=1e5, sweep_points=3),
        make(gain=5.0, sweep_start_hz=1.0, sweep_stop_hz=1e4, sweep_points=50),
    ]
    batch = ClosedLoopInputs(
        **{f.name: np.concatenate([getattr(row, f.name) for row in rows]) for f in dataclasses.fields(ClosedLoopInputs)}
    )
    out = compute(batch).results
    assert out["sweep_row"].tolist() == [0] * 50 + [2] * 3 + [3] * 50
    for index, row in enumerate(rows):
        alone = compute(row).results
        assert out["bandwidth_hz"][index] == alone["bandwidth_hz"][0]
        if index == 1:
            assert "sweep_row" not in alone
            continue
        for name in ("sweep_frequency_hz", "sweep_gain_db", "sweep_phase_deg"):
            np.testing.assert_allclose(out[name][out["sweep_row"] == index], alone[name], rtol=1e-12, err_msg=name)


# --- properties ---------------------------------------------------------------------------------------------

gains = st.floats(min_value=1.0, max_value=1e4, allow_nan=False)
a0s = st.one_of(st.just(NAN), st.floats(min_value=10.0, max_value=1e7))
gbws = st.floats(min_value=1e3, max_value=1e9)


@settings(max_examples=60, deadline=None, derandomize=True)
@given(g1=gains, g2=gains, gbw=gbws, a0=a0s, inverting=st.booleans())
def test_bandwidth_falls_as_gain_rises(g1, g2, gbw, a0, inverting):
    # Constant gain-bandwidth product (Sedra & Smith, 7th ed., §2.7.3, from memory): more noise gain, less bandwidth.
    lo, hi = sorted((g1, g2))
    assume(hi > lo * (1 + 1e-9))
    f_lo = compute(make(inverting=inverting, gain=lo, gbw_hz=gbw, open_loop_gain=a0)).results["bandwidth_hz"][0]
    f_hi = compute(make(inverting=inverting, gain=hi, gbw_hz=gbw, open_loop_gain=a0)).results["bandwidth_hz"][0]
    assert f_hi < f_lo


@settings(max_examples=60, deadline=None, derandomize=True)
@given(
    gain=gains,
    gbw=gbws,
    a0=st.floats(min_value=1.5, max_value=1e8),
    stages=st.integers(min_value=1, max_value=20),
    signal=st.floats(min_value=1e-3, max_value=1e10),
    inverting=st.booleans(),
    start=st.floats(min_value=1e-3, max_value=1e6),
    decades=st.floats(min_value=0.01, max_value=6),
)
def test_no_nan_for_valid_finite_input(gain, gbw, a0, stages, signal, inverting, start, decades):
    out = compute(
        make(
            inverting=inverting,
            gain=gain,
            gbw_hz=gbw,
            open_loop_gain=a0,
            stages=float(stages),
            signal_hz=signal,
            sweep_start_hz=start,
            sweep_stop_hz=start * 10**decades,
            sweep_points=20,
            input_offset_v=1e-3,
        )
    )
    for name, value in out.results.items():
        assert np.all(np.isfinite(value)), name
    assert out.results["cascade_bandwidth_hz"][0] <= out.results["bandwidth_hz"][0]
    assert out.results["phase_at_signal_deg"][0] <= 0.0


def test_output_offset_is_the_input_offset_times_the_noise_gain():
    # Franco, Design with Operational Amplifiers and Analog Integrated Circuits, 3rd ed., §5.4 (input offset
    # voltage, from memory): E_o = V_OS·(1 + R2/R1), the noise gain, for the inverting and the non-inverting
    # stage alike.
    for inverting in (False, True):
        out = compute(make(inverting=inverting, rf_ohm=99e3, rg_ohm=1e3, input_offset_v=2e-3))
        assert out.results["output_offset_v"][0] == pytest.approx(2e-3 * 100.0, rel=1e-12)
    # Finite A0: the loop holds the inputs apart by V_OS, so E_o = V_OS·NG/(1 + NG/A0) (same source).
    out = compute(make(gain=100.0, open_loop_gain=1e5, input_offset_v=2e-3))
    assert out.results["output_offset_v"][0] == pytest.approx(0.2 / (1 + 100 / 1e5), rel=1e-12)
    # Checked against the allowed output error only when one is given.
    check = {c.name: c for c in out.checks}["output_offset"]
    assert check.ok[0] and np.isnan(check.limit[0])
    out = compute(make(gain=100.0, input_offset_v=2e-3, output_offset_max_v=0.1))
    check = {c.name: c for c in out.checks}["output_offset"]
    assert not check.ok[0] and (check.value[0], check.limit[0]) == (pytest.approx(0.2), 0.1)


def test_cascade_offset_is_carried_by_the_later_stages():
    # Superposition (from memory): two gain-10 stages, each with V_OS 1 mV of one sign: the first stage's
    # 10 mV is amplified 10 times by the second, to which its own 10 mV adds: 110 mV.
    out = compute(make(gain=10.0, stages=2.0, input_offset_v=1e-3, output_offset_max_v=0.1))
    check = {c.name: c for c in out.checks}["output_offset"]
    assert check.value[0] == pytest.approx(0.11, rel=1e-12) and not check.ok[0]
    follower = compute(make(gain=1.0, stages=3.0, input_offset_v=1e-3, output_offset_max_v=1.0))
    assert {c.name: c for c in follower.checks}["output_offset"].value[0] == pytest.approx(3e-3, rel=1e-12)
    unknown = compute(make(gain=10.0, output_offset_max_v=0.1))
    assert any("input_offset_v" in n.message for n in unknown.warnings)
