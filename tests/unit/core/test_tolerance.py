"""Tests for the channel's tolerance analysis: worst case over corners, Monte Carlo yield, Wilson interval."""

from __future__ import annotations

import itertools
import math
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq, minimize_scalar
from scipy.stats import binomtest
from test_channel import DEMO, FRONT_CHECKS, NO_FRONT_STAGE, OPTIONAL_CHECKS, channel_rows, make, rows_to_inputs

from calcsvc.core.channel import review
from calcsvc.core.corners import CORNERS, DEPENDS_ON, HELD, QUANTITIES, SETTINGS
from calcsvc.core.monte_carlo import MAX_SAMPLES, Z_95, monte_carlo, validate_monte_carlo, wilson_interval
from calcsvc.core.outcome import DomainError
from calcsvc.core.worst_case import worst_case

# ---- an independent scalar model of one built channel, for brute-force corner enumeration -------------


def pin_current(row: dict[str, Any], r_b: float, at_supply: bool, hot: bool) -> float:
    """The pin's current (Ohm's law) with its high level at its rated value or at its own supply, and the
    base-emitter junction at 25 °C or hot (2 mV/K over 100 K per junction, from memory)."""
    supply = row["drive_supply_v"]
    high = supply if at_supply and not math.isnan(supply) else row["drive_high_v"]
    vbe = row["vbe_sat_v"] - (0.2 * row["base_junctions"] if hot else 0.0)
    return (high - vbe) / r_b


def led_heat(row: dict[str, Any], vs: float, vf25: float, r: float, ta: float) -> dict[str, float]:
    """A string's junction by brentq on Tj = Ta + Rθ·Vf(Tj)·I(Tj), Vf(T) = Vf25 + k·(T − 25) per LED (−2 mV/K
    class, from memory), I = max(Vs − Vce − N·Vf, 0)/R; runaway where the balance is negative at Tj,max."""
    n, k, tmax = row["leds_in_series"], row["vf_tempco_v_per_k"], row["led_tj_max_c"]
    rth = row["led_rth_jb_k_per_w"] + row["led_rth_ba_k_per_w"]

    def led_power(t: float) -> float:
        vf = vf25 + k * (t - 25.0)
        return vf * max(vs - row["vce_sat_v"] - n * vf, 0.0) / r

    def balance(t: float) -> float:
        return t - ta - rth * led_power(t)

    at_max = ta + rth * led_power(tmax)
    if balance(tmax) < 0:
        return {"vf": vf25 + k * (tmax - 25.0), "junction": at_max, "at_max": at_max}
    t = ta if balance(ta) == 0 else brentq(balance, ta, tmax, xtol=1e-12, rtol=1e-14)
    return {"vf": vf25 + k * (t - 25.0), "junction": t, "at_max": at_max}


def thermal_checks(
    row: dict[str, Any], ta: float, heat: dict[str, float], i_string: float, rating: float, r: float, power: float
) -> dict[str, tuple]:
    """The thermal checks in plain floats: thermal Ohm's law, a 20 K junction margin (common practice), the
    IEC 60115-1 resistor curve (from memory) on the rating the LED stage chose."""
    rth = row["rth_ja_k_per_w"]
    if math.isnan(rth):
        rth = (row["tj_max_c"] - 25.0) / row["power_max_w"]
    tj = ta + power * rth
    derated = min(max((row["tj_max_c"] - ta) / rth, 0.0), row["power_max_w"])
    resistor_fraction = min(max((155.0 - ta) / (155.0 - 70.0), 0.0), 1.0)
    led_max = row["led_tj_max_c"]
    return {
        "led_junction_temperature": (heat["junction"], led_max - 20.0, heat["junction"] <= led_max - 20.0),
        "led_thermal_runaway": (heat["at_max"], led_max, heat["at_max"] <= led_max),
        "resistor_derated_power": (
            i_string**2 * r,
            rating * resistor_fraction,
            i_string**2 * r <= rating * resistor_fraction,
        ),
        "transistor_junction_temperature": (tj, row["tj_max_c"] - 20.0, tj <= row["tj_max_c"] - 20.0),
        "transistor_derated_power": (power, derated, power <= derated),
    }


def lowest_low_risk_hz(depth: float) -> float:
    """IEEE Std 1789-2015's low-risk region (from memory) solved for the frequency, by hand: Mod% / 0.025 up to
    2.25 % (below 90 Hz), 90 Hz up to 7.2 %, Mod% / 0.08 above."""
    percent = 100 * depth
    return percent / 0.025 if percent <= 2.25 else 90.0 if percent <= 7.2 else percent / 0.08


def corner_values(
    row: dict[str, Any], r_led: float, rb: float, corner: dict[str, str], resistor_rating_w: float
) -> dict[str, tuple]:
    """(value, limit, ok) of every check for one row at one corner, in plain floats (Ohm's law, KVL)."""
    tol = row["resistor_tolerance"]
    if math.isnan(tol):
        tol = {"E6": 0.2, "E12": 0.1, "E24": 0.05, "E48": 0.02, "E96": 0.01, "E192": 0.005}[row["e_series"]]
    sign = {q: 1.0 if corner[q] == SETTINGS[q][1] else -1.0 for q in QUANTITIES}
    if math.isnan(row["supply_min_v"]):
        vs = row["supply_v"] * (1 + sign["supply"] * row["supply_tolerance"])
    else:  # the band given: its ends are the corners
        vs = row["supply_max_v"] if corner["supply"] == "high" else row["supply_min_v"]
    vf = row["vf_max_v"] if corner["vf"] == "max" else row["vf_min_v"]
    r = r_led * (1 + sign["led_resistor"] * tol)
    r_b = rb * (1 + sign["base_resistor"] * tol)
    hfe = row["hfe_min"] if corner["hfe"] == "min" else 2 * row["hfe_typ"] - row["hfe_min"]

    ambient = row[f"ambient_{'min' if corner['ambient'] == 'cold' else 'max'}_c"]
    ta = row["ambient_c"] if math.isnan(ambient) else ambient
    heat = led_heat(row, vs, vf, r, ta)
    # The junction check judges the hottest string anywhere in the forward-voltage range, not only at its ends:
    # a bounded scalar search over Vf25 of the same brentq solve finds it.
    inside = minimize_scalar(
        lambda v: -led_heat(row, vs, v, r, ta)["junction"],
        bounds=(row["vf_min_v"], row["vf_max_v"]),
        method="bounded",
        options={"xatol": 1e-10},
    )
    heat = {**heat, "junction": max(heat["junction"], -inside.fun)}
    vf = heat["vf"]
    v_r = vs - row["leds_in_series"] * vf - row["vce_sat_v"]
    i_string = max(v_r, 0.0) / r
    ic = row["strings"] * i_string
    i_rbe = 0.0 if math.isnan(row["rbe_ohm"]) else row["vbe_sat_v"] / row["rbe_ohm"]
    ib = (row["drive_high_v"] - row["vbe_sat_v"]) / r_b - i_rbe
    pin = pin_current(row, r_b, at_supply=True, hot=True)
    # Off: the pin sinks only the 1 µA hot leakage (from memory), so its low level scales from its rated vol.
    # No rating given: VOL taken as stated at 1 mA (common practice, from memory).
    rating = 1e-3 if math.isnan(row["source_current_max_a"]) else row["source_current_max_a"]
    v_low = row["drive_low_v"] * min(1.0, 1e-6 / rating)
    f = row["pwm_frequency_hz"]
    # Switching loss of a resistive load, V·I·(tr + tf)·f/6 (Mohan, Undeland & Robbins, Power Electronics).
    switching = 0.0 if math.isnan(f) else vs * ic * (row["tr_s"] + row["tf_s"]) * f / 6
    power = (row["vce_sat_v"] * ic + row["vbe_sat_v"] * ib) * row["duty_cycle"] + switching
    shortest = 1 / (f * 2 ** row["pwm_resolution_bits"])  # NaN without a PWM
    edges = 10 * (row["td_s"] + row["tr_s"] + row["ts_s"] + row["tf_s"])  # ten times the edges (common practice)
    # IEEE Std 1789-2015 low-risk region (from memory): Mod% ≤ 0.025·f below 90 Hz, 0.08·f up to 1250 Hz.
    low_risk = min(1.0, (0.025 if f < 90 else 0.08) * f / 100) if f <= 1250 else 1.0 if f > 1250 else math.nan
    supply_avg = row["channels"] * ic * row["duty_cycle"]
    supply_peak = row["channels"] * ic

    def at_most(value: float, limit: float) -> tuple:
        return value, limit, math.isnan(limit) or value <= limit

    knee, led_max = row["if_derating_knee_c"], row["led_tj_max_c"]  # linear from the knee to Tj,max
    if_max = row["if_max_a"] * (1.0 if math.isnan(knee) else min(max((led_max - ta) / (led_max - knee), 0.0), 1.0))
    out = {
        "led_current_rating": at_most(i_string, if_max),
        "headroom": (v_r, 0.1 * vs, v_r >= 0.1 * vs),  # 10 % of the supply (common practice)
        "resistor_rating": at_most(2 * i_string**2 * r, 5.0),  # twice the dissipation within 5 W
        "saturation": (ic / ib, hfe, ic / ib < hfe),
        "vce_sat_guarantee": at_most(ic / ib, row["vce_sat_forced_beta"]),
        "driver_current": at_most(pin, row["source_current_max_a"]),
        "collector_current_rating": at_most(ic, row["ic_max_a"]),
        "voltage_rating": at_most(vs, row["vceo_max_v"] / 1.2),  # 1.2 × derating (common practice)
        "power_rating": at_most(power, row["power_max_w"]),
        # Hot turn-on: 0.6 V per junction at 25 °C (common practice) less 2 mV/K over 100 K (from memory).
        "off_state": at_most(v_low + 1e-6 * r_b, 0.4 * row["base_junctions"]),
        "shortest_pulse_covers_edges": (edges, shortest, math.isnan(f) or edges <= shortest),
        # In frequency: the PWM frequency against the lowest at which its depth is low risk (the region's inverse).
        "flicker_low_risk": (
            f,
            math.nan if math.isnan(f) else lowest_low_risk_hz(row["modulation_depth"]),
            math.isnan(f) or row["modulation_depth"] <= low_risk,
        ),
        "supply_average_current": at_most(supply_avg, row["current_max_a"]),
        "supply_peak_current": at_most(supply_peak, row["current_max_a"]),
        **thermal_checks(row, ta, heat, i_string, resistor_rating_w, r, power),
    }
    if math.isnan(row["gbw_hz"]):
        out |= {name: (math.nan, math.nan, True) for name in FRONT_CHECKS}
    else:
        # Single-pole op-amp: noise gain G (non-inverting) or 1 + G (inverting); bandwidth GBW/NG + GBW/A0.
        noise_gain = row["gain"] + (1.0 if row["inverting"] else 0.0)
        a0 = row["open_loop_gain"]
        bandwidth = row["gbw_hz"] / noise_gain + (0.0 if math.isnan(a0) else row["gbw_hz"] / a0)
        headroom = 0.0 if math.isnan(row["output_headroom_v"]) else row["output_headroom_v"]
        out |= {
            "gain_achievable": at_most(noise_gain, a0 / 10),
            "signal_in_band": at_most(row["signal_hz"], bandwidth),
            "slew_rate": at_most(2 * math.pi * row["signal_hz"] * row["amplitude_v"], row["slew_rate_v_per_s"]),
            "output_swing": at_most(row["amplitude_v"], vs / 2 - headroom),
            # The op-amp runs from the channel's supply: the rated range holds at every supply (datasheet).
            "opamp_supply_min": (vs, row["opamp_supply_min_v"], not vs < row["opamp_supply_min_v"]),
            "opamp_supply_max": at_most(vs, row["opamp_supply_max_v"]),
            # V_OS times the noise gain (Franco, 3rd ed., §5.4, from memory), with finite A0.
            "output_offset": at_most(
                row["input_offset_v"] * noise_gain / (1 + (0.0 if math.isnan(a0) else noise_gain / a0)),
                row["output_offset_max_v"],
            ),
        }
        if math.isnan(row["output_offset_max_v"]):
            out["output_offset"] = (math.nan, math.nan, True)
        out |= window_values(row, vs, noise_gain)
    return out


def window_values(row: dict[str, Any], vs: float, noise_gain: float) -> dict[str, tuple]:
    """The single-supply windows on rails 0 V and ``vs`` about the reference (non-inverting: the input swings
    amplitude/G about it; inverting: the inputs stay on it). DC error, noise and stability depend on no corner
    and are not given in these rows."""
    assert all(math.isnan(row[name]) for name in ("output_error_max_v", "adc_bits", "second_pole_hz"))
    assert math.isnan(row["load_capacitance_f"])
    ref, amp = row["reference_v"], row["amplitude_v"]
    swing_in = 0.0 if row["inverting"] else amp / noise_gain

    def window(value: float, limit: float, sense: str) -> tuple:
        if math.isnan(ref) or math.isnan(limit):
            return math.nan, math.nan, True
        return value, limit, value <= limit if sense == "max" else value >= limit

    return {
        "input_common_mode_low": window(ref - swing_in, row["input_low_headroom_v"], "min"),
        "input_common_mode_high": window(ref + swing_in, vs - row["input_high_headroom_v"], "max"),
        "output_swing_low": window(ref - amp, row["output_low_headroom_v"], "min"),
        "output_swing_high": window(ref + amp, vs - row["output_high_headroom_v"], "max"),
        "output_error": (math.nan, math.nan, True),
        "noise_bits": (math.nan, math.nan, True),
        "phase_margin": (math.nan, math.nan, True),
    }


def scalar_margin(value: float, limit: float, sense: str) -> float:
    return ((limit - value) if sense == "max" else (value - limit)) / abs(limit)


BRUTE_ROWS: list[dict[str, Any]] = [
    DEMO,
    # Inverting front stage on a ±10 % supply; a pin of unknown rating.
    DEMO | {"supply_tolerance": 0.1, "inverting": True, "gain": 20.0, "source_current_max_a": math.nan},
    # No front stage; three strings of two LEDs; 2 % resistors from E12.
    DEMO | NO_FRONT_STAGE | {"strings": 3.0, "leds_in_series": 2.0, "e_series": "E12", "resistor_tolerance": 0.02},
    # Under-driven: forced beta 30 against hfe_min 20.
    DEMO
    | {
        "hfe_min": 20.0,
        "hfe_typ": 40.0,
        "forced_beta": 30.0,
        "vce_sat_forced_beta": 40.0,
        "source_current_max_a": 0.0025,
    },
    # 7.5 V for three red LEDs: at low supply and high Vf the strings go dark (current clamped at 0).
    DEMO | {"supply_v": 7.5, "current_a": 0.005, "output_headroom_v": 1.0, "amplitude_v": 1.5},
    # An op-amp rated 11.5-12.5 V on the 12 V ±5 % supply: inside at nominal, outside at both ends; an
    # allowed output offset of 20 mV against 2.5 mV × 10.
    DEMO | {"opamp_supply_min_v": 11.5, "opamp_supply_max_v": 12.5, "output_offset_max_v": 0.02},
    # A greenhouse from a cold start to a hot summer day, LEDs drifting -2 mV/K, on a 35 mA class rating
    # derated from 40 °C: the hot end lowers every string's forward voltage and raises its current.
    DEMO
    | {
        "ambient_c": 30.0,
        "ambient_min_c": 0.0,
        "ambient_max_c": 55.0,
        "vf_tempco_v_per_k": -0.002,
        "if_derating_knee_c": 40.0,
        "if_max_a": 0.035,
        "rth_ja_k_per_w": math.nan,
    },
    # A string with little headroom at 45 °C: four LEDs on 12 V, self-heating raises its current steeply.
    DEMO
    | NO_FRONT_STAGE
    | {
        "leds_in_series": 5.0,
        "vf_tempco_v_per_k": -0.004,
        "ambient_c": 45.0,
        "ambient_min_c": 20.0,
        "current_a": 0.025,
        "led_rth_ba_k_per_w": 600.0,
    },
    # Single-supply windows about 6 V on 12 V ±5 %: the output's 7 V top meets 12 − 5 V at nominal only,
    # the input (6 ± 0.1 V) clears a range from 5.95 V (fails low) to 1 V below the rail.
    DEMO
    | {
        "reference_v": 6.0,
        "input_low_headroom_v": 5.95,
        "input_high_headroom_v": 1.0,
        "output_low_headroom_v": 0.5,
        "output_high_headroom_v": 5.0,
    },
    # The same inverting (the inputs stay on the reference), with a rail-to-rail input.
    DEMO
    | {
        "inverting": True,
        "reference_v": 6.0,
        "input_low_headroom_v": -0.1,
        "input_high_headroom_v": 5.9,
        "output_low_headroom_v": 5.5,
        "output_high_headroom_v": 0.1,
    },
]


def test_worst_case_matches_brute_force_enumeration() -> None:
    wc = worst_case(rows_to_inputs(BRUTE_ROWS))
    settings_lists = [SETTINGS[q] for q in QUANTITIES]
    for k, row in enumerate(BRUTE_ROWS):
        r_led = float(wc.nominal.led_string.results["resistor_ohm"][k])
        rb = float(wc.nominal.switch.results["rb_ohm"][k])
        rating = float(wc.nominal.led_string.results["resistor_rating_w"][k])
        table = {
            combo: corner_values(row, r_led, rb, dict(zip(QUANTITIES, combo, strict=True)), rating)
            for combo in itertools.product(*settings_lists)
        }
        for worst in wc.checks:
            name, sense = worst.name, worst.check.sense
            assert worst.check.ok[k] == all(t[name][2] for t in table.values()), (k, name)
            limit_known = not math.isnan(next(iter(table.values()))[name][1])
            if not limit_known:
                continue
            margins = {combo: scalar_margin(*t[name][:2], sense) for combo, t in table.items()}
            least = min(margins.values())
            assert worst.margin()[k] == pytest.approx(least, rel=1e-9, abs=1e-12), (k, name)
            full = CORNERS[int(worst.corner_index[k])]
            assert margins[tuple(full[q] for q in QUANTITIES)] == pytest.approx(least, rel=1e-9, abs=1e-12)
            assert worst.corner(k) == {q: full[q] for q in DEPENDS_ON[name]} | HELD.get(name, {})


def test_depends_on_is_exact() -> None:
    # Flipping a quantity a check does not depend on leaves it unchanged at every corner of every row; each
    # quantity it does depend on changes it somewhere.
    assert set(DEPENDS_ON) == {c.name for c in review(make()).checks}
    tables = []
    for row in BRUTE_ROWS:
        out = review(rows_to_inputs([row]))
        r_led, rb = float(out.led_string.results["resistor_ohm"][0]), float(out.switch.results["rb_ohm"][0])
        rating = float(out.led_string.results["resistor_rating_w"][0])
        tables.append({i: corner_values(row, r_led, rb, c, rating) for i, c in enumerate(CORNERS)})
    for name, depends in DEPENDS_ON.items():
        for q in QUANTITIES:
            changes = False
            for table in tables:
                for i, corner in enumerate(CORNERS):
                    flipped = corner | {q: SETTINGS[q][1 - SETTINGS[q].index(corner[q])]}
                    j = CORNERS.index(flipped)
                    for a, b in zip(table[i][name][:2], table[j][name][:2], strict=True):  # value, limit
                        changes |= not (math.isclose(a, b, rel_tol=1e-12) or (math.isnan(a) and math.isnan(b)))
            assert changes == (q in depends), (name, q)


def test_greenhouse_demo_worst_case_by_hand() -> None:
    # Resistors fixed at 300 Ω and 390 Ω (chosen at nominal, see test_channel). With Ohm's law:
    # highest string current (12.6 − 5.4 − 0.2) V / 285 Ω = 24.561 mA, so Ic_max = 49.123 mA;
    # lowest headroom (11.4 − 7.2 − 0.2) V = 4.0 V against 10 % of 11.4 V;
    # saturation: Rb high (409.5 Ω) gives Ib = 2.05 / 409.5 = 5.0061 mA, Ic/Ib = 9.8126 < hfe_min 100;
    # pin current: Rb low (370.5 Ω) gives 2.05 / 370.5 = 5.5331 mA < 8 mA;
    # supply: 6 × 49.123 mA = 0.29474 A peak, half that on average; output swing 11.4/2 − 1.5 = 4.2 V.
    wc = worst_case(make())
    expect = {
        "led_current_rating": (7.0 / 285, {"supply": "high", "vf": "min", "led_resistor": "low", "ambient": "cold"}),
        "headroom": (4.0, {"supply": "low", "vf": "max", "led_resistor": "low", "ambient": "cold"}),
        "saturation": (
            (2 * 7.0 / 285) / (2.05 / 409.5),
            {
                "supply": "high",
                "vf": "min",
                "led_resistor": "low",
                "base_resistor": "high",
                "hfe": "min",
                "ambient": "cold",
            },
        ),
        "driver_current": (2.65 / 370.5, {"base_resistor": "low", "pin_high": "at its supply", "vbe": "hot"}),
        "supply_peak_current": (
            6 * 2 * 7.0 / 285,
            {"supply": "high", "vf": "min", "led_resistor": "low", "ambient": "cold"},
        ),
        "supply_average_current": (
            3 * 2 * 7.0 / 285,
            {"supply": "high", "vf": "min", "led_resistor": "low", "ambient": "cold"},
        ),
        "output_swing": (1.0, {"supply": "low"}),
        "off_state": (0.4 * 1e-6 / 0.008 + 1e-6 * 409.5, {"base_resistor": "high", "leakage": "hot"}),
        "voltage_rating": (12.6, {"supply": "high"}),
    }
    for name, (value, corner) in expect.items():
        assert wc.check(name).check.value[0] == pytest.approx(value, rel=1e-12), name
        assert wc.check(name).corner(0) == corner, name
    assert wc.check("headroom").check.limit[0] == pytest.approx(1.14, rel=1e-12)
    assert wc.check("saturation").check.value[0] == pytest.approx(9.8126, abs=1e-4)
    assert wc.check("output_swing").check.limit[0] == pytest.approx(4.2, rel=1e-12)
    assert wc.ok[0]
    assert wc.failing() == [[]]


def test_op_amp_supply_range_is_checked_at_both_ends_of_the_supply_band() -> None:
    # The 12 V ±5 % supply spans 11.4-12.6 V. An op-amp rated 11.5-12.5 V passes at nominal, but the lowest
    # supply is below its minimum and the highest above its maximum: each end is its check's worst corner.
    wc = worst_case(make(opamp_supply_min_v=11.5, opamp_supply_max_v=12.5))
    assert wc.nominal.check("opamp_supply_min").ok[0] and wc.nominal.check("opamp_supply_max").ok[0]
    low, high = wc.check("opamp_supply_min"), wc.check("opamp_supply_max")
    assert (low.check.value[0], low.corner(0), low.check.ok[0]) == (pytest.approx(11.4), {"supply": "low"}, False)
    assert (high.check.value[0], high.corner(0), high.check.ok[0]) == (pytest.approx(12.6), {"supply": "high"}, False)
    assert wc.failing() == [["opamp_supply_min", "opamp_supply_max"]]
    # A 1.8-5.5 V op-amp on the 12 V supply fails even at nominal, with a caution; the output swing there is
    # still figured from the actual rails (11.4/2 − 1.5 V at the low supply), not from the op-amp's rating.
    wc = worst_case(make(opamp_supply_min_v=1.8, opamp_supply_max_v=5.5))
    assert not wc.nominal.check("opamp_supply_max").ok[0]
    assert any("destroy" in c.message for c in wc.nominal.cautions)
    assert wc.check("output_swing").check.limit[0] == pytest.approx(4.2, rel=1e-12)
    # A 10 V-minimum op-amp on a 9 V battery pack (±15 %: 7.65-10.35 V) fails at the low end.
    wc = worst_case(
        make(supply_v=9.0, supply_tolerance=0.15, current_a=0.01, opamp_supply_min_v=10.0, opamp_supply_max_v=36.0)
    )
    assert wc.check("opamp_supply_min").check.value[0] == pytest.approx(7.65)
    assert not wc.check("opamp_supply_min").check.ok[0] and wc.check("opamp_supply_max").check.ok[0]


def test_worst_case_agrees_with_the_led_stage_and_with_nominal_when_nothing_varies() -> None:
    # The LED stage's own worst case (current_max_a, resistor_power_max_w) is the corners' extreme.
    wc = worst_case(make(current_a=[0.005, 0.02, 0.025]))
    led = wc.nominal.led_string.results
    np.testing.assert_allclose(wc.check("led_current_rating").check.value, led["current_max_a"], rtol=1e-12)
    np.testing.assert_allclose(wc.check("resistor_rating").check.value, 2 * led["resistor_power_max_w"], rtol=1e-12)
    # Without any tolerance every corner is the nominal design: each check equals the stages' own result.
    # Every front-stage check applies: its windows, DC error, noise and stability inputs are all given; so does
    # every PWM check, with a PWM frequency.
    exact = make(
        supply_tolerance=0.0, resistor_tolerance=0.0, vf_min_v=2.0, vf_max_v=2.0, hfe_typ=100.0,
        output_offset_max_v=0.1,
        reference_v=6.0, input_low_headroom_v=2.0, input_high_headroom_v=2.0, output_low_headroom_v=1.2,
        output_high_headroom_v=1.4, rf_ohm=9e4, plus_input_ohm=1e3, input_bias_current_a=8e-8,
        input_offset_current_a=2e-8, output_error_max_v=0.05, adc_full_scale_v=10.0, adc_bits=12.0,
        voltage_noise_v_per_rthz=2e-8, current_noise_a_per_rthz=5e-13, second_pole_hz=2e6, output_resistance_ohm=75.0,
        load_capacitance_f=1e-9, pwm_frequency_hz=1e3,
    )  # fmt: skip
    wc = worst_case(exact)
    assert all(np.isfinite(c.limit[0]) for c in wc.nominal.checks)
    for c in wc.nominal.checks:
        assert wc.check(c.name).check.value[0] == pytest.approx(c.value[0], rel=1e-12), c.name
        assert wc.check(c.name).check.limit[0] == pytest.approx(c.limit[0], rel=1e-12, nan_ok=True), c.name


def test_nominal_pass_can_hide_a_worst_case_saturation_failure() -> None:
    # Forced beta 18 against hfe_min 18.5: Rb = 2.05 V × 18 / 49.12 mA = 751 Ω → 750 Ω, Ic_max/Ib = 17.97
    # passes at nominal; a +5 % base resistor makes it 18.87 ≥ 18.5.
    x = make(hfe_min=18.5, hfe_typ=40.0, forced_beta=18.0, vce_sat_forced_beta=20.0)
    assert review(x).ok[0]
    wc = worst_case(x)
    assert wc.failing() == [["saturation"]]
    sat = wc.check("saturation")
    assert sat.check.value[0] == pytest.approx((2 * 7.0 / 285) / (2.05 / (750 * 1.05)), rel=1e-12)
    assert sat.corner(0) == {
        "supply": "high",
        "vf": "min",
        "led_resistor": "low",
        "base_resistor": "high",
        "hfe": "min",
        "ambient": "cold",
    }
    assert sat.margin()[0] < 0


def test_worst_case_rejects_invalid_rows() -> None:
    with pytest.raises(DomainError):
        worst_case(make(hfe_typ=50.0))


# ---- Monte Carlo -----------------------------------------------------------------------------------------


def test_design_passing_worst_case_yields_exactly_one() -> None:
    assert worst_case(make()).ok[0]
    y = monte_carlo(make(), samples=10_000, seed=1)
    assert y.fraction == 1.0 and y.passed == 10_000
    assert y.most_failing_check is None and y.most_failing_values is None
    assert set(y.failures.values()) == {0}
    # Wilson interval at k = n: upper bound 1, lower bound n/(n + z²).
    assert y.ci_high == 1.0
    assert y.ci_low == pytest.approx(10_000 / (10_000 + Z_95**2), rel=1e-12)


def test_design_failing_at_nominal_yields_near_zero() -> None:
    # At nominal the strings carry 19.33 mA against a 14 mA rating; only builds near the lowest corner
    # (12.7 mA) pass.
    x = make(if_max_a=0.014)
    y = monte_carlo(x, samples=10_000, seed=2)
    assert y.fraction < 0.01
    assert y.most_failing_check == "led_current_rating"
    assert y.failures["led_current_rating"] == 10_000 - y.passed


def test_yield_matches_closed_form_for_a_uniform_supply() -> None:
    # Only the supply varies, uniform on 12 V ± 10 % = [10.8, 13.2] V. With 300 Ω, 3 × 2.0 V and 0.2 V fixed,
    # the string current (Vs − 6.2 V)/300 Ω stays within if_max = 6.4 V/300 Ω (21.33 mA) exactly when
    # Vs ≤ 12.6 V, so the passing fraction is (12.6 − 10.8)/(13.2 − 10.8) = 0.75.
    x = make(
        supply_tolerance=0.1, resistor_tolerance=0.0, vf_min_v=2.0, vf_max_v=2.0, hfe_typ=100.0, if_max_a=6.4 / 300
    )
    assert review(x).led_string.results["resistor_ohm"][0] == 300.0
    y = monte_carlo(x, samples=20_000, seed=3)
    expected = (12.6 - 10.8) / (13.2 - 10.8)
    assert y.ci_low <= expected <= y.ci_high
    assert [name for name, count in y.failures.items() if count] == ["led_current_rating"]


def test_yield_matches_closed_form_for_a_log_uniform_gain() -> None:
    # Only the gain varies, log-uniform on [20, 60] (hfe_max = 40 + (40 − 20)); with everything else fixed,
    # the switch saturates when hfe > β = Ic/Ib, so the passing fraction is ln(60/β)/ln(60/20).
    x = make(
        supply_tolerance=0.0,
        resistor_tolerance=0.0,
        vf_min_v=2.0,
        vf_max_v=2.0,
        hfe_min=20.0,
        hfe_typ=40.0,
        forced_beta=30.0,
        vce_sat_forced_beta=40.0,
        source_current_max_a=math.nan,
    )
    beta = float(review(x).check("saturation").value[0])
    assert 20 < beta < 60
    y = monte_carlo(x, samples=20_000, seed=4)
    expected = math.log(60 / beta) / math.log(3)
    assert y.ci_low <= expected <= y.ci_high
    assert y.most_failing_check == "saturation"


def test_under_driven_channel_loses_yield_to_saturation() -> None:
    x = make(hfe_min=20.0, hfe_typ=40.0, forced_beta=30.0, vce_sat_forced_beta=40.0, source_current_max_a=0.0025)
    assert "saturation" in worst_case(x).failing()[0]
    y = monte_carlo(x, samples=10_000, seed=5)
    assert 0 < y.fraction < 1
    assert y.most_failing_check == "saturation"
    assert y.most_failing_values is not None and y.most_failing_limits is not None
    assert y.most_failing_values.shape == (10_000,)
    # The kept samples are those the count came from: saturation fails where Ic/Ib ≥ hfe.
    assert int(np.count_nonzero(y.most_failing_values >= y.most_failing_limits)) == y.failures["saturation"]
    assert np.all((y.most_failing_limits >= 20.0) & (y.most_failing_limits <= 60.0))  # hfe_min … hfe_max


def test_many_leds_are_drawn_in_chunks() -> None:
    # 100 strings × 10 LEDs = 1,000 LED draws per sample: 5,000 samples take several chunks.
    x = make(
        supply_v=30.0,
        leds_in_series=10.0,
        strings=100.0,
        ic_max_a=5.0,
        power_max_w=5.0,
        if_max_a=0.022,
        source_current_max_a=math.nan,
        channels=1.0,
        current_max_a=10.0,
        **NO_FRONT_STAGE,
    )
    y = monte_carlo(x, samples=5_000, seed=6)
    assert 0 < y.fraction < 1
    assert y.most_failing_check == "led_current_rating"
    assert y.most_failing_values is not None and y.most_failing_values.shape == (5_000,)
    # The kept value is the worst of the 100 strings; no build exceeds the corners' highest current.
    highest = worst_case(x).check("led_current_rating").check.value[0]
    assert np.all(y.most_failing_values <= highest)
    assert int(np.count_nonzero(y.most_failing_values > 0.022)) == y.failures["led_current_rating"]


def test_seeded_runs_repeat_and_seeds_differ() -> None:
    x = make(hfe_min=20.0, hfe_typ=40.0, forced_beta=30.0, vce_sat_forced_beta=40.0, source_current_max_a=0.0025)
    a, b, c = monte_carlo(x, 5_000, seed=7), monte_carlo(x, 5_000, seed=7), monte_carlo(x, 5_000, seed=8)
    assert a.fraction == b.fraction and a.failures == b.failures
    np.testing.assert_array_equal(a.most_failing_values, b.most_failing_values)
    assert a.fraction != c.fraction


@pytest.mark.parametrize(
    ("samples", "seed", "field"),
    [
        (0, 0, "samples"),
        (MAX_SAMPLES + 1, 0, "samples"),
        (2.5, 0, "samples"),
        (True, 0, "samples"),
        (100, -1, "seed"),
        (100, 1.5, "seed"),
    ],
)
def test_monte_carlo_run_limits(samples: Any, seed: Any, field: str) -> None:
    assert [v.field for v in validate_monte_carlo(make(), samples, seed)] == [field]
    with pytest.raises(DomainError):
        monte_carlo(make(), samples, seed)


def test_monte_carlo_caps_led_draws_and_takes_one_row() -> None:
    # 1,000 strings × 10 LEDs × 1,000,000 samples = 1e10 LED draws, over the 1e8 cap: at most 10,000 samples.
    big = make(supply_v=30.0, leds_in_series=10.0, strings=1000.0)
    (violation,) = validate_monte_carlo(big, MAX_SAMPLES, 0)
    assert violation.field == "samples" and "10,000 samples" in violation.message
    assert validate_monte_carlo(big, 10_000, 0) == []
    with pytest.raises(ValueError, match="one row"):
        monte_carlo(make(current_a=[0.02, 0.01]))
    # Channel violations come first and keep their own fields.
    assert [v.field for v in validate_monte_carlo(make(channels=0.0), 100, 0)] == ["channels"]


# ---- Wilson interval -------------------------------------------------------------------------------------


def test_wilson_interval_against_newcombe_worked_examples() -> None:
    # R. G. Newcombe, "Two-sided confidence intervals for the single proportion: comparison of seven methods",
    # Statistics in Medicine 17 (1998), Table II, Wilson score method (values from memory, 4 decimals).
    for k, n, low, high in ((81, 263, 0.2553, 0.3662), (15, 148, 0.0624, 0.1605), (1, 29, 0.0061, 0.1718)):
        got_low, got_high = wilson_interval(k, n)
        assert round(float(got_low), 4) == low and round(float(got_high), 4) == high
    # 0 of 20: the interval is [0, z²/(n + z²)] in closed form.
    low, high = wilson_interval(0, 20)
    assert low == 0.0 and high == pytest.approx(Z_95**2 / (20 + Z_95**2), rel=1e-12)


def test_wilson_interval_against_scipy() -> None:
    for k, n in ((0, 1), (1, 1), (3, 10), (50, 100), (999, 1000), (12_345, 100_000)):
        ci = binomtest(k, n).proportion_ci(confidence_level=0.95, method="wilson")
        low, high = wilson_interval(k, n)
        assert float(low) == pytest.approx(ci.low, rel=1e-9, abs=1e-12)
        assert float(high) == pytest.approx(ci.high, rel=1e-9, abs=1e-12)


# ---- properties ------------------------------------------------------------------------------------------


@settings(max_examples=60, deadline=None, derandomize=True)
@given(row=channel_rows(), seed=st.integers(0, 2**32 - 1))
def test_property_yield_is_sound_and_bounded_by_the_worst_case(row: dict[str, Any], seed: int) -> None:
    x = rows_to_inputs([row])
    y = monte_carlo(x, samples=300, seed=seed)
    assert 0.0 <= y.fraction <= 1.0
    assert y.ci_low <= y.fraction <= y.ci_high
    assert all(math.isfinite(v) for v in (y.fraction, y.ci_low, y.ci_high))
    assert y.passed == round(y.fraction * 300)
    assert all(0 <= count <= 300 for count in y.failures.values())
    if y.most_failing_values is not None:
        assert np.all(np.isfinite(y.most_failing_values))
    again = monte_carlo(x, samples=300, seed=seed)
    assert again.fraction == y.fraction and again.failures == y.failures
    # Every build lies inside the corners' box: a check that passes at every corner (clear of rounding)
    # never fails a sample.
    wc = worst_case(x)
    for worst in wc.checks:
        margin = worst.margin()[0]
        if worst.check.ok[0] and not margin < 1e-9:
            assert y.failures[worst.name] == 0, worst.name
        # Checks that apply only when an optional input is given: those without a limit do not apply.
        optional = worst.name in OPTIONAL_CHECKS and math.isnan(worst.check.limit[0])
        if (wc.nominal.has_front_stage[0] or worst.name not in FRONT_CHECKS) and not optional:
            assert np.isfinite(worst.check.value[0]), worst.name


def test_a_reference_above_the_low_supply_corner_fails_the_windows_there() -> None:
    # 8 V reference on 8.2 V ±5 % (7.79-8.61 V): valid at nominal, above the rail at the low corner, where the
    # output's 9 V top (8 V + 1 V peak) and the input's top cannot fit below the rail.
    x = make(supply_v=8.2, current_a=0.005, output_headroom_v=0.1, reference_v=8.0, input_high_headroom_v=-0.1,
             output_high_headroom_v=0.05, amplitude_v=1.0, opamp_supply_min_v=5.0)  # fmt: skip
    wc = worst_case(x)
    for name in ("output_swing_high", "input_common_mode_high"):
        check = wc.check(name)
        assert not check.check.ok[0] and check.corner(0) == {"supply": "low"}, name
    assert wc.check("input_common_mode_high").check.limit[0] == pytest.approx(8.2 * 0.95 + 0.1)


def test_a_supply_corner_too_low_for_the_output_headroom_fails_the_swing() -> None:
    # 8 V with a battery band down to 5 V and 3 V of headroom to each rail: 2 V of swing room at nominal, none
    # at 5 V (2 × 3 V > 5 V): output_swing fails there instead of the review refusing the design.
    x = make(supply_v=8.0, supply_min_v=5.0, supply_max_v=8.4, current_a=0.005, output_headroom_v=3.0,
             amplitude_v=0.5, opamp_supply_min_v=4.0)  # fmt: skip
    check = worst_case(x).check("output_swing")
    assert not check.check.ok[0] and check.corner(0) == {"supply": "low"}
    assert check.check.limit[0] == pytest.approx(5.0 / 2 - 3.0)
