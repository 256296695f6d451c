"""Heat in the channel review: the thermal stage, the hot worst case, runaway, the largest passing ambient."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from test_channel import NO_FRONT_STAGE, channel_rows, make, rows_to_inputs
from test_thermal import brentq_point

from calcsvc.core.channel import review, validate
from calcsvc.core.monte_carlo import monte_carlo
from calcsvc.core.thermal_limit import SEARCH_MAX_C, max_ambient
from calcsvc.core.worst_case import worst_case

# Invented, class-typical round figures: a 1 A-class Darlington and 1 W-class deep-red LEDs on star boards.
DARLINGTON = {
    "hfe_min": 1500.0, "hfe_typ": 5000.0, "vbe_sat_v": 1.7, "vce_sat_v": 1.1, "ic_max_a": 0.8, "vceo_max_v": 50.0,
    "power_max_w": 0.9, "vce_sat_forced_beta": 250.0, "base_junctions": 2.0, "forced_beta": math.nan,
    "tj_max_c": 150.0, "rth_ja_k_per_w": 140.0,
}  # fmt: skip
GROW_LED = {
    "vf_typ_v": 2.3, "vf_min_v": 2.0, "vf_max_v": 2.8, "if_max_a": 0.5, "led_tj_max_c": 125.0,
    "led_rth_jb_k_per_w": 10.0, "led_rth_ba_k_per_w": 40.0, "vf_tempco_v_per_k": -0.002, "if_derating_knee_c": 50.0,
}  # fmt: skip
GROW = NO_FRONT_STAGE | DARLINGTON | GROW_LED | {"current_a": 0.2, "duty_cycle": 1.0, "channels": 1.0}
RED_5MM = {"vf_tempco_v_per_k": -0.002}  # test_channel's demo LED, drifting −2 mV/K


def test_the_nominal_thermal_stage_solves_the_coupled_point_and_applies_thermal_ohms_law() -> None:
    out = review(make(**RED_5MM, ambient_c=45.0))
    heat = out.thermal.results
    r = out.led_string.results["resistor_ohm"][0]
    # The string's junction by an independent brentq solve (test_thermal), 350 K/W per LED.
    expected = brentq_point(12.0 - 0.2, 3 * 2.0, r, 3.0, -0.002, 350.0, 45.0, 100.0)
    assert heat["led_junction_c"][0] == pytest.approx(expected, abs=1e-8)
    assert 1 <= heat["thermal_iterations"][0] <= 12
    current = heat["led_current_hot_a"][0]
    assert current > out.led_string.results["current_a"][0]  # a warm string draws more than the cold design
    # Transistor: Tj = Ta + P·Rθ, P = (Vce_sat·Ic + Vbe_sat·Ib)·D with Ic at the warm current.
    power = (0.2 * 2 * current + 0.85 * out.switch.results["base_current_a"][0]) * 0.5
    assert heat["transistor_junction_c"][0] == pytest.approx(45.0 + 250.0 * power, rel=1e-12)
    assert heat["transistor_derated_limit_w"][0] == pytest.approx((150.0 - 45.0) / 250.0, rel=1e-12)
    # The string resistor below 70 °C keeps its whole rating (IEC 60115-1, from memory).
    assert heat["resistor_derated_limit_w"][0] == out.led_string.results["resistor_rating_w"][0]
    assert out.ok[0]


def test_a_design_passing_at_25_c_fails_at_55_c_on_the_transistor_and_names_the_largest_ambient() -> None:
    cool, hot = make(**GROW, ambient_c=25.0), make(**GROW, ambient_c=55.0)
    assert worst_case(cool).ok[0]
    failing = worst_case(hot).failing()[0]
    assert failing == ["transistor_junction_temperature", "transistor_derated_power"]
    top = max_ambient(cool, review(cool))[0]
    assert 25.0 < top < 55.0
    # The edge is where the worst corner's junction reaches Tj,max less the 20 K margin (common practice).
    at_edge = make(**GROW, ambient_c=25.0, ambient_max_c=top)
    tj = worst_case(at_edge).check("transistor_junction_temperature").check.value[0]
    assert tj == pytest.approx(150.0 - 20.0, abs=1e-4)
    assert worst_case(make(**GROW, ambient_c=25.0, ambient_max_c=top + 0.01)).failing() != [[]]


def test_a_cool_designs_largest_ambient_is_bounded_by_its_parts_and_a_failing_one_reports_none() -> None:
    # At 2 mA the LEDs barely warm (under 2 K): their junction's 20 K margin below 100 °C bounds the ambient.
    cool = make(**NO_FRONT_STAGE, current_a=0.002)
    top = max_ambient(cool, review(cool))[0]
    assert 78.0 < top < 80.0 < SEARCH_MAX_C
    junction = worst_case(make(**NO_FRONT_STAGE, current_a=0.002, ambient_max_c=top)).check("led_junction_temperature")
    assert junction.check.value[0] == pytest.approx(100.0 - 20.0, abs=1e-4)
    broken = make(**GROW, ambient_c=60.0)
    assert math.isnan(max_ambient(broken, review(broken))[0])


def test_thermal_runaway_of_a_string_with_tiny_headroom_is_a_failing_check() -> None:
    # Five 1 W-class LEDs (2.3 V, −4 mV/K, 50 K/W each) on 13 V less 1.1 V: 0.4 V across 1.5 Ω (E24 above
    # 1.33 Ω). Each kelvin adds 20 mV across it (13 mA): at Tj,max 125 °C the string would carry 1.6 A and its
    # heat drive the junction about 150 K above ambient, so there is no stable point below Tj,max.
    x = make(**GROW | {"leds_in_series": 5.0, "current_a": 0.3, "vf_tempco_v_per_k": -0.004, "supply_v": 13.0})
    assert validate(x) == []
    out = review(x)
    assert out.thermal.results["led_junction_c"][0] != out.thermal.results["led_junction_c"][0]  # NaN: no point
    assert not out.check("led_thermal_runaway").ok[0]
    assert out.check("led_thermal_runaway").value[0] > 125.0
    assert any("runaway" in note.message for note in out.cautions)
    assert "led_thermal_runaway" in worst_case(x).failing()[0]


def test_the_monte_carlo_judges_every_build_at_both_ends_of_the_ambient_range() -> None:
    # Cold only, hot only and the range: the range fails every build that fails at either end.
    base = GROW | {"current_a": 0.21}
    cold = monte_carlo(make(**base, ambient_c=20.0), samples=2000, seed=4)
    hot = monte_carlo(make(**base, ambient_c=50.0), samples=2000, seed=4)
    both = monte_carlo(make(**base, ambient_c=20.0, ambient_max_c=50.0), samples=2000, seed=4)
    assert cold.fraction == 1.0
    assert hot.fraction < 1.0
    assert both.fraction <= hot.fraction
    assert both.failures["transistor_junction_temperature"] >= 1


def test_ambient_range_must_hold_the_ambient() -> None:
    found = {v.field for v in validate(make(ambient_c=30.0, ambient_min_c=35.0, ambient_max_c=25.0))}
    assert {"ambient_min_c", "ambient_max_c"} <= found
    found = {v.field for v in validate(make(heatsink_k_per_w=5.0, rth_jc_k_per_w=math.nan, led_tj_max_c=20.0))}
    assert {"rth_jc_k_per_w", "led_tj_max_c"} <= found


def test_a_heat_sink_lowers_the_junction_and_lifts_the_free_air_cap() -> None:
    # With a sink, Rθ = Rθjc + the sink's figure (interface included): 5 + 20 K/W against 140 K/W in free air.
    sunk = review(make(**GROW, ambient_c=55.0, rth_jc_k_per_w=5.0, heatsink_k_per_w=20.0)).thermal.results
    assert sunk["transistor_derated_limit_w"][0] == pytest.approx((150.0 - 55.0) / 25.0)  # above the 0.9 W rating
    assert sunk["transistor_junction_c"][0] == pytest.approx(55.0 + 25.0 * sunk["transistor_power_hot_w"][0])


HEAT_RISING = ("led_junction_c", "transistor_junction_c", "resistor_hot_spot_c")
LIMITS_FALLING = ("transistor_derated_limit_w", "resistor_derated_limit_w", "led_current_limit_a")


@settings(max_examples=60, derandomize=True, deadline=None)
@given(rows=st.lists(channel_rows(), min_size=1, max_size=3), rise=st.floats(0.0, 40.0))
def test_raising_the_ambient_never_cools_a_part_nor_raises_a_derated_limit(
    rows: list[dict[str, Any]], rise: float
) -> None:
    cool = rows_to_inputs([row | {"ambient_min_c": math.nan, "ambient_max_c": math.nan} for row in rows])
    warm = rows_to_inputs([row | {"ambient_c": row["ambient_c"] + rise, "ambient_min_c": math.nan,
                                  "ambient_max_c": math.nan} for row in rows])  # fmt: skip
    valid = ~np.zeros(len(rows), dtype=bool)
    for violation in validate(cool) + validate(warm):
        valid &= ~violation.rows
    if not valid.any():
        return
    from calcsvc.core.outcome import take

    a, b = review(take(cool, valid)).thermal.results, review(take(warm, valid)).thermal.results
    for name in HEAT_RISING:
        x, y = np.nan_to_num(a[name], nan=np.inf), np.nan_to_num(b[name], nan=np.inf)  # runaway: hottest
        assert np.all(y >= x - 1e-9), name
    for name in LIMITS_FALLING:
        assert np.all(b[name] <= a[name] + 1e-12), name
