"""A MOSFET's on-resistance at its gate voltage (hand-worked interpolation) and its self-heated junction (brentq
on thermal Ohm's law)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from calcsvc.core import on_resistance

NAN = math.nan


def _at(gate_v: float, points: list[tuple[float, float]]) -> float:
    volts = np.array([[p[0] for p in points]])
    ohms = np.array([[p[1] for p in points]])
    return float(on_resistance.at_gate_voltage(np.array([gate_v]), volts, ohms)[0])


THREE = [(2.5, 0.1), (4.5, 0.06), (10.0, 0.045)]


def test_interpolation_against_hand_worked_points() -> None:
    # 2.8 V lies 0.3/2.0 of the way from 2.5 V to 4.5 V: 0.1 − 0.15·0.04 = 0.094 Ω.
    assert _at(2.8, THREE) == pytest.approx(0.094)
    # 7.25 V is halfway from 4.5 V to 10 V: (0.06 + 0.045)/2 = 0.0525 Ω.
    assert _at(7.25, THREE) == pytest.approx(0.0525)
    assert _at(2.5, THREE) == pytest.approx(0.1)
    assert _at(12.0, THREE) == pytest.approx(0.045)  # above the highest point: as stated there


def test_a_missing_middle_point_joins_its_neighbours() -> None:
    # Points at 2.5 V and 10 V only: 6.25 V is halfway, (0.1 + 0.045)/2.
    assert _at(6.25, [(2.5, 0.1), (NAN, NAN), (10.0, 0.045)]) == pytest.approx(0.0725)
    assert _at(6.25, [(2.5, 0.1), (10.0, 0.045), (NAN, NAN)]) == pytest.approx(0.0725)


def test_below_the_lowest_stated_gate_voltage_is_unknown() -> None:
    # Stated only at 10 V: a 3.3 V pin gives a gate voltage at which nothing is specified.
    assert math.isnan(_at(3.3, [(10.0, 0.16), (NAN, NAN), (NAN, NAN)]))


def test_junction_solves_thermal_ohms_law_with_the_rising_resistance() -> None:
    ambient, rth, current, duty, r25, other = 45.0, 150.0, 0.7, 0.5, 0.094, 0.0056
    found = float(on_resistance.junction(ambient, rth, current, duty, r25, other))

    def balance(tj: float) -> float:  # Tj − Ta − Rθ·(I²·D·R25·(1 + 0.007·(Tj − 25)) + P_x), from memory α
        return tj - ambient - rth * (current**2 * duty * r25 * (1 + 0.007 * (tj - 25.0)) + other)

    assert found == pytest.approx(brentq(balance, ambient, 1000.0, xtol=1e-12), abs=1e-9)


def test_runaway_has_no_junction_temperature() -> None:
    # Rθ·I²·D·R25·α ≥ 1: each kelvin adds more than a kelvin of heating.
    assert math.isnan(float(on_resistance.junction(25.0, 500.0, 5.0, 1.0, 0.1, 0.0)))
