"""PWM timing: shortest pulse, duty step, switching times and switching loss against outside sources."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import trapezoid

from calcsvc.core import pwm_timing


def test_shortest_pulse_and_duty_step_by_counting() -> None:
    # A counter at 2 kHz with 8 bits ticks 256 times per 500 µs period: one tick is 500/256 µs.
    assert pwm_timing.shortest_on_time(2000.0, 8) == pytest.approx(500e-6 / 256)
    assert pwm_timing.duty_step(8) == pytest.approx(1 / 256)
    assert np.isnan(pwm_timing.shortest_on_time(np.nan, 8))


def _triangle_energy(voltage: float, current: float, transition_s: float) -> float:
    """Energy of one linear transition, integrated by the trapezoid rule over a finely sampled edge."""
    t = np.linspace(0.0, transition_s, 20001)
    v = voltage * (1.0 - t / transition_s)  # the switch's voltage falls ...
    i = current * t / transition_s  # ... while its current rises (resistive load)
    return float(trapezoid(v * i, t))


def test_switching_loss_matches_the_numerical_triangle_integral() -> None:
    # Closed form V·I·(tr + tf)·f/6 (Mohan, Undeland & Robbins, Power Electronics, switching characteristics)
    # against the trapezoid rule on sampled linear edges, written here independently.
    voltage, current, rise, fall, f = 12.0, 0.7, 0.7e-6, 1.2e-6, 2000.0
    numeric = (_triangle_energy(voltage, current, rise) + _triangle_energy(voltage, current, fall)) * f
    closed = float(pwm_timing.switching_loss(voltage, current, rise, fall, f))
    assert closed == pytest.approx(numeric, rel=1e-6)
    assert float(pwm_timing.switching_loss(voltage, current, rise, fall, np.nan)) == 0.0


def test_gate_times_from_charge_and_current() -> None:
    # Q = I·t: 2.5 nC through 360 Ω from 2.8 V against a 1.5 V threshold is (2.8 − 1.5)/360 A for
    # 2.5e-9/that seconds; off, the lowest threshold (half the maximum, from memory) drives 0.75 V through
    # 360 Ω and the pin's own 50 Ω (0.5 V at its rated 10 mA).
    on, off = pwm_timing.gate_times(2.5e-9, 360.0, 2.8, 50.0, 1.5)
    assert float(on) == pytest.approx(2.5e-9 / ((2.8 - 1.5) / 360.0))
    assert float(off) == pytest.approx(2.5e-9 / (0.75 / 410.0))


def test_bipolar_times_add_delay_to_rise_and_storage_to_fall() -> None:
    on, off = pwm_timing.bipolar_times(40e-9, 60e-9, 300e-9, 80e-9)
    assert float(on) == pytest.approx(100e-9)
    assert float(off) == pytest.approx(380e-9)
    # Common practice: the shortest pulse at least ten times the edges.
    assert float(pwm_timing.edges_limit(on, off)) == pytest.approx(4.8e-6)


@settings(derandomize=True, max_examples=60, deadline=None)
@given(
    st.floats(1.0, 100.0),
    st.floats(1e-3, 10.0),
    st.floats(1e-9, 1e-5),
    st.floats(1e-9, 1e-5),
    st.floats(10.0, 1e5),
)
def test_switching_loss_grows_with_frequency_and_edges(v: float, i: float, tr: float, tf: float, f: float) -> None:
    base = float(pwm_timing.switching_loss(v, i, tr, tf, f))
    assert base > 0
    assert float(pwm_timing.switching_loss(v, i, tr, tf, 2 * f)) == pytest.approx(2 * base)
    assert float(pwm_timing.switching_loss(v, i, 2 * tr, 2 * tf, f)) == pytest.approx(2 * base)
