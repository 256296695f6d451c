"""Heat in the led-string calculation (``led_heat``) against sources outside the project: an independent brentq
solve of the coupled electro-thermal point written out here, the maximum power transfer theorem for the hottest
forward voltage, and the IEC 60115-1 and LED current derating lines worked by hand."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from calcsvc.core import led_string
from calcsvc.core.outcome import Outcome

# Three red 5 mm LEDs on 12 V at 20 mA through an E24 resistor (typical of the class, from memory).
BASE: dict[str, Any] = {
    **{s.name: math.nan if s.default is None else s.default for s in led_string.SPEC.inputs},
    "supply_v": 12.0,
    "vf_typ_v": 2.0,
    "vf_min_v": 1.8,
    "vf_max_v": 2.2,
    "if_max_a": 0.03,
    "leds_in_series": 3.0,
    "current_a": 0.02,
    "led_tj_max_c": 100.0,
}


def run(**overrides: Any) -> Outcome:
    values = {**BASE, **overrides}
    n = max((len(v) for v in values.values() if isinstance(v, list)), default=1)
    columns = {
        name: np.broadcast_to(np.asarray(v, dtype=str if name == "e_series" else np.float64), (n,)).copy()
        for name, v in values.items()
    }
    return led_string.compute(led_string.SPEC.make_inputs(columns))


def check(out: Outcome, name: str) -> Any:
    return next(c for c in out.checks if c.name == name)


def junction_by_brentq(head: float, vf25: float, r: float, n: float, k: float, rth: float, ta: float) -> float:
    """The heat balance written out on its own: per LED Vf(T) = Vf25 + k·(T − 25), string current
    I = (H − N·Vf)/R (Kirchhoff's voltage law and Ohm's law), Tj = Ta + Rθ·Vf·I (thermal Ohm's law); brentq
    between the ambient and 200 °C."""

    def balance(t: float) -> float:
        vf = vf25 + k * (t - 25.0)
        return t - ta - rth * vf * max(head - n * vf, 0.0) / r

    return float(brentq(balance, ta, 200.0, xtol=1e-12, rtol=1e-14))


def test_the_nominal_string_sits_at_the_independently_solved_coupled_point() -> None:
    ambients = [-20.0, 0.0, 25.0, 45.0, 60.0]
    out = run(ambient_c=ambients)
    r = out.results
    resistor = r["resistor_ohm"][0]  # (12 − 6) V / 20 mA = 300 Ω, an E24 value
    assert resistor == 300.0
    expected = [junction_by_brentq(12.0, 2.0, 300.0, 3.0, -0.002, 350.0, ta) for ta in ambients]
    np.testing.assert_allclose(r["led_junction_c"], expected, rtol=0, atol=1e-8)
    vf = 3 * (2.0 - 0.002 * (np.array(expected) - 25.0))
    np.testing.assert_allclose(r["string_vf_hot_v"], vf, rtol=1e-12)
    np.testing.assert_allclose(r["current_hot_a"], (12.0 - vf) / 300.0, rtol=1e-10)
    # Self-heated LEDs draw more than the constant-drop design's 20 mA even in 25 °C air, and more the warmer it is.
    assert r["current_hot_a"][2] > r["current_a"][2] and np.all(np.diff(r["current_hot_a"]) > 0)
    assert np.all(r["thermal_iterations"] <= 12)


def test_the_hottest_junction_is_at_the_forward_voltage_of_maximum_power_transfer() -> None:
    # One LED on 5 V through E24 150 Ω (at -5 %: 142.5 Ω). Its power Vf·(H − Vf)/R is largest when the LED takes
    # half the headroom (the maximum power transfer theorem), so the hottest junction is bounded by
    # T* = Ta + Rθ·H²/(4R) = 25 + 350 × 25/570 = 40.35 °C, reached at a 25 °C forward voltage of
    # 2.5 V + 2 mV/K × 15.35 K = 2.531 V, inside the part's 1.8–2.6 V: the worst case is neither end of the range.
    out = run(supply_v=5.0, leds_in_series=1.0, vf_typ_v=2.2, vf_min_v=1.8, vf_max_v=2.6, current_a=0.02)
    assert out.results["resistor_ohm"][0] == 150.0
    bound = 25.0 + 350.0 * 25.0 / (4 * 142.5)
    assert out.results["led_junction_max_c"][0] == pytest.approx(bound, abs=1e-8)
    # A brute-force scan of the whole forward-voltage range with the independent solve never finds it hotter.
    scanned = [junction_by_brentq(5.0, vf, 142.5, 1.0, -0.002, 350.0, 25.0) for vf in np.linspace(1.8, 2.6, 801)]
    assert max(scanned) <= bound + 1e-9 and max(scanned) == pytest.approx(bound, abs=1e-4)
    assert check(out, "led_junction_temperature").value[0] == pytest.approx(bound, abs=1e-8)


def test_the_resistor_and_led_current_are_derated_to_the_ambient_by_hand() -> None:
    # At 100 °C the IEC 60115-1 line (from memory: full to 70 °C, zero at 155 °C) leaves (155 − 100)/85 of the
    # rating; the LED's current line from its 60 °C knee to Tj,max 110 °C leaves (110 − 100)/50 = 20 %.
    out = run(ambient_c=100.0, led_tj_max_c=110.0, if_derating_knee_c=60.0)
    r = out.results
    assert r["resistor_derated_limit_w"][0] == pytest.approx(r["resistor_rating_w"][0] * 55.0 / 85.0)
    assert r["led_current_limit_a"][0] == pytest.approx(0.03 * 0.2)
    rating = check(out, "led_current_rating")
    assert rating.limit[0] == pytest.approx(0.006) and not rating.ok[0]  # ~25 mA hot against 6 mA
    assert rating.value[0] == pytest.approx(r["current_max_hot_a"][0])
    power = check(out, "resistor_derated_power")
    r_low = 300.0 * 0.95  # E24's customary 5 %
    assert power.value[0] == pytest.approx(r["current_max_hot_a"][0] ** 2 * r_low)
    # The hot spot from the same line: Ta + P·(155 − 70)/P_rated.
    expected = 100.0 + power.value[0] * 85.0 / r["resistor_rating_w"][0]
    assert r["resistor_hot_spot_c"][0] == pytest.approx(expected)


def test_junction_check_keeps_20_k_below_tj_max_and_fails_when_the_air_is_hot() -> None:
    # Common practice: junctions 20 K below Tj,max (100 °C here). The worst string runs about 15 K above the air.
    out = run(ambient_c=[25.0, 70.0])
    junction = check(out, "led_junction_temperature")
    np.testing.assert_allclose(junction.limit, 80.0)
    assert junction.ok.tolist() == [True, False]
    assert np.all(junction.value > [25.0, 70.0]) and np.all(junction.value < [45.0, 90.0])
    assert any("60 °C" in n.message for n in out.cautions)


def test_thermal_runaway_is_a_failing_check_and_a_caution_not_an_error() -> None:
    # Five 1 W-class LEDs (2.5 V, −4 mV/K, 50 K/W each) on 13 V at 350 mA: 0.5 V across ~1.3 Ω. Each kelvin adds
    # 20 mV of headroom, 15 mA: the heat balance is still negative at Tj,max, so there is no stable point.
    out = run(
        supply_v=13.0, vf_typ_v=2.5, vf_min_v=2.4, vf_max_v=2.6, if_max_a=0.7, leds_in_series=5.0, current_a=0.35,
        led_rth_jb_k_per_w=10.0, led_rth_ba_k_per_w=40.0, vf_tempco_v_per_k=-0.004, led_tj_max_c=125.0,
        supply_tolerance=0.05,
    )  # fmt: skip
    runaway = check(out, "led_thermal_runaway")
    assert not runaway.ok[0] and runaway.value[0] > 125.0
    assert math.isnan(out.results["led_junction_max_c"][0])
    assert any("Thermal runaway" in n.message for n in out.cautions)


def test_without_a_tempco_the_hot_currents_are_the_constant_drop_ones() -> None:
    out = run(vf_tempco_v_per_k=0.0, ambient_c=[0.0, 50.0], supply_tolerance=0.05)
    r = out.results
    np.testing.assert_allclose(r["current_hot_a"], r["current_a"], rtol=1e-12)
    np.testing.assert_allclose(r["current_max_hot_a"], r["current_max_a"], rtol=1e-12)


@settings(max_examples=60, deadline=None, derandomize=True, database=None)
@given(
    leds=st.integers(1, 6),
    vf=st.floats(1.6, 3.4),
    spread=st.floats(0.0, 0.2),
    headroom=st.floats(0.05, 3.0),
    current=st.floats(0.005, 0.7),
    rth=st.floats(5.0, 500.0),
    tempco=st.floats(-0.005, 0.0),
    knee=st.one_of(st.just(math.nan), st.floats(0.0, 90.0)),
    ambients=st.lists(st.floats(-40.0, 95.0), min_size=2, max_size=6),
)
def test_property_a_warmer_ambient_never_cools_a_part_nor_raises_a_limit(
    leds: int,
    vf: float,
    spread: float,
    headroom: float,
    current: float,
    rth: float,
    tempco: float,
    knee: float,
    ambients: list[float],
) -> None:
    ambients = sorted(ambients)
    out = run(
        supply_v=(leds * vf) * (1 + headroom), vf_typ_v=vf, vf_min_v=vf * (1 - spread), vf_max_v=vf * (1 + spread),
        if_max_a=1.0, leds_in_series=float(leds), current_a=current, led_rth_jb_k_per_w=rth, led_rth_ba_k_per_w=0.0,
        vf_tempco_v_per_k=tempco, if_derating_knee_c=knee, led_tj_max_c=100.0, supply_tolerance=0.05,
        ambient_c=ambients,
    )  # fmt: skip
    r = out.results
    hot = np.nan_to_num(r["led_junction_c"], nan=1e9)  # a string that runs away is hotter than any
    hottest = check(out, "led_junction_temperature").value
    for rising in (hot, hottest, r["resistor_hot_spot_c"], r["current_max_hot_a"]):
        assert np.all(np.diff(rising) >= -1e-9)
    for falling in (r["led_current_limit_a"], r["resistor_derated_limit_w"]):
        assert np.all(np.diff(falling) <= 1e-12)
