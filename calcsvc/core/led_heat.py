"""Heat in one LED string design (``led_string``): the strings' coupled electro-thermal point at ``ambient_c``
and the thermal checks, with the channel review's models and check names (``channel_thermal``).

The point is ``thermal.led_operating_point`` (the review's solve, no second model): a warm string's forward
voltage falls by ``vf_tempco_v_per_k`` per LED and kelvin, so it draws more current than the constant-drop
design says, which heats it further. Per LED Rθ = ``led_rth_jb_k_per_w`` + ``led_rth_ba_k_per_w``.

Worst case (two-sided, each check at the corner worst for it)
    The currents and dissipations rise with the headroom H (supply at +tolerance, less the switch drop) and
    fall with R (taken at −tolerance). In the forward voltage they are not monotonic: per LED P = u·(H − N·u)/R
    with u = Vf25 + k·(Tj − 25) the hot forward voltage, a parabola whose top u = H/(2N) gives the bound
    Tj ≤ T* = Ta + Rθ·H²/(4N·R). So four forward voltages (at 25 °C) are solved, each clipped to
    [vf_min_v, vf_max_v]: both ends, H/(2N) − k·(T* − 25) (where the hottest stable junction reaches T*) and
    H/(2N) − k·(Tj,max − 25) (the most heat at Tj,max, for runaway); each check takes the worst of them.

Checks (names as the channel review's)
    - ``led_junction_temperature``: the hottest junction 20 K below ``led_tj_max_c`` (common practice);
    - ``led_thermal_runaway``: the heat at ``led_tj_max_c`` must not drive the junction higher (else no stable
      point exists: a failing check, never an error);
    - ``resistor_derated_power``: the hot dissipation within the chosen rating derated by the IEC 60115-1 curve
      (from memory: full to 70 °C, zero at 155 °C);
    - ``led_current_rating`` (replacing the constant-drop one): the hot worst-case current against the LED's
      maximum derated linearly from ``if_derating_knee_c`` to zero at ``led_tj_max_c`` where a knee is given.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from calcsvc.core import thermal
from calcsvc.core.outcome import Check, FloatArray, Notice, Outcome, Rules, Violation, add_notices, stacked_rows

if TYPE_CHECKING:  # ``led_string`` builds on this module: its inputs type is for the annotations only
    from calcsvc.core.channel_inputs import ChannelInputs
    from calcsvc.core.led_string_inputs import LedStringInputs

ABSOLUTE_ZERO_C = -273.15
DETAILS = {
    "led_junction_temperature": "The hottest LED junction (worst forward-voltage corner at the high supply and low "
    "resistor, at the coupled electro-thermal point) must stay 20 K below led_tj_max_c (common practice).",
    "led_thermal_runaway": "At led_tj_max_c the string's own heat must not drive its junction higher: otherwise there "
    "is no stable operating point below led_tj_max_c (thermal runaway).",
    "resistor_derated_power": "The string resistor's hot worst-case dissipation must stay within its rating derated "
    "by the IEC 60115-1 curve (full to 70 °C, zero at 155 °C; from memory).",
    "led_current_rating": "The hot worst-case string current (high supply, low forward voltage, low resistor, at the "
    "coupled electro-thermal point) must not exceed the LED's maximum forward current, derated from "
    "if_derating_knee_c where given.",
}


def validate(i: LedStringInputs | ChannelInputs) -> list[Violation]:
    """The thermal inputs' preconditions (the channel review's too: its inputs carry the same names); never
    raises."""
    rules = Rules()
    require_all(rules, i)
    return rules.violations()


def require_all(rules: Rules, i: LedStringInputs | ChannelInputs) -> None:
    """Add the thermal inputs' preconditions to ``rules`` (a calculation judging them with its own)."""
    with np.errstate(invalid="ignore"):
        names = ("ambient_c", "led_tj_max_c", "led_rth_jb_k_per_w", "led_rth_ba_k_per_w", "vf_tempco_v_per_k",
                 "resistor_rated_to_c", "resistor_zero_power_c")  # fmt: skip
        rules.finite({name: getattr(i, name) for name in names})
        ta = i.ambient_c
        rules.require(ta <= ABSOLUTE_ZERO_C, "ambient_c", "ambient_c ({} °C) must lie above absolute zero", ta)
        tj_max = i.led_tj_max_c
        message = "led_tj_max_c ({} °C) must exceed 25 °C, where ratings are stated, and ambient_c"
        rules.require(tj_max <= np.maximum(ta, thermal.REFERENCE_C), "led_tj_max_c", message, tj_max)
        for name in ("led_rth_jb_k_per_w", "led_rth_ba_k_per_w"):
            x = getattr(i, name)
            rules.require(x < 0, name, f"{name} ({{}} K/W) must be at least 0", x)
        k = i.vf_tempco_v_per_k
        rules.require(k > 0, "vf_tempco_v_per_k", "vf_tempco_v_per_k ({} V/K) must not be positive", k)
        bad = (i.vf_min_v > 0) & (i.vf_min_v + k * (tj_max - thermal.REFERENCE_C) <= 0)
        message = "vf_tempco_v_per_k ({} V/K) takes the lowest forward voltage to 0 V or below before led_tj_max_c"
        rules.require(bad, "vf_tempco_v_per_k", message, k)
        zero = i.resistor_zero_power_c
        message = "resistor_zero_power_c ({} °C) must exceed resistor_rated_to_c"
        rules.require(zero <= i.resistor_rated_to_c, "resistor_zero_power_c", message, zero)
        knee = i.if_derating_knee_c
        message = "if_derating_knee_c ({} °C) must lie below led_tj_max_c"
        rules.require(knee >= tj_max, "if_derating_knee_c", message, knee)


_BOUNDED = ("ambient_c", "led_tj_max_c", "led_rth_jb_k_per_w", "led_rth_ba_k_per_w", "vf_tempco_v_per_k",
            "resistor_rated_to_c", "resistor_zero_power_c")  # fmt: skip
_BIG = np.finfo(np.float64).max
_LOW = np.array([np.nextafter(ABSOLUTE_ZERO_C, np.inf), -_BIG, 0.0, 0.0, -_BIG, -_BIG, -_BIG])[:, None]
_HIGH = np.array([_BIG, _BIG, _BIG, _BIG, 0.0, _BIG, _BIG])[:, None]


def plainly_valid(i: LedStringInputs | ChannelInputs) -> bool:
    """True only when no rule of ``require_all`` can object: the usual call passes this in a few array operations
    and skips judging the rules one by one (it may say False of valid inputs; the rules then decide)."""
    x = stacked_rows(i, (*_BOUNDED, "vf_min_v", "if_derating_knee_c"))
    if x is None:
        return False
    ta, tj_max, k, rated_to, zero, vf_min, knee = x[0], x[1], x[4], x[5], x[6], x[7], x[8]
    with np.errstate(invalid="ignore", over="ignore"):
        good = (x[:7] >= _LOW) & (x[:7] <= _HIGH)  # NaN fails: these inputs must be finite numbers
        good[0] &= tj_max > np.maximum(ta, thermal.REFERENCE_C)
        good[1] &= vf_min + k * (tj_max - thermal.REFERENCE_C) > 0
        good[2] &= (zero > rated_to) & ~(knee >= tj_max)
    return bool(good.all())


def _point(i: LedStringInputs, supply_v: FloatArray, vf_v: FloatArray, resistor_ohm: FloatArray) -> thermal.LedPoint:
    return thermal.led_operating_point(
        supply_v - i.switch_drop_v,
        i.leds_in_series * vf_v,
        resistor_ohm,
        i.leds_in_series,
        i.vf_tempco_v_per_k,
        i.led_rth_jb_k_per_w + i.led_rth_ba_k_per_w,
        i.ambient_c,
        i.led_tj_max_c,
    )


def worst_forward_voltages(i: LedStringInputs, supply_v: FloatArray, resistor_ohm: FloatArray) -> FloatArray:
    """The four forward voltages at 25 °C (shape ``(4, n)``) at which the worst case is solved (module docstring)."""
    head = supply_v - i.switch_drop_v
    top = head / (2.0 * i.leds_in_series)  # the hot forward voltage at which the LEDs dissipate most
    bound = i.ambient_c + (i.led_rth_jb_k_per_w + i.led_rth_ba_k_per_w) * head**2 / (
        4.0 * i.leds_in_series * resistor_ohm
    )
    at_bound = top - i.vf_tempco_v_per_k * (np.minimum(bound, i.led_tj_max_c) - thermal.REFERENCE_C)
    at_max = top - i.vf_tempco_v_per_k * (i.led_tj_max_c - thermal.REFERENCE_C)
    return np.clip(np.array([i.vf_min_v, i.vf_max_v, at_bound, at_max]), i.vf_min_v, i.vf_max_v)


def outcome(
    i: LedStringInputs, resistor_ohm: FloatArray, resistor_low_ohm: FloatArray, rating_w: FloatArray
) -> Outcome:
    """The thermal results, checks and cautions of designs with string resistor ``resistor_ohm`` (its lowest
    value ``resistor_low_ohm``) of power rating ``rating_w``."""
    ta = i.ambient_c
    high_supply = i.supply_v * (1.0 + i.supply_tolerance)
    # One solve for the nominal point (row 0) and the four worst-case forward voltages (rows 1–4): a single
    # call's cost is mostly per numpy operation, not per row.
    both = _point(
        i,
        np.array([i.supply_v, high_supply, high_supply, high_supply, high_supply]),
        np.concatenate([i.vf_typ_v[None], worst_forward_voltages(i, high_supply, resistor_low_ohm)]),
        np.array([resistor_ohm, resistor_low_ohm, resistor_low_ohm, resistor_low_ohm, resistor_low_ohm]),
    )
    hottest = _hottest(both)[1:].max(axis=0)
    heating = both.heating_at_max_c[1:].max(axis=0)
    runaway = both.runaway[1:].any(axis=0)
    current_max = both.current_a[1:].max(axis=0)
    resistor_power = current_max**2 * resistor_low_ohm
    resistor_limit = rating_w * thermal.resistor_derating(ta, i.resistor_rated_to_c, i.resistor_zero_power_c)
    current_limit = i.if_max_a * thermal.current_derating(ta, i.if_derating_knee_c, i.led_tj_max_c)
    junction_limit = i.led_tj_max_c - thermal.JUNCTION_MARGIN_K
    found = {
        "led_current_rating": (current_max, current_limit),
        "led_junction_temperature": (hottest, junction_limit),
        "led_thermal_runaway": (heating, i.led_tj_max_c),
        "resistor_derated_power": (resistor_power, resistor_limit),
    }
    results = {
        "current_hot_a": both.current_a[0],
        "led_junction_c": both.junction_c[0],
        "string_vf_hot_v": both.string_vf_v[0],
        "thermal_iterations": both.iterations[0].astype(np.float64),
        "current_max_hot_a": current_max,
        "led_junction_max_c": np.where(runaway, np.nan, hottest),
        "led_current_limit_a": current_limit,
        "resistor_power_max_hot_w": resistor_power,
        "resistor_hot_spot_c": thermal.resistor_hot_spot(
            ta, resistor_power, rating_w, i.resistor_rated_to_c, i.resistor_zero_power_c
        ),
        "resistor_derated_limit_w": resistor_limit,
    }
    checks = [
        Check(name, np.asarray(value <= limit), np.asarray(value, dtype=float), np.asarray(limit, dtype=float), "max",
              DETAILS[name])
        for name, (value, limit) in found.items()
    ]  # fmt: skip
    return Outcome(results=results, checks=checks, cautions=_cautions(i, results, runaway))


def _hottest(point: thermal.LedPoint) -> FloatArray:
    """The junction, or where the string runs away, the temperature its heat at Tj,max drives it to."""
    return np.where(point.runaway, point.heating_at_max_c, point.junction_c)


def _cautions(i: LedStringInputs, results: dict[str, np.ndarray], runaway: np.ndarray) -> list[Notice]:
    found: list[Notice] = []
    hot = runaway | (results["resistor_hot_spot_c"] > thermal.TOUCH_SAFE_C)
    hot |= results["led_junction_max_c"] > thermal.TOUCH_SAFE_C
    warm = i.ambient_c >= thermal.WARM_ENCLOSURE_C
    over = results["current_max_hot_a"] > results["led_current_limit_a"]
    add_notices(
        found,
        [
            (
                hot,
                "Hot surfaces: the string resistor or the LEDs run above 60 °C at this ambient; keep them clear of "
                "fingers, plastics, wiring and plant material.",
            ),
            (warm, thermal.WARM_CAUTION),
            (runaway, thermal.RUNAWAY_CAUTION),
            (over, "The hot worst-case current exceeds the LED's maximum at this ambient: the LEDs can overheat."),
            (hot | warm | over, thermal.ASSUMPTIONS_CAUTION),  # wherever a temperature is relied upon
        ],
    )
    return found
