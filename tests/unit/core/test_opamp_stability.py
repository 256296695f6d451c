"""Tests for the op-amp stage's stability with a second pole and a capacitive load.

Outside sources: scipy.signal (the loop written here independently as transfer-function polynomials: its
crossover, phase, closed-loop peaking and step response simulated), and the two-pole result the trade uses (a
follower with its second pole at the GBW has about 52° of phase margin; textbook two-pole analysis, e.g. Franco,
3rd ed., §8.2, from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import optimize, signal

from calcsvc.core import eseries
from calcsvc.core.opamp_stability import StabilityInputs, compute

NAN = math.nan


def make(
    gain: float = 1.0,
    gbw_hz: float = 1e6,
    second_pole_hz: float = NAN,
    output_resistance_ohm: float = NAN,
    load_capacitance_f: float = NAN,
    isolation_ohm: float = NAN,
    inverting: bool = False,
    phase_margin_min_deg: float = 45.0,
) -> StabilityInputs:
    def a(x: float) -> np.ndarray:
        return np.array([x], dtype=np.float64)

    return StabilityInputs(
        inverting=np.array([inverting]),
        gain=a(gain),
        gbw_hz=a(gbw_hz),
        second_pole_hz=a(second_pole_hz),
        output_resistance_ohm=a(output_resistance_ohm),
        load_capacitance_f=a(load_capacitance_f),
        isolation_ohm=a(isolation_ohm),
        phase_margin_min_deg=a(phase_margin_min_deg),
    )


def loop_polynomials(x: StabilityInputs) -> tuple[np.ndarray, np.ndarray]:
    """The loop gain T(s) as numerator and denominator polynomials in s, built independently of the module:
    ωt/(NG·s) × 1/(1 + s/ω2) × (1 + s·Riso·CL)/(1 + s·(Ro + Riso)·CL)."""
    ng = float(x.gain[0]) + (1.0 if x.inverting[0] else 0.0)
    num = np.array([2 * math.pi * float(x.gbw_hz[0]) / ng])
    den = np.array([1.0, 0.0])
    if not math.isnan(x.second_pole_hz[0]):
        den = np.polymul(den, [1.0 / (2 * math.pi * float(x.second_pole_hz[0])), 1.0])
    if not math.isnan(x.load_capacitance_f[0]):
        riso = 0.0 if math.isnan(x.isolation_ohm[0]) else float(x.isolation_ohm[0])
        cl, ro = float(x.load_capacitance_f[0]), float(x.output_resistance_ohm[0])
        num = np.polymul(num, [riso * cl, 1.0])
        den = np.polymul(den, [(ro + riso) * cl, 1.0])
    return num, den


def scipy_phase_margin(x: StabilityInputs) -> float:
    num, den = loop_polynomials(x)
    loop = signal.TransferFunction(num, den)

    def gain_minus_one(log_w: float) -> float:
        _, h = signal.freqresp(loop, [math.exp(log_w)])
        return abs(h[0]) - 1.0

    wc = math.exp(optimize.brentq(gain_minus_one, math.log(1.0), math.log(1e12), xtol=1e-14))
    _, h = signal.freqresp(loop, [wc])
    return 180.0 + math.degrees(np.angle(h[0]))


def scipy_closed_loop(x: StabilityInputs) -> signal.TransferFunction:
    """T/(1 + T), normalized to 1 at DC (the shape of the closed-loop response)."""
    num, den = loop_polynomials(x)
    return signal.TransferFunction(num, np.polyadd(den, num))


def scipy_overshoot_pct(x: StabilityInputs) -> float:
    closed = scipy_closed_loop(x)
    t = np.linspace(0.0, 40.0 / (2 * math.pi * float(x.gbw_hz[0])) * 10, 200_001)
    _, y = signal.step(closed, T=t)
    return 100.0 * (y.max() - y[-1]) / y[-1]


def scipy_peaking_db(x: StabilityInputs) -> float:
    _, h = signal.freqresp(scipy_closed_loop(x), np.logspace(2, 9, 200_001))
    return 20.0 * math.log10(np.abs(h).max())


def test_follower_with_its_second_pole_at_the_gbw_has_about_52_degrees() -> None:
    # Two-pole analysis: |T| = 1 at (f/GBW)² = (√5 − 1)/2, PM = 90° − atan(0.786) = 51.8° (textbook, the trade's
    # "about 52°"); the damping of that loop is ζ = ½√(ωp/ωu) = 0.5, a 16.3 % step overshoot.
    out = compute(make(second_pole_hz=1e6)).results
    assert out["crossover_hz"][0] == pytest.approx(1e6 * math.sqrt((math.sqrt(5) - 1) / 2), rel=1e-9)
    assert out["phase_margin_deg"][0] == pytest.approx(51.83, abs=0.01)
    assert out["damping_ratio"][0] == pytest.approx(0.5, rel=1e-9)
    assert out["step_overshoot_pct"][0] == pytest.approx(100 * math.exp(-math.pi / math.sqrt(3)), rel=1e-9)


TWO_POLE_CASES = [
    make(second_pole_hz=1e6),  # follower, second pole at the GBW
    make(gain=2.0, second_pole_hz=3e5),  # a low second pole at a gain of 2
    make(gain=4.0, inverting=True, gbw_hz=3e6, second_pole_hz=1e6),  # inverting: noise gain 5
    make(output_resistance_ohm=100.0, load_capacitance_f=10e-9, gbw_hz=1.2e6),  # Ro·CL alone: 159 kHz
    make(gain=10.0, second_pole_hz=2e6),  # well damped: no peaking, no overshoot beyond a trace
]


@pytest.mark.parametrize("x", TWO_POLE_CASES)
def test_two_pole_loop_against_a_scipy_simulation(x: StabilityInputs) -> None:
    out = compute(x).results
    assert out["phase_margin_deg"][0] == pytest.approx(scipy_phase_margin(x), abs=1e-6)
    assert out["step_overshoot_pct"][0] == pytest.approx(scipy_overshoot_pct(x), abs=0.02)
    assert out["closed_loop_peaking_db"][0] == pytest.approx(max(scipy_peaking_db(x), 0.0), abs=1e-3)


@pytest.mark.parametrize(
    "x",
    [
        make(second_pole_hz=3e6, output_resistance_ohm=75.0, load_capacitance_f=4.7e-9, gbw_hz=1.2e6),
        make(
            second_pole_hz=3e6, output_resistance_ohm=75.0, load_capacitance_f=4.7e-9, gbw_hz=1.2e6, isolation_ohm=47.0
        ),
        make(gain=3.0, second_pole_hz=2e6, output_resistance_ohm=200.0, load_capacitance_f=1e-9, isolation_ohm=10.0),
    ],
)
def test_phase_margin_with_both_poles_and_an_isolation_zero_against_scipy(x: StabilityInputs) -> None:
    assert compute(x).results["phase_margin_deg"][0] == pytest.approx(scipy_phase_margin(x), abs=1e-6)


def test_a_follower_on_a_large_capacitive_load_fails_and_the_suggested_isolation_resistor_fixes_it() -> None:
    # 1.2 MHz follower, 75 Ω open-loop output resistance, second pole 2 MHz, driving 100 nF of cable: PM far below 45°.
    load = {"gbw_hz": 1.2e6, "second_pole_hz": 2e6, "output_resistance_ohm": 75.0, "load_capacitance_f": 100e-9}
    before = compute(make(**load))
    check = before.checks[0]
    assert check.name == "phase_margin" and not check.ok[0]
    assert check.value[0] == pytest.approx(scipy_phase_margin(make(**load)), abs=1e-6)
    assert check.value[0] < 20.0
    riso = float(before.results["isolation_suggested_ohm"][0])
    assert eseries.is_standard(np.array([riso]), "E24")[0]
    assert any("isolation_suggested_ohm" in w.message for w in before.warnings)
    # Re-run with it applied: the check passes, with the margin the suggestion promised, confirmed by scipy.
    after = compute(make(**load, isolation_ohm=riso))
    assert after.checks[0].ok[0]
    assert after.results["phase_margin_deg"][0] == pytest.approx(before.results["isolation_phase_margin_deg"][0])
    assert scipy_phase_margin(make(**load, isolation_ohm=riso)) >= 45.0
    # It is the least such E24 value: the one below falls short.
    below = float(eseries.pick_at_or_below(np.array([riso * 0.999]), "E24")[0])
    assert compute(make(**load, isolation_ohm=below)).results["phase_margin_deg"][0] < 45.0
    assert after.results["isolated_load_pole_hz"][0] == pytest.approx(1 / (2 * math.pi * riso * 100e-9))


def test_no_second_pole_and_no_load_leaves_the_check_out() -> None:
    out = compute(make())
    assert out.results["phase_margin_deg"][0] == pytest.approx(90.0)
    assert math.isnan(out.checks[0].limit[0]) and out.checks[0].ok[0]
    out = compute(make(load_capacitance_f=1e-9))  # no output resistance: the load's pole is unknown
    assert math.isnan(out.checks[0].limit[0])
    assert any("without output_resistance_ohm" in w.message for w in out.warnings)


def test_an_op_amp_short_of_margin_without_load_gets_no_isolation_resistor() -> None:
    # Second pole far below the GBW at unity gain: 22.9° whatever the isolation resistor.
    out = compute(make(second_pole_hz=1.7e5, output_resistance_ohm=50.0, load_capacitance_f=1e-9))
    assert not out.checks[0].ok[0]
    assert math.isnan(out.results["isolation_suggested_ohm"][0])
    assert any("no isolation resistor" in w.message for w in out.warnings)


@settings(max_examples=60, deadline=None, derandomize=True)
@given(
    gain=st.floats(1.0, 100.0),
    gbw=st.floats(1e4, 1e8),
    p2_ratio=st.floats(0.3, 30.0),
    ro=st.floats(1.0, 2000.0),
    cl=st.floats(1e-12, 1e-5),
    limit=st.floats(30.0, 70.0),
)
def test_property_the_suggested_isolation_resistor_always_meets_the_limit(
    gain: float, gbw: float, p2_ratio: float, ro: float, cl: float, limit: float
) -> None:
    load = {"gain": gain, "gbw_hz": gbw, "second_pole_hz": gbw * p2_ratio, "output_resistance_ohm": ro}
    load |= {"load_capacitance_f": cl, "phase_margin_min_deg": limit}
    out = compute(make(**load))
    assert np.isfinite(out.results["phase_margin_deg"][0]) and out.results["phase_margin_deg"][0] < 90.0
    riso = out.results["isolation_suggested_ohm"][0]
    if out.checks[0].ok[0]:
        assert math.isnan(riso)  # nothing to suggest
    elif not math.isnan(riso):
        again = compute(make(**load, isolation_ohm=float(riso)))
        assert again.checks[0].ok[0]
        assert again.results["phase_margin_deg"][0] == out.results["isolation_phase_margin_deg"][0]
