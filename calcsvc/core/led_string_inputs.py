"""The LED string's inputs (``led_string``) and their preconditions."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calcsvc.core import eseries, led_heat
from calcsvc.core.outcome import PRACTICAL_MAX, FloatArray, Rules, Violation, stacked_rows


@dataclass(frozen=True)
class LedStringInputs:
    supply_v: FloatArray
    supply_tolerance: FloatArray  # fraction, e.g. 0.05 for ±5 %
    vf_typ_v: FloatArray
    vf_min_v: FloatArray
    vf_max_v: FloatArray
    if_max_a: FloatArray  # LED maximum continuous forward current
    leds_in_series: FloatArray  # integers ≥ 1 held as floats
    strings: FloatArray  # integers ≥ 1 held as floats
    current_a: FloatArray  # target current per string
    switch_drop_v: FloatArray
    e_series: np.ndarray  # numpy str array, e.g. "E24"
    resistor_tolerance: FloatArray  # fraction; NaN → the series' default
    # Heat (``led_heat``); NaN knee: no current derating curve.
    ambient_c: FloatArray
    led_tj_max_c: FloatArray
    led_rth_jb_k_per_w: FloatArray
    led_rth_ba_k_per_w: FloatArray
    vf_tempco_v_per_k: FloatArray
    if_derating_knee_c: FloatArray
    resistor_rated_to_c: FloatArray
    resistor_zero_power_c: FloatArray


def string_drop(inputs: LedStringInputs) -> FloatArray:
    """Nominal forward voltage of one string plus the switch drop (V)."""
    return inputs.leds_in_series * inputs.vf_typ_v + inputs.switch_drop_v


# The inputs ``plainly_valid`` bounds, in the order of its rows, with closed bounds inside every rule of
# ``validate`` that reads each alone (positive: at least the smallest positive float; a fraction below 1: at most
# the float below 1) and the magnitudes the service computes with. Resistor tolerance, optional, comes last.
_BOUNDED = ("supply_v", "supply_tolerance", "vf_typ_v", "vf_min_v", "vf_max_v", "if_max_a", "leds_in_series",
            "strings", "current_a", "switch_drop_v", "resistor_tolerance")  # fmt: skip
_POSITIVE = np.nextafter(0.0, 1.0)
_BELOW_ONE = np.nextafter(1.0, 0.0)
_LOW = np.array([_POSITIVE, 0.0, -PRACTICAL_MAX, _POSITIVE, -PRACTICAL_MAX, _POSITIVE, 1.0, 1.0, _POSITIVE, 0.0, 0.0])
_HIGH = np.array([PRACTICAL_MAX, _BELOW_ONE, *[PRACTICAL_MAX] * 8, _BELOW_ONE])


def plainly_valid(i: LedStringInputs) -> bool:
    """True only when no rule of ``validate`` can object: one combined test in a few array operations, so the
    usual call skips judging the rules one by one and writing their messages (it may say False of valid inputs;
    the rules then decide)."""
    x = stacked_rows(i, _BOUNDED)
    if x is None:
        return False
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        good = (x >= _LOW[:, None]) & (x <= _HIGH[:, None])  # NaN fails: all but the last must be given
        good[-1] |= np.isnan(x[-1])
        whole = x[6:8]
        good[6:8] &= whole == np.floor(whole)
        drop = string_drop(i)
        r_exact = (i.supply_v - drop) / i.current_a
        # A resistor of at least MIN_VALUE (> 0) also means the supply exceeds the string's drop.
        good[0] &= (r_exact >= eseries.MIN_VALUE) & (r_exact <= eseries.MAX_VALUE)
        good[2] &= (i.vf_typ_v >= i.vf_min_v) & (i.vf_typ_v <= i.vf_max_v)
    return bool(good.all()) and eseries.all_known(i.e_series) and led_heat.plainly_valid(i)


def validate(inputs: LedStringInputs) -> list[Violation]:
    """Every physical precondition, per row; never raises."""
    if plainly_valid(inputs):
        return []
    rules = Rules()
    i = inputs
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        required = {
            "supply_v": i.supply_v,
            "supply_tolerance": i.supply_tolerance,
            "vf_typ_v": i.vf_typ_v,
            "vf_min_v": i.vf_min_v,
            "vf_max_v": i.vf_max_v,
            "if_max_a": i.if_max_a,
            "leds_in_series": i.leds_in_series,
            "strings": i.strings,
            "current_a": i.current_a,
            "switch_drop_v": i.switch_drop_v,
        }
        rules.finite(required)
        rules.require(
            np.isinf(i.resistor_tolerance), "resistor_tolerance", "resistor_tolerance must be finite when given"
        )

        rules.require(i.supply_v <= 0, "supply_v", "supply_v ({} V) must be positive", i.supply_v)
        ts = i.supply_tolerance
        rules.require(
            (ts < 0) | (ts >= 1), "supply_tolerance", "supply_tolerance ({}) must be a fraction in [0, 1)", ts
        )
        rules.require(i.vf_min_v <= 0, "vf_min_v", "vf_min_v ({} V) must be positive", i.vf_min_v)
        rules.require(
            (i.vf_typ_v < i.vf_min_v) | (i.vf_typ_v > i.vf_max_v),
            "vf_typ_v",
            "vf_typ_v ({} V) must lie between vf_min_v ({} V) and vf_max_v ({} V)",
            i.vf_typ_v,
            i.vf_min_v,
            i.vf_max_v,
        )
        rules.require(i.if_max_a <= 0, "if_max_a", "if_max_a ({} A) must be positive", i.if_max_a)
        rules.require(i.current_a <= 0, "current_a", "current_a ({} A) must be positive", i.current_a)
        for name, x in (("leds_in_series", i.leds_in_series), ("strings", i.strings)):
            bad = np.isfinite(x) & ((x < 1) | (x != np.floor(x)))
            rules.require(bad, name, f"{name} ({{}}) must be a whole number of at least 1", x)
        sw = i.switch_drop_v
        rules.require(sw < 0, "switch_drop_v", "switch_drop_v ({} V) must not be negative", sw)
        rt = i.resistor_tolerance
        bad = ~np.isnan(rt) & ((rt < 0) | (rt >= 1))
        rules.require(bad, "resistor_tolerance", "resistor_tolerance ({}) must be a fraction in [0, 1) when given", rt)
        eseries.require_known_series(rules, i.e_series)

        # The key rule: with the supply at or below the string's drop there is nothing left for the resistor.
        drop = string_drop(i)
        rules.require(
            i.supply_v <= drop,
            "supply_v",
            "supply_v ({} V) must exceed the string's forward voltage plus switch drop ({} V = {} × {} V + {} V)",
            i.supply_v,
            drop,
            i.leds_in_series,
            i.vf_typ_v,
            sw,
        )
        rules.practical(required | {"resistor_tolerance": rt})
        led_heat.require_all(rules, i)
        v = rules.violations()
        if not v:
            # Only when everything else holds: the exact resistor must lie where standard values are defined.
            r_exact = (i.supply_v - drop) / i.current_a
            rules = Rules()
            rules.require(
                (r_exact < eseries.MIN_VALUE) | (r_exact > eseries.MAX_VALUE),  # inf counts as too large
                "current_a",
                "current_a ({} A) gives a resistor of {} Ω, outside any practical range",
                i.current_a,
                r_exact,
            )
            v = rules.violations()
    return v
