"""A supply's band in service (a battery: end of discharge to fresh) in the worst case and the Monte Carlo, and the
usable runtime of a battery-fed channel against an independent root-find on the same discharge model."""

from __future__ import annotations

import math

import pytest
from scipy.optimize import brentq
from test_channel import NO_FRONT_STAGE, make

from calcsvc.core.channel import review, validate
from calcsvc.core.monte_carlo import monte_carlo
from calcsvc.core.usable_runtime import usable_runtime
from calcsvc.core.worst_case import worst_case

# Six alkaline cells: 9 V nominal, about 1.6 V per cell fresh and 1.0 V per cell at end of discharge (from memory).
# The base is sized by the part's own rule (its Vce(sat) test ratio over 1 + resistor tolerance): a ratio forced to
# the test ratio itself exceeds it at the fresh pack's corner, and the design would fail before any discharge.
PACK = {
    "supply_v": 9.0,
    "supply_tolerance": 0.0,
    "supply_min_v": 6.0,
    "supply_max_v": 9.6,
    "capacity_ah": 2.0,
    "forced_beta": math.nan,
}
# Three red LEDs (1.8–2.4 V) and the switch's 0.2 V keep 10 % of the supply across the resistor (common practice)
# only while 0.9·V ≥ 3 × 2.4 V + 0.2 V (Kirchhoff's voltage law).
STOP_V = (3 * 2.4 + 0.2) / 0.9


def test_a_battery_band_gives_the_worst_case_corners() -> None:
    # Before, the pack was 9 V ± 15 %: corners 7.65 V (far above end of discharge) and 10.35 V (above fresh).
    x = make(**PACK, **NO_FRONT_STAGE)
    worst = worst_case(x)
    headroom = worst.check("headroom")
    assert headroom.corner(0) == {"supply": "low", "vf": "max", "led_resistor": "low", "ambient": "cold"}
    assert headroom.check.limit[0] == pytest.approx(0.1 * 6.0)  # 10 % of the end-of-discharge voltage
    assert headroom.check.value[0] == pytest.approx(6.0 - 3 * 2.4 - 0.2)  # below the string's drop: dark
    # The string resistor is chosen at 9 V: (9 − 3 × 2.0 − 0.2) V / 20 mA = 140 Ω → 150 Ω (E24); the highest
    # current flows from a fresh pack through the lowest LEDs and a resistor 5 % low (Ohm's law).
    assert worst.nominal.led_string.results["resistor_ohm"][0] == 150.0
    current = worst.check("led_current_rating")
    assert current.corner(0) == {"supply": "high", "vf": "min", "led_resistor": "low", "ambient": "cold"}
    assert current.check.value[0] == pytest.approx((9.6 - 3 * 1.8 - 0.2) / (150 * 0.95))
    # The base resistor is sized for that highest current, so the switch saturates on a fresh pack too.
    assert worst.nominal.collector_current_max_a[0] == pytest.approx(2 * (9.6 - 3 * 1.8 - 0.2) / (150 * 0.95))
    assert worst.check("saturation").check.ok[0]


def test_a_tolerance_without_a_band_is_the_band_around_nominal() -> None:
    x = make(supply_tolerance=0.15, capacity_ah=2.0, supply_v=9.0, **NO_FRONT_STAGE)
    assert worst_case(x).check("headroom").check.limit[0] == pytest.approx(0.1 * 9.0 * 0.85)


def test_the_band_is_given_whole_and_holds_the_nominal_voltage() -> None:
    assert [v.field for v in validate(make(supply_v=9.0, supply_min_v=6.0))] == ["supply_max_v"]
    assert [v.field for v in validate(make(supply_v=9.0, supply_min_v=9.1, supply_max_v=9.6))] == ["supply_min_v"]
    assert [v.field for v in validate(make(supply_v=9.0, supply_min_v=6.0, supply_max_v=8.0))] == ["supply_max_v"]


def test_monte_carlo_draws_the_supply_over_the_band() -> None:
    # Only the supply varies, uniform over [6.0, 9.6] V; every LED at 2.4 V, so the headroom holds exactly when
    # V ≥ 7.4 V / 0.9 and the passing fraction is (9.6 − 7.4/0.9)/(9.6 − 6.0) (uniform distribution).
    x = make(**PACK, **NO_FRONT_STAGE, vf_min_v=2.4, vf_typ_v=2.4, vf_max_v=2.4, resistor_tolerance=0.0, hfe_typ=100.0)
    found = monte_carlo(x, samples=20_000, seed=4)
    expected = (9.6 - STOP_V) / (9.6 - 6.0)
    assert found.ci_low <= expected <= found.ci_high
    assert [name for name, count in found.failures.items() if count] == ["headroom"]


def test_usable_runtime_against_a_root_find_on_the_same_discharge_model() -> None:
    x = make(**PACK, **NO_FRONT_STAGE)
    nominal = review(x)
    # Nominal drain (Ohm's law): 6 channels × 2 strings × (9 − 6 − 0.2) V / 150 Ω × duty 0.5.
    drain_a = 6 * 2 * (9.0 - 3 * 2.0 - 0.2) / 150.0 * 0.5
    assert nominal.supply.results["runtime_h"][0] == pytest.approx(2.0 / drain_a)  # capacity only

    def voltage(charge_ah: float) -> float:  # linear from fresh to end of discharge over the capacity
        return 9.6 - (9.6 - 6.0) * charge_ah / 2.0

    def headroom_margin(charge_ah: float) -> float:  # KVL across the resistor, less 10 % of the supply
        v = voltage(charge_ah)
        return (v - 3 * 2.4 - 0.2) - 0.1 * v

    charge = brentq(headroom_margin, 0.0, 2.0, xtol=1e-12)
    found = usable_runtime(x, nominal)
    assert found.stop_v[0] == pytest.approx(STOP_V, rel=1e-9)
    assert found.usable_runtime_h[0] == pytest.approx(charge / drain_a, rel=1e-9)
    assert found.usable_runtime_h[0] < 0.4 * nominal.supply.results["runtime_h"][0]  # dark well before empty


def test_usable_runtime_ends_of_the_range() -> None:
    # Two LEDs meet every check down to end of discharge: the whole capacity is usable.
    x = make(**PACK, **NO_FRONT_STAGE, leds_in_series=2.0)
    nominal = review(x)
    found = usable_runtime(x, nominal)
    assert found.stop_v[0] == 6.0
    assert found.usable_runtime_h[0] == pytest.approx(nominal.supply.results["runtime_h"][0])
    # LEDs over their rating on a fresh pack: no usable runtime at all.
    x = make(**PACK, **NO_FRONT_STAGE, if_max_a=0.021)
    assert usable_runtime(x, review(x)).usable_runtime_h[0] == 0.0
    # No capacity, no battery: does not apply.
    x = make(**NO_FRONT_STAGE)
    assert math.isnan(usable_runtime(x, review(x)).usable_runtime_h[0])
