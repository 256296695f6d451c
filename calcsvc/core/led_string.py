"""LED string series resistor ("led-string").

Model
    Each string is ``leds_in_series`` (N) LEDs in series with its own resistor R, fed from the supply
    through a switch that drops ``switch_drop_v``. The LEDs are modelled as constant voltage drops, so by
    Kirchhoff's voltage law and Ohm's law the resistor carries

        V_R = Vs − N·Vf − Vsw,        I = V_R / R.

    The nominal design uses the typical forward voltage; R is the smallest standard value (of the row's
    IEC 60063 series) at or above V_R/I_target, so the nominal current never exceeds the target.

Worst case
    The supply varies by ±``supply_tolerance`` (fraction), the LED drop between ``vf_min_v`` and
    ``vf_max_v``, the resistor by ±``resistor_tolerance`` (default: the series' customary tolerance).
    The current is monotonic in each, so its extremes lie at the corners:

        I_min = (Vs(1−ts) − N·Vf_max − Vsw) / (R(1+tr))   (clamped at 0: the string may stay dark)
        I_max = (Vs(1+ts) − N·Vf_min − Vsw) / (R(1−tr))

    and the resistor's highest dissipation is (Vs(1+ts) − N·Vf_min − Vsw)² / (R(1−tr)).

Heat (``led_heat``)
    At ``ambient_c`` the strings settle at their coupled electro-thermal point (``thermal.led_operating_point``,
    the channel review's solve): the LED junctions, the hot currents, the resistor's hot spot and derated
    rating, and the checks ``led_junction_temperature``, ``led_thermal_runaway``, ``resistor_derated_power``
    and a hot ``led_current_rating`` against the LED's derated maximum. The resistor is still chosen for the
    target current at the typical forward voltage (``design``).

Assumptions
    Constant-voltage LED model (adequate once the LED conducts; the tests compare it with the Shockley
    diode equation); the switch is a constant drop; strings are identical and independent; resistor
    derating to twice the worst-case dissipation (common practice). Units: volts, amperes, ohms, watts.
"""

from __future__ import annotations

import numpy as np

from calcsvc.core import blocks, eseries, led_heat, thermal_inputs
from calcsvc.core.led_string_inputs import LedStringInputs, string_drop, validate
from calcsvc.core.outcome import Check, FloatArray, Notice, Outcome, add_notices
from calcsvc.core.spec import E_SERIES, CalculationSpec, Input, Result, Role, columns_as, positive

NAME = "led-string"
VERSION = "3"

# Common resistor power ratings, watts (common practice).
POWER_RATINGS_W = np.array([0.125, 0.25, 0.5, 1.0, 2.0, 3.0, 5.0])
_RATING_OR_NONE = np.append(POWER_RATINGS_W, np.nan)  # past the largest: none is enough
DERATING_FACTOR = 2.0  # choose a rating at least twice the worst-case dissipation (common practice)
HEADROOM_FRACTION = 0.1  # at least 10 % of the supply across the resistor to regulate (common practice)
HOT_RESISTOR_W = 0.5  # a resistor dissipating this much runs noticeably hot (common practice)
HIGH_POWER_LED_A = 0.35  # LEDs rated for this much current are "high-power" parts (common practice)


def string_current(headroom_v: np.ndarray, resistor_ohm: np.ndarray | float) -> np.ndarray:
    """Ohm's law across a string's resistor, zero where the supply does not reach the string's drop (dark)."""
    return np.maximum(headroom_v, 0.0) / resistor_ohm


def minimum_rating_w(dissipation_w: FloatArray) -> FloatArray:
    """The smallest standard power rating that fits a resistor dissipating ``dissipation_w`` at worst: at least
    DERATING_FACTOR times it (common practice), per row; NaN when no rating up to the largest is enough."""
    # The first rating at or above the need (the ratings ascend; NaN sorts after them all): one pass a row.
    return _RATING_OR_NONE[np.searchsorted(POWER_RATINGS_W, DERATING_FACTOR * dissipation_w)]


def compute(inputs: LedStringInputs, validated: bool = False) -> Outcome:
    """The constant-drop design (``design``) and its heat at ``ambient_c`` (``led_heat``), whose hot worst-case
    ``led_current_rating`` replaces the constant-drop one.

    Raises DomainError when any row violates ``validate``; ``validated``: the caller has just validated these very
    inputs.
    """
    return blocks.evaluate(inputs, validate, _designed_with_heat, validated)


def _designed_with_heat(inputs: LedStringInputs) -> Outcome:
    cold, r_low = _design(inputs)
    rating = cold.results["resistor_rating_w"]
    heat = led_heat.outcome(
        inputs, cold.results["resistor_ohm"], r_low, np.where(np.isnan(rating), POWER_RATINGS_W[-1], rating)
    )
    hot = {c.name: c for c in heat.checks}
    return Outcome(
        results={**cold.results, **heat.results},
        checks=[hot.pop(c.name, c) for c in cold.checks] + list(hot.values()),
        warnings=cold.warnings + heat.warnings,
        cautions=cold.cautions + heat.cautions,
    )


def design(inputs: LedStringInputs) -> Outcome:
    """Choose each string's resistor and give nominal and worst-case current and dissipation with constant
    forward voltages (the module's model); the channel review judges heat in its own stage. ``inputs`` must
    have passed ``validate``."""
    return _design(inputs)[0]


def _design(inputs: LedStringInputs) -> tuple[Outcome, FloatArray]:
    """``design`` and the resistor's lowest value, which its heat is judged at."""
    i = inputs
    n = i.supply_v.shape[0]
    vs, ts, nl = i.supply_v, i.supply_tolerance, i.leds_in_series
    tr = eseries.tolerance_rows(i.resistor_tolerance, i.e_series)

    v_r = vs - string_drop(i)
    r_exact = v_r / i.current_a
    r = eseries.pick_at_or_above_rows(r_exact, i.e_series)
    current = string_current(v_r, r)

    v_r_low = vs * (1.0 - ts) - nl * i.vf_max_v - i.switch_drop_v
    v_r_high = vs * (1.0 + ts) - nl * i.vf_min_v - i.switch_drop_v  # > 0: Vs > N·Vf_typ + Vsw ≥ N·Vf_min + Vsw
    r_low, r_high = r * (1.0 - tr), r * (1.0 + tr)
    current_min = string_current(v_r_low, r_high)
    current_max = string_current(v_r_high, r_low)
    power = current**2 * r
    power_max = v_r_high**2 / r_low
    need_w = DERATING_FACTOR * power_max
    rating = minimum_rating_w(power_max)
    led_power = nl * i.vf_typ_v * current

    results: dict[str, np.ndarray] = {
        "resistor_exact_ohm": r_exact,
        "resistor_ohm": r,
        "current_a": current,
        "current_min_a": current_min,
        "current_max_a": current_max,
        "resistor_power_w": power,
        "resistor_power_max_w": power_max,
        "resistor_rating_w": rating,
        "led_power_w": led_power,
        "total_current_a": i.strings * current,
        "efficiency": nl * i.vf_typ_v / vs,
        "headroom_v": v_r,
    }

    headroom_limit = HEADROOM_FRACTION * vs
    max_rating = np.full(n, POWER_RATINGS_W[-1])
    checks = [
        Check(
            "led_current_rating",
            current_max <= i.if_max_a,
            current_max,
            i.if_max_a.astype(np.float64),
            "max",
            "Worst-case string current (high supply, low forward voltage, low resistor) must not exceed the "
            "LED's maximum forward current.",
        ),
        Check(
            "headroom",
            v_r >= headroom_limit,
            v_r,
            headroom_limit,
            "min",
            "At least 10 % of the supply should fall across the resistor so it can regulate the current "
            "(common practice).",
        ),
        Check(
            "resistor_rating",
            need_w <= max_rating,
            need_w,
            max_rating,
            "max",
            "Twice the resistor's worst-case dissipation (common-practice derating) must fit a standard "
            "rating up to 5 W.",
        ),
    ]

    warnings: list[Notice] = []
    cautions: list[Notice] = []
    add_notices(
        warnings,
        [
            (
                v_r < headroom_limit,
                "Less than 10 % of the supply is across the resistor: the current will vary widely with supply "
                "voltage and LED forward voltage.",
            ),
            (
                current_min <= 0.0,
                "At low supply and high forward voltage the worst-case current is zero: the string may not light.",
            ),
        ],
    )
    add_notices(
        cautions,
        [
            (
                power_max >= HOT_RESISTOR_W,
                "The resistor dissipates 0.5 W or more in the worst case and runs hot: keep it clear of plastics, "
                "wiring and fingers.",
            ),
            (
                i.if_max_a >= HIGH_POWER_LED_A,
                "High-power LEDs: provide heat-sinking for the LEDs, and do not look into them at close range (eye "
                "safety).",
            ),
            (
                current_max > i.if_max_a,
                "The worst-case current exceeds the LED's maximum forward current: the LEDs can overheat and fail "
                "early.",
            ),
            (
                need_w > max_rating,
                "No standard resistor rating up to 5 W is adequate: the resistor would overheat; use a different "
                "supply voltage, more LEDs per string, or a constant-current driver.",
            ),
        ],
    )
    return Outcome(results=results, checks=checks, warnings=warnings, cautions=cautions), r_low


# ---- declaration --------------------------------------------------------------------------------------------

SPEC = CalculationSpec(
    name=NAME,
    summary="Series resistor, worst-case current and dissipation of LED strings on one supply",
    version=VERSION,
    inputs=(
        positive("supply_v", "V", "supply voltage"),
        Input("supply_tolerance", "dimensionless", "supply tolerance as a fraction", 0.0, minimum=0, maximum=1),
        positive("vf_typ_v", "V", "typical LED forward voltage"),
        positive("vf_min_v", "V", "lowest LED forward voltage"),
        positive("vf_max_v", "V", "highest LED forward voltage"),
        positive("if_max_a", "A", "LED continuous current rating"),
        Input("leds_in_series", "dimensionless", "LEDs in each string", minimum=1, maximum=1000, integer=True),
        Input(
            "strings",
            "dimensionless",
            "parallel strings, each with its own resistor",
            1,
            minimum=1,
            maximum=10000,
            integer=True,
        ),
        positive("current_a", "A", "target current per string"),
        Input("switch_drop_v", "V", "voltage lost in the switch (a transistor's Vce_sat)", 0.0, minimum=0),
        Input("e_series", "", "standard resistor series", "E24", choices=E_SERIES),
        Input(
            "resistor_tolerance",
            "dimensionless",
            "resistor tolerance; absent: the series' own",
            optional=True,
            minimum=0,
            maximum=1,
        ),
        thermal_inputs.AMBIENT_C,
        *thermal_inputs.LED,
    ),
    roles=(
        Role("supply", "supply", (("supply_v", "supply_v"), ("supply_tolerance", "supply_tolerance"))),
        Role(
            "led",
            "led",
            (
                *((p, p) for p in ("vf_typ_v", "vf_min_v", "vf_max_v", "if_max_a")),
                *thermal_inputs.LED_PARAMETERS,
            ),
        ),
        Role("transistor", "bjt", (("vce_sat_v", "switch_drop_v"),)),
    ),
    results=(
        Result("resistor_exact_ohm", "ohm", "resistor giving exactly the target current"),
        Result("resistor_ohm", "ohm", "smallest standard value not below the exact one"),
        Result("current_a", "A", "nominal current per string with resistor_ohm"),
        Result("current_min_a", "A", "worst-case lowest current per string"),
        Result("current_max_a", "A", "worst-case highest current per string"),
        Result("resistor_power_w", "W", "nominal resistor dissipation"),
        Result("resistor_power_max_w", "W", "worst-case resistor dissipation"),
        Result("resistor_rating_w", "W", "smallest standard rating of at least twice the worst case"),
        Result("led_power_w", "W", "power in the LEDs of one string"),
        Result("total_current_a", "A", "current of all strings"),
        Result("efficiency", "", "LED power / supply power"),
        Result("headroom_v", "V", "nominal voltage across the resistor"),
        Result("current_hot_a", "A", "nominal string current at its coupled electro-thermal point at ambient_c"),
        Result("led_junction_c", "°C", "nominal LED junction temperature at that point"),
        Result("string_vf_hot_v", "V", "nominal string forward voltage at that junction temperature"),
        Result("thermal_iterations", "", "solves the nominal coupled point needed: 1 (closed form), 0 in runaway"),
        Result("current_max_hot_a", "A", "worst-case highest string current at its coupled point"),
        Result("led_junction_max_c", "°C", "worst-case hottest LED junction (absent: thermal runaway)"),
        Result("led_current_limit_a", "A", "LED's maximum current derated to ambient_c"),
        Result("resistor_power_max_hot_w", "W", "worst-case resistor dissipation at the hot current"),
        Result("resistor_hot_spot_c", "°C", "resistor hot spot at that dissipation (IEC 60115-1 curve)"),
        Result("resistor_derated_limit_w", "W", "resistor_rating_w derated to ambient_c"),
    ),
    make_inputs=lambda c: columns_as(LedStringInputs, c),
    validate=validate,
    compute=compute,
)
