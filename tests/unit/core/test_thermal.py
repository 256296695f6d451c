"""Tests for the thermal core: thermal Ohm's law, derating curves, the coupled LED operating point."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from calcsvc.core import thermal


def test_thermal_ohms_law_against_a_hand_worked_darlington() -> None:
    # Thermal Ohm's law, Tj = Ta + P·Rθja (Sedra & Smith, Microelectronic Circuits, the power-transistor
    # section on thermal resistance; from memory). A 1 A-class Darlington rated 1.0 W at 25 °C without a heat
    # sink, Tj,max 150 °C: Rθja = (150 − 25)/1.0 = 125 K/W. At 55 °C and 0.7 W: Tj = 55 + 0.7 × 125 = 142.5 °C,
    # and the derated limit is (150 − 55)/125 = 0.76 W.
    rth = thermal.rth_from_rating(150.0, 1.0)
    assert rth == pytest.approx(125.0)
    assert thermal.junction_temperature(55.0, 0.7, rth) == pytest.approx(142.5)
    assert thermal.derated_power(150.0, 55.0, rth, 1.0) == pytest.approx(0.76)
    # Below 25 °C the free-air rating caps the limit; at Tj,max and beyond nothing may be dissipated.
    assert thermal.derated_power(150.0, 0.0, rth, 1.0) == 1.0
    assert thermal.derated_power(150.0, 150.0, rth, 1.0) == 0.0
    assert thermal.derated_power(150.0, 170.0, rth, 1.0) == 0.0


def test_resistor_derating_curve_end_points() -> None:
    # IEC 60115-1's usual fixed-resistor curve (from memory): full rating to 70 °C, zero at 155 °C, linear
    # between, so half the rating at the midpoint 112.5 °C.
    fraction = thermal.resistor_derating(np.array([-40.0, 25.0, 70.0, 112.5, 155.0, 200.0]))
    np.testing.assert_allclose(fraction, [1.0, 1.0, 1.0, 0.5, 0.0, 0.0], atol=1e-15)
    # The same line gives the hot spot: rated power at 70 °C puts the element at the zero-power point.
    assert thermal.resistor_hot_spot(70.0, 0.25, 0.25) == pytest.approx(155.0)
    assert thermal.resistor_hot_spot(40.0, 0.125, 0.25) == pytest.approx(40.0 + 0.5 * 85.0)


def test_led_current_derating_is_linear_from_the_knee_to_tj_max() -> None:
    # The shape of a datasheet's maximum-current curve (common practice): flat to the knee, zero at Tj,max.
    share = thermal.current_derating(np.array([25.0, 60.0, 80.0, 100.0, 120.0]), 60.0, 100.0)
    np.testing.assert_allclose(share, [1.0, 1.0, 0.5, 0.0, 0.0])
    assert thermal.current_derating(90.0, np.nan, 100.0) == 1.0  # no knee given: no curve
    # Without any knee, a share of 1 in the shape the inputs broadcast to, as where some row gives one.
    ambient = np.array([[25.0], [60.0], [90.0]])
    knees = np.array([np.nan, np.nan])
    without = thermal.current_derating(ambient, knees, 100.0)
    with_one = thermal.current_derating(ambient, np.array([np.nan, 60.0]), 100.0)
    assert without.shape == with_one.shape == (3, 2) and without.dtype == with_one.dtype == np.float64
    np.testing.assert_array_equal(with_one[:, 0], without[:, 0])  # the row without a knee alike


def brentq_point(head: float, vf25: float, r: float, n: float, k: float, rth: float, ta: float, tmax: float) -> float:
    """The junction by brentq on the heat balance written out separately: Vf(T) = Vf25 + k·(T − 25) per LED
    (about −2 mV/K, from memory), I = max(H − N·Vf, 0)/R (Ohm's law, KVL), Tj = Ta + Rθ·Vf·I."""

    def balance(t: float) -> float:
        vf = vf25 / n + k * (t - 25.0)
        return t - ta - rth * vf * max(head - n * vf, 0.0) / r

    return float(brentq(balance, ta, tmax, xtol=1e-12, rtol=1e-14))


def test_coupled_led_point_matches_an_independent_brentq_solve_over_ambients() -> None:
    # Three red LEDs (2.1 V each at 25 °C, −2 mV/K), 270 Ω on 12 V less a 0.2 V switch, 350 K/W per LED.
    ambients = np.linspace(-20.0, 80.0, 26)
    point = thermal.led_operating_point(11.8, 6.3, 270.0, 3.0, -0.002, 350.0, ambients, 125.0)
    expected = [brentq_point(11.8, 6.3, 270.0, 3.0, -0.002, 350.0, ta, 125.0) for ta in ambients]
    np.testing.assert_allclose(point.junction_c, expected, rtol=0, atol=1e-8)
    assert not point.runaway.any()
    assert np.all(point.iterations == 1)  # one closed-form solve per point
    # The current is Ohm's law at that junction's forward voltage.
    vf = 6.3 + 3 * -0.002 * (point.junction_c - 25.0)
    np.testing.assert_allclose(point.current_a, (11.8 - vf) / 270.0, rtol=1e-12)
    # A hot string draws more than the cold design says.
    assert np.all(np.diff(point.current_a) > 0)


def test_a_strongly_coupled_high_power_string_is_solved_for_every_row_at_once() -> None:
    # Four 1 W-class LEDs (3.0 V, −4 mV/K, 50 K/W each) on 14 V through 4.7 Ω: 1.8 V of headroom, so each
    # kelvin adds 16 mV across the resistor (3.4 mA): strong positive feedback, still below Tj,max.
    ambients = np.array([0.0, 20.0, 35.0])
    point = thermal.led_operating_point(14.0, 12.0, 4.7, 4.0, -0.004, 50.0, ambients, 150.0)
    assert not point.runaway.any()
    for ta, tj in zip(ambients, point.junction_c, strict=True):
        assert tj == pytest.approx(brentq_point(14.0, 12.0, 4.7, 4.0, -0.004, 50.0, ta, 150.0), abs=1e-8)


def test_thermal_runaway_is_reported_not_solved() -> None:
    # The same string with 1 Ω of resistor: the balance is still negative at Tj,max, so no stable point below it.
    point = thermal.led_operating_point(14.0, 12.0, 1.0, 4.0, -0.004, 50.0, np.array([25.0, 45.0]), 150.0)
    assert point.runaway.all()
    assert np.isnan(point.junction_c).all()
    assert (point.heating_at_max_c > 150.0).all()
    vf = 3.0 - 0.004 * 125.0
    assert point.heating_at_max_c[1] == pytest.approx(45.0 + 50.0 * vf * (14.0 - 4 * vf) / 1.0)


def test_a_dark_string_sits_at_ambient() -> None:
    point = thermal.led_operating_point(5.0, 6.3, 100.0, 3.0, -0.002, 350.0, np.array([20.0]), 125.0)
    assert point.junction_c[0] == pytest.approx(20.0, abs=1e-9)
    assert point.current_a[0] == 0.0


@settings(max_examples=300, derandomize=True, deadline=None)
@given(
    ta=st.floats(-40.0, 85.0),
    head=st.floats(2.0, 40.0),
    share=st.floats(0.3, 1.3),
    r=st.floats(0.5, 3000.0),
    n=st.integers(1, 8),
    k=st.floats(-0.005, 0.0),
    rth=st.floats(0.0, 600.0),
)
def test_the_closed_form_point_is_the_hottest_balance_below_tj_max_as_brentq_finds_it(
    ta: float, head: float, share: float, r: float, n: int, k: float, rth: float
) -> None:
    # Strings from dark (forward voltage above the headroom at 25 °C) to strongly coupled: where it does not run
    # away, the point balances heat and no hotter temperature up to Tj,max does (the solve's contract), and
    # brentq on the balance written out separately from there to Tj,max finds the same junction.
    tmax = 150.0
    vf25 = share * head
    point = thermal.led_operating_point(head, vf25, r, float(n), k, rth, np.array([ta]), tmax)
    if point.runaway[0]:
        assert point.heating_at_max_c[0] > tmax
        return
    tj = float(point.junction_c[0])
    assert ta - 1e-9 <= tj <= tmax + 1e-9
    vf = vf25 / n + k * (tj - 25.0)
    assert tj == pytest.approx(ta + rth * vf * max(head - n * vf, 0.0) / r, abs=1e-8)
    above = np.linspace(tj, tmax, 200)[1:] + 1e-6
    vf_above = vf25 / n + k * (above - 25.0)
    assert np.all(above - ta - rth * vf_above * np.maximum(head - n * vf_above, 0.0) / r > 0.0)
    if vf25 + n * k * (ta - 25.0) < head:  # conducting at ambient: the balance crosses zero once in [Ta, Tj,max]
        assert tj == pytest.approx(brentq_point(head, vf25, r, float(n), k, rth, ta, tmax), abs=1e-8)


@settings(max_examples=200, derandomize=True, deadline=None)
@given(
    ta=st.floats(-40.0, 120.0),
    rise=st.floats(0.0, 60.0),
    head=st.floats(3.0, 30.0),
    r=st.floats(1.0, 2000.0),
    rth=st.floats(1.0, 500.0),
    k=st.floats(-0.004, 0.0),
    power=st.floats(0.0, 5.0),
    tj_max=st.floats(100.0, 175.0),
)
def test_raising_the_ambient_never_cools_a_junction_nor_raises_a_derated_limit(
    ta: float, rise: float, head: float, r: float, rth: float, k: float, power: float, tj_max: float
) -> None:
    hotter = ta + rise
    assert thermal.junction_temperature(hotter, power, rth) >= thermal.junction_temperature(ta, power, rth)
    assert thermal.derated_power(tj_max, hotter, rth, 1.0) <= thermal.derated_power(tj_max, ta, rth, 1.0)
    assert thermal.resistor_derating(hotter) <= thermal.resistor_derating(ta)
    assert thermal.current_derating(hotter, 50.0, tj_max) <= thermal.current_derating(ta, 50.0, tj_max)
    assert thermal.resistor_hot_spot(hotter, power, 0.5) >= thermal.resistor_hot_spot(ta, power, 0.5)
    vf25 = 0.6 * head  # two LEDs using 60 % of the headroom at 25 °C
    both = thermal.led_operating_point(head, vf25, r, 2.0, k, rth, np.array([ta, hotter]), tj_max)
    junction = np.where(both.runaway, np.inf, both.junction_c)
    assert junction[1] >= junction[0] - 1e-9
    assert both.heating_at_max_c[1] >= both.heating_at_max_c[0] - 1e-9
