"""The channel review with an N-MOSFET as its switch: the chain by hand, heat and switching loss against
independent numerical solutions, the corners against a brute-force scan of the tolerance box, and the Monte Carlo
against the worst case."""

from __future__ import annotations

import dataclasses
import itertools
import math
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad
from scipy.optimize import brentq
from test_channel import NO_FRONT_STAGE, make

from calcsvc.core import channel_mosfet, channel_thermal
from calcsvc.core.channel import review, validate
from calcsvc.core.channel_stages import resistor_tolerance, supply_band
from calcsvc.core.corners import MOSFET, Point, corner_points
from calcsvc.core.monte_carlo import monte_carlo
from calcsvc.core.outcome import DomainError
from calcsvc.core.tolerance import evaluate_at
from calcsvc.core.worst_case import worst_case

NO_NPN = {name: math.nan for name in channel_mosfet.BIPOLAR_ONLY}
# The small logic-level seed MOSFET (invented, class-typical values).
SMALL = {
    "vds_max_v": 30.0, "id_max_a": 3.0, "vgs_1_v": 2.5, "rds_on_1_ohm": 0.1, "vgs_2_v": 4.5, "rds_on_2_ohm": 0.06,
    "vgs_3_v": 10.0, "rds_on_3_ohm": 0.045, "vgs_th_max_v": 1.5, "qg_total_c": 3e-9, "power_max_w": 0.8,
    "tj_max_c": 150.0, "rth_ja_k_per_w": 150.0, "gate_pulldown_ohm": 100e3, "switching_time_s": math.nan,
}  # fmt: skip
# The greenhouse grow-light channel: three strings of three royal-blue 1 W LEDs from one reel (2.9–3.3 V) at
# 350 mA on the 12 V ±5 % adapter, from a 3.3 V pin rated 2.8 V high at 10 mA, dimmed at 2 kHz in 16 steps.
GROW = {
    **NO_FRONT_STAGE, **NO_NPN, **SMALL,
    "vf_typ_v": 3.1, "vf_min_v": 2.9, "vf_max_v": 3.3, "if_max_a": 0.6, "led_tj_max_c": 125.0,
    "led_rth_jb_k_per_w": 10.0, "led_rth_ba_k_per_w": 15.0, "vf_tempco_v_per_k": -0.003, "if_derating_knee_c": 50.0,
    "drive_high_v": 2.8, "drive_low_v": 0.5, "source_current_max_a": 0.01, "drive_supply_v": 3.3,
    "leds_in_series": 3.0, "strings": 3.0, "current_a": 0.35, "channels": 1.0, "duty_cycle": 0.5,
    "resistor_tolerance": 0.01, "pwm_frequency_hz": 2000.0, "pwm_resolution_bits": 4.0,
}  # fmt: skip
ALPHA = 0.007  # on-resistance rise per kelvin (from memory, as ``on_resistance``)


def test_grow_light_chain_by_hand() -> None:
    i = make(**GROW)
    r = review(i)
    assert r.ok.all() and r.switch_kind == "mosfet"
    # Gate: 2.8 V × 100 kΩ/(100 kΩ + 390 Ω); the on-resistance linear between 2.5 V (0.1 Ω) and 4.5 V (0.06 Ω).
    gate = 2.8 * 100e3 / (100e3 + 390)
    rds = 0.1 - (gate - 2.5) / 2.0 * 0.04
    assert r.switch.results["rg_ohm"][0] == 390 and r.switch.results["rds_on_ohm"][0] == pytest.approx(rds)
    # The drop the string resistor is sized around: three strings' 350 mA through Rds at Tj,max − 20 K.
    rds_max = rds * (1 + ALPHA * (150 - 20 - 25))
    drop = 3 * 0.35 * rds_max
    exact = (12.0 - 3 * 3.1 - drop) / 0.35
    assert r.led_string.results["resistor_exact_ohm"][0] == pytest.approx(exact)
    assert r.led_string.results["resistor_ohm"][0] == 7.5  # E24 at or above 7.22 Ω (IEC 60063)
    assert [c.name for c in r.switch.checks] == [
        "gate_reaches_stated_drive", "edges_within_wanted_time", "pin_peak_current", "drain_current_rating",
        "drain_voltage_rating", "shortest_pulse_covers_edges", "flicker_low_risk",
    ]  # fmt: skip


def test_heat_by_thermal_ohms_law_with_the_on_resistance_rising() -> None:
    i = make(**GROW)
    r = review(i)
    heat = r.thermal.results
    drain = 3 * heat["led_current_hot_a"][0]
    t_on, t_off = r.switch.results["turn_on_s"][0], r.switch.results["turn_off_s"][0]
    switching = 12.0 * drain * (t_on + t_off) * 2000 / 6
    rds = r.switch.results["rds_on_ohm"][0]

    def balance(tj: float) -> float:  # Tj = Ta + Rθ·(I²·R25·(1 + α(Tj − 25))·D + P_sw)
        return tj - 25.0 - 150.0 * (drain**2 * rds * (1 + ALPHA * (tj - 25)) * 0.5 + switching)

    tj = brentq(balance, 25.0, 150.0, xtol=1e-12)
    assert heat["transistor_junction_c"][0] == pytest.approx(tj, rel=1e-9)
    # Conduction by Ohm's law at that junction, I²·R(Tj)·D, plus the switching loss.
    conduction = drain**2 * rds * (1 + ALPHA * (tj - 25)) * 0.5
    assert heat["transistor_power_hot_w"][0] == pytest.approx(conduction + switching, rel=1e-9)


def test_the_switch_section_and_the_thermal_stage_see_the_same_heat_sink() -> None:
    # On a 20 K/W heat sink (10 K/W junction to case), both take Rθ = 30 K/W instead of the part's 150 K/W to air:
    # the switch section's junction is thermal Ohm's law at that Rθ for its own dissipation and drain current.
    r = review(make(**{**GROW, "rth_jc_k_per_w": 10.0, "heatsink_k_per_w": 20.0}))
    switch = r.switch.results
    drain = r.collector_current_max_a[0]
    rds, switching = switch["rds_on_ohm"][0], switch["switching_loss_w"][0]

    def balance(tj: float) -> float:
        return tj - 25.0 - 30.0 * (drain**2 * rds * (1 + ALPHA * (tj - 25)) * 0.5 + switching)

    assert switch["junction_c"][0] == pytest.approx(brentq(balance, 25.0, 150.0, xtol=1e-12), rel=1e-9)
    heat = r.thermal.results
    assert heat["transistor_junction_c"][0] == pytest.approx(25.0 + 30.0 * heat["transistor_power_hot_w"][0])


def test_switching_loss_is_the_triangle_integral() -> None:
    # A resistive load: the voltage falls as the current rises (and back), linearly across each edge; the energy
    # of an edge is ∫ V(1 − t/T)·I·t/T dt, integrated numerically.
    r = review(make(**GROW))
    drain = r.collector_current_max_a[0]
    energy = sum(
        quad(lambda t, edge=edge: 12.0 * (1 - t / edge) * drain * t / edge, 0.0, edge)[0]
        for edge in (r.switch.results["turn_on_s"][0], r.switch.results["turn_off_s"][0])
    )
    assert r.switch.results["switching_loss_w"][0] == pytest.approx(energy * 2000, rel=1e-9)


def _scan(i: Any, nominal: Any, steps: int) -> list[Any]:
    """Every check at a grid of ``steps`` values per quantity across the whole tolerance box (not only its
    corners), each quantity on its own axis."""
    tol = resistor_tolerance(i)
    r_led = nominal.led_string.results["resistor_ohm"]
    r_gate = nominal.switch.results["rg_ohm"]
    rds_max = channel_mosfet.rds_max_of(i, nominal.switch)
    low, high = supply_band(i)
    cold, hot = channel_thermal.ambient_range(i)
    fraction = np.linspace(0.0, 1.0, steps)

    def grid(axis: int, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        shape = [1] * 6
        shape[axis] = steps
        return (a[:, None] + (b - a)[:, None] * fraction).reshape(-1, *shape)

    at = Point(
        points=(steps,) * 6,
        supply_v=grid(0, low, high),
        string_vf_v=grid(1, 3 * i.vf_min_v, 3 * i.vf_max_v)[..., None],
        led_resistor_ohm=grid(2, r_led * (1 - tol), r_led * (1 + tol))[..., None],
        drive_resistor_ohm=grid(3, r_gate * (1 - tol), r_gate * (1 + tol)),
        switch_value=grid(4, np.zeros_like(rds_max), rds_max),
        ambient_c=grid(5, cold, hot),
    )
    return evaluate_at(i, nominal, at)


@pytest.mark.parametrize(
    "overrides",
    [
        {},
        {"ambient_min_c": 0.0, "ambient_max_c": 45.0, "current_a": 0.4},
        {"rds_on_1_ohm": 0.6, "rds_on_2_ohm": 0.5, "rds_on_3_ohm": 0.4, "resistor_tolerance": 0.05},
    ],
)
def test_mosfet_corners_match_a_brute_force_scan_of_the_box(overrides: dict[str, float]) -> None:
    i = make(**{**GROW, **overrides})
    worst = worst_case(i)
    scanned = {c.name: c for c in _scan(i, worst.nominal, 4)}
    corners = {c.name: c for c in evaluate_at(i, worst.nominal, corner_points(i, worst.nominal))}
    for found in worst.checks:
        if math.isnan(found.check.limit[0]) and math.isnan(found.check.value[0]):
            continue  # does not apply
        margins = scanned[found.name].margin().reshape(-1)
        least = float(np.nanmin(margins)) if np.isfinite(margins).any() else math.nan
        if math.isnan(least):
            continue
        # No point inside the box is worse than the corner reported, which is one of the scan's points.
        assert float(found.margin()[0]) <= least + 1e-9, found.name
        assert float(found.margin()[0]) == pytest.approx(least, rel=1e-9, abs=1e-12), found.name
        assert bool(found.check.ok[0]) == bool(scanned[found.name].ok.all()), found.name
        # The corner named is the one whose margin is the least of the 64.
        index = int(found.corner_index[0])
        corner_margins = np.broadcast_to(corners[found.name].margin(), (1, *MOSFET.axes)).reshape(-1)
        assert corner_margins[index] == pytest.approx(float(found.margin()[0]), rel=1e-12, abs=1e-15)


def test_the_current_side_and_the_headroom_side_take_opposite_on_resistances() -> None:
    worst = worst_case(make(**{**GROW, "ambient_min_c": 5.0, "ambient_max_c": 40.0}))
    assert worst.check("drain_current_rating").corner(0)["on_resistance"] == "none"
    assert worst.check("led_current_rating").corner(0)["on_resistance"] == "none"
    assert worst.check("headroom").corner(0)["on_resistance"] == "max"
    assert worst.check("pin_peak_current").corner(0) == {"gate_resistor": "low", "pin_high": "at its supply"}
    assert worst.check("shortest_pulse_covers_edges").corner(0) == {"gate_resistor": "high"}
    assert worst.check("transistor_junction_temperature").corner(0)["ambient"] == "hot"


@settings(max_examples=12, deadline=None, derandomize=True, database=None)
@given(
    current=st.floats(0.2, 0.45),
    rds=st.floats(0.05, 0.8),
    tolerance=st.sampled_from([0.01, 0.05]),
    hot=st.floats(25.0, 60.0),
    seed=st.integers(0, 2**16),
)
def test_monte_carlo_agrees_with_the_worst_case(
    current: float, rds: float, tolerance: float, hot: float, seed: int
) -> None:
    i = make(**{**GROW, "current_a": current, "rds_on_1_ohm": rds, "rds_on_2_ohm": rds * 0.6,
                "rds_on_3_ohm": rds * 0.45, "resistor_tolerance": tolerance, "ambient_max_c": hot})  # fmt: skip
    worst = worst_case(i)
    found = monte_carlo(i, 400, seed, worst.nominal)
    for c in worst.checks:
        if bool(c.check.ok[0]):  # a check the corners pass never fails a build inside the box
            assert found.failures[c.name] == 0, c.name
    if worst.ok[0]:
        assert found.fraction == 1.0


def test_a_10v_only_part_is_refused_for_a_3v3_pin() -> None:
    standard = {"vds_max_v": 100.0, "id_max_a": 14.0, "vgs_1_v": 10.0, "rds_on_1_ohm": 0.16, "vgs_2_v": math.nan,
                "rds_on_2_ohm": math.nan, "vgs_3_v": math.nan, "rds_on_3_ohm": math.nan, "vgs_th_max_v": 4.0,
                "qg_total_c": 2.5e-8}  # fmt: skip
    found = validate(make(**{**GROW, **standard}))
    assert [v.field for v in found] == ["drive_high_v"]
    assert "not a logic-level part for this pin" in found[0].message
    with pytest.raises(DomainError):
        review(make(**{**GROW, **standard}))


def test_one_switch_kind_per_row_and_per_call() -> None:
    found = validate(make(**{**GROW, "hfe_min": 100.0}))
    assert [v.field for v in found] == ["hfe_min"] and "give one switch kind's inputs" in found[0].message
    # A batch may mix kinds: each row is validated as its own kind; a review takes one kind per call.
    npn = make()
    mosfet = make(**GROW)
    both = dataclasses.replace(
        npn,
        **{f.name: np.concatenate([getattr(npn, f.name), getattr(mosfet, f.name)]) for f in dataclasses.fields(npn)},
    )
    assert validate(both) == []
    with pytest.raises(ValueError, match="mix switch kinds"):
        review(both)


def test_every_corner_is_a_combination_of_the_settings() -> None:
    assert len(MOSFET.corners) == 64 and MOSFET.axes == (2,) * 6
    assert MOSFET.corners == tuple(
        dict(zip(MOSFET.quantities, combo, strict=True))
        for combo in itertools.product(*(MOSFET.settings[q] for q in MOSFET.quantities))
    )
    assert "hfe" not in MOSFET.quantities and "base_resistor" not in MOSFET.quantities
