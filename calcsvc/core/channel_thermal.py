"""Heat in a reviewed channel: each part's temperature at the ambient, and the thermal checks.

The LED strings are solved at their coupled electro-thermal point (``thermal.led_operating_point``): a hot
string's forward voltage falls, so it draws more current than the cold design says, which heats it further.
That point's current then sets the resistor's and the transistor's dissipation. Models (``thermal``):

- transistor (an NPN, or a MOSFET with P = I²·Rds(Tj)·D + switching at its self-heated junction,
  ``channel_mosfet``): Tj = Ta + P·Rθ with Rθ = Rθja as given, else (Tj,max − 25 °C)/P_rated (the rating at 25 °C
  without a heat sink); with a heat sink Rθ = Rθjc + the sink's figure. Its derated limit (Tj,max − Ta)/Rθ,
  capped at the rating without a heat sink. P is averaged over the PWM period (the period is far shorter than
  the package's thermal time constant, common practice);
- LED: Rθ = junction to board + board to ambient per LED; Tj,max with a 20 K margin (common practice);
  maximum current derated linearly from the part's knee to zero at its Tj,max, where a knee is given (the
  limit of the worst case's ``led_current_rating`` at each corner's ambient);
- string resistor: the IEC 60115-1 curve (from memory: full power to 70 °C, none at 155 °C), applied to the
  rating the LED stage chose; its hot spot from the same curve.

The nominal review evaluates these at ``ambient_c``; the worst case (``tolerance``) at the two ends of the
ambient range with every other tolerance, and the Monte Carlo at both ends for every build.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from calcsvc.core import channel_mosfet, led_heat, led_string, pwm_timing, switch_heat, thermal
from calcsvc.core.channel_inputs import ChannelInputs
from calcsvc.core.outcome import Check, FloatArray, Notice, Outcome, Violation, add_notice, first_bad, require

Row = Callable[[np.ndarray], np.ndarray]
CheckArrays = tuple[np.ndarray, np.ndarray, np.ndarray]  # value, limit, ok

ABSOLUTE_ZERO_C = -273.15

DETAILS = {
    "led_junction_temperature": "Each LED's junction at the coupled electro-thermal point must stay 20 K below its "
    "tj_max_c (common practice).",
    "led_thermal_runaway": "At tj_max_c the string's own heat must not drive its junction higher: otherwise there is "
    "no stable operating point below tj_max_c (thermal runaway).",
    "resistor_derated_power": "The string resistor's dissipation must stay within its rating derated by the "
    "IEC 60115-1 curve (full to 70 °C, zero at 155 °C; from memory).",
    "transistor_junction_temperature": "The transistor's junction (Ta + P·Rθ) must stay 20 K below its tj_max_c "
    "(common practice).",
    "transistor_derated_power": "The transistor's average dissipation must not exceed (tj_max_c − Ta)/Rθ, its rating "
    "derated to the ambient.",
}
CHECKS = tuple(DETAILS)


def ambient_range(i: ChannelInputs) -> tuple[FloatArray, FloatArray]:
    """The coldest and hottest ambient in service; absent: ``ambient_c``."""
    return (
        np.where(np.isnan(i.ambient_min_c), i.ambient_c, i.ambient_min_c),
        np.where(np.isnan(i.ambient_max_c), i.ambient_c, i.ambient_max_c),
    )


def transistor_rth(i: ChannelInputs) -> tuple[FloatArray, FloatArray]:
    """The transistor's junction-to-ambient Rθ and the cap on its derated limit (no cap with a heat sink)."""
    return thermal.transistor_rth(i.tj_max_c, i.power_max_w, i.rth_ja_k_per_w, i.rth_jc_k_per_w, i.heatsink_k_per_w)


def led_point(
    i: ChannelInputs,
    row: Row,
    supply_v: np.ndarray,
    string_vf_v: np.ndarray,
    resistor_ohm: np.ndarray,
    ambient_c: np.ndarray,
    switch_ohm: np.ndarray | float = 0.0,
) -> thermal.LedPoint:
    """The strings' coupled point; ``row`` shapes a per-row input to broadcast against the other arrays.
    ``switch_ohm``: the resistance a MOSFET adds in series with each string (``channel_mosfet``); a bipolar
    switch drops its fixed vce_sat_v instead."""
    return thermal.led_operating_point(
        supply_v - row(fixed_drop(i)),
        string_vf_v,
        resistor_ohm + switch_ohm,
        row(i.leds_in_series),
        row(i.vf_tempco_v_per_k),
        row(i.led_rth_jb_k_per_w + i.led_rth_ba_k_per_w),
        ambient_c,
        row(i.led_tj_max_c),
    )


def fixed_drop(i: ChannelInputs) -> FloatArray:
    """The switch's fixed drop: a bipolar transistor's vce_sat_v; a MOSFET's drop is resistive (none fixed)."""
    return np.where(channel_mosfet.is_mosfet(i), 0.0, i.vce_sat_v)


def hottest_led(point: thermal.LedPoint) -> np.ndarray:
    """Each string's junction, or where it runs away, the temperature its heat at Tj,max drives it to."""
    return np.where(point.runaway, point.heating_at_max_c, point.junction_c)


def hottest_inside_c(
    i: ChannelInputs,
    row: Row,
    supply_v: np.ndarray,
    resistor_ohm: np.ndarray,
    ambient_c: np.ndarray,
    switch_ohm: np.ndarray | float = 0.0,
) -> np.ndarray:
    """The LED junction where the string dissipates most, when a forward voltage inside [vf_min, vf_max] puts it
    there (else -inf: the ends, which the corners solve, are the hottest). A string of voltage V behind R on a
    headroom H dissipates V·(H − V)/R, at most H²/(4R) at V = H/2 whatever its temperature (maximum power
    transfer), so each LED is then at Ta + Rθ·H²/(4·N·R); the 25 °C forward voltage that reaches V = H/2 there is
    H/(2N) − k·(T − 25 °C). A MOSFET's ``switch_ohm`` counts with R."""
    head = supply_v - row(fixed_drop(i))
    resistor_ohm = resistor_ohm + switch_ohm
    n = row(i.leds_in_series)
    rth = row(i.led_rth_jb_k_per_w + i.led_rth_ba_k_per_w)
    junction = ambient_c + rth * head**2 / (4.0 * n * resistor_ohm)
    vf_needed = head / (2.0 * n) - row(i.vf_tempco_v_per_k) * (junction - thermal.REFERENCE_C)
    inside = (vf_needed >= row(i.vf_min_v)) & (vf_needed <= row(i.vf_max_v))
    return np.where(inside, junction, -np.inf)


def led_current_limit(i: ChannelInputs, row: Row, ambient_c: np.ndarray) -> np.ndarray:
    """The LED's maximum current at this ambient: derated from its knee where it gives one (the worst case's
    ``led_current_rating`` limit)."""
    return row(i.if_max_a) * thermal.current_derating(ambient_c, row(i.if_derating_knee_c), row(i.led_tj_max_c))


def resistor_rating(led: Outcome) -> FloatArray:
    """The string resistor's chosen rating; where none fits, the largest standard one (``resistor_rating`` fails)."""
    rating = led.results["resistor_rating_w"]
    return np.where(np.isnan(rating), led_string.POWER_RATINGS_W[-1], rating)


def checks(
    i: ChannelInputs,
    row: Row,
    ambient_c: np.ndarray,
    hottest_led_c: np.ndarray,
    heating_at_max_c: np.ndarray,
    resistor_power_w: np.ndarray,
    resistor_rating_w: np.ndarray,
    transistor_power_w: np.ndarray,
) -> dict[str, CheckArrays]:
    """Every thermal check as (value, limit, ok); arrays already reduced over the strings (hottest, largest)."""
    rth, cap = transistor_rth(i)
    led_limit = row(i.led_tj_max_c - thermal.JUNCTION_MARGIN_K)
    resistor_limit = resistor_rating_w * thermal.resistor_derating(
        ambient_c, row(i.resistor_rated_to_c), row(i.resistor_zero_power_c)
    )
    junction = thermal.junction_temperature(ambient_c, transistor_power_w, row(rth))
    transistor_limit = row(i.tj_max_c - thermal.JUNCTION_MARGIN_K)
    derated = thermal.derated_power(row(i.tj_max_c), ambient_c, row(rth), row(cap))
    return {
        "led_junction_temperature": (hottest_led_c, led_limit, hottest_led_c <= led_limit),
        "led_thermal_runaway": (heating_at_max_c, row(i.led_tj_max_c), heating_at_max_c <= row(i.led_tj_max_c)),
        "resistor_derated_power": (resistor_power_w, resistor_limit, resistor_power_w <= resistor_limit),
        "transistor_junction_temperature": (junction, transistor_limit, junction <= transistor_limit),
        "transistor_derated_power": (transistor_power_w, derated, transistor_power_w <= derated),
    }


def validate(i: ChannelInputs) -> list[Violation]:
    """The thermal inputs' preconditions (the single calculations' rules, ``led_heat`` and ``switch_heat``, over
    the same names, and the ambient range); never raises."""
    v = led_heat.validate(i) + switch_heat.validate(i)
    with np.errstate(invalid="ignore"):
        for name in ("ambient_min_c", "ambient_max_c"):
            x = getattr(i, name)
            bad = np.isinf(x) | (x <= ABSOLUTE_ZERO_C)
            require(v, bad, name, f"{name} ({first_bad(x, bad)} °C) must be a temperature above absolute zero")
        bad = i.ambient_min_c > i.ambient_c
        require(
            v, bad, "ambient_min_c", f"ambient_min_c ({first_bad(i.ambient_min_c, bad)} °C) cannot exceed ambient_c"
        )
        bad = i.ambient_max_c < i.ambient_c
        require(
            v, bad, "ambient_max_c", f"ambient_max_c ({first_bad(i.ambient_max_c, bad)} °C) cannot be below ambient_c"
        )
    return v


def switching_loss(
    i: ChannelInputs, supply_v: FloatArray, collector_a: FloatArray, row: Callable[[FloatArray], FloatArray]
) -> FloatArray:
    """The switch's PWM switching loss (``pwm_timing``) at these supplies and currents; ``row`` shapes a per-row
    input like them."""
    return pwm_timing.switching_loss(supply_v, collector_a, row(i.tr_s), row(i.tf_s), row(i.pwm_frequency_hz))


def stage(i: ChannelInputs, led: Outcome, switch: Outcome) -> Outcome:
    """Every part's temperature and derated limit at ``ambient_c`` with nominal values, and the thermal checks."""
    ta = i.ambient_c
    resistor = led.results["resistor_ohm"]
    mosfet = channel_mosfet.all_mosfet(i)
    # A MOSFET's drop at its on-resistance bound, as the string resistor was sized (``channel_mosfet``).
    switch_ohm = i.strings * channel_mosfet.rds_max_of(i, switch) if mosfet else 0.0
    point = led_point(i, lambda x: x, i.supply_v, i.leds_in_series * i.vf_typ_v, resistor, ta, switch_ohm)
    collector = i.strings * point.current_a
    rth, _ = transistor_rth(i)
    if mosfet:
        r = switch.results
        switching = pwm_timing.switching_loss(
            i.supply_v, collector, r["turn_on_s"], r["turn_off_s"], i.pwm_frequency_hz
        )
        transistor_power = channel_mosfet.dissipation(collector, r["rds_on_ohm"], i.duty_cycle, ta, rth, switching)
    else:
        transistor_power = (i.vce_sat_v * collector + i.vbe_sat_v * switch.results["base_current_a"]) * i.duty_cycle
        transistor_power = transistor_power + switching_loss(i, i.supply_v, collector, lambda x: x)
    resistor_power = point.current_a**2 * resistor
    rating = resistor_rating(led)
    hottest = hottest_led(point)
    found = checks(i, lambda x: x, ta, hottest, point.heating_at_max_c, resistor_power, rating, transistor_power)
    results = {
        "ambient_c": ta,
        "led_junction_c": point.junction_c,
        "led_current_hot_a": point.current_a,
        "led_string_vf_hot_v": point.string_vf_v,
        "thermal_iterations": point.iterations.astype(np.float64),
        "led_current_limit_a": led_current_limit(i, lambda x: x, ta),
        "resistor_power_hot_w": resistor_power,
        "resistor_hot_spot_c": thermal.resistor_hot_spot(
            ta, resistor_power, rating, i.resistor_rated_to_c, i.resistor_zero_power_c
        ),
        "resistor_derated_limit_w": found["resistor_derated_power"][1],
        "transistor_power_hot_w": transistor_power,
        "transistor_rth_k_per_w": rth,
        "transistor_junction_c": found["transistor_junction_temperature"][0],
        "transistor_derated_limit_w": found["transistor_derated_power"][1],
    }
    outcome_checks = [
        Check(name, np.asarray(ok, dtype=bool), np.asarray(value, dtype=float), np.asarray(limit, dtype=float), "max",
              DETAILS[name])
        for name, (value, limit, ok) in found.items()
    ]  # fmt: skip
    return Outcome(results=results, checks=outcome_checks, cautions=cautions(i, results, point.runaway))


def cautions(i: ChannelInputs, results: dict[str, np.ndarray], runaway: np.ndarray) -> list[Notice]:
    found: list[Notice] = []
    touch = thermal.TOUCH_SAFE_C
    hot = (results["resistor_hot_spot_c"] > touch) | (results["transistor_junction_c"] > touch)
    hot |= runaway | (results["led_junction_c"] > touch)
    add_notice(
        found,
        hot,
        "Hot surfaces: a resistor, transistor or LED runs above 60 °C at this ambient; keep it clear of fingers, "
        "plastics, wiring and plant material.",
    )
    add_notice(found, ambient_range(i)[1] >= thermal.WARM_ENCLOSURE_C, thermal.WARM_CAUTION)
    add_notice(found, runaway, thermal.RUNAWAY_CAUTION)
    add_notice(found, np.ones(i.ambient_c.shape, dtype=bool), thermal.ASSUMPTIONS_CAUTION)
    return found
