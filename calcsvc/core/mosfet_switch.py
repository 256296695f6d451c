"""N-channel MOSFET low-side switch driven from a logic pin ("mosfet-switch").

Model
    The pin drives the gate through Rg; the source is grounded and the load sits between the supply and the
    drain. An optional pull-down Rgs from gate to source holds the gate low while the pin floats.

Gate resistor
    The largest standard value (of the row's IEC 60063 series) that keeps both edges within the wanted
    switching time (``pwm_timing.gate_times``: Q = I·t through Rg), but never below the smallest that keeps
    the pin's peak current within its rating: at turn-on the gate sits at 0 V, so the pin sources
    V_dd/Rg (its high level at its own supply, Rg at −tolerance; worst case two-sided). Where the pin forbids
    a switching time asked for, the edge-time check fails. Unless asked for, the wanted switching time is a
    twentieth of the shortest PWM pulse (the on-time check then judges the edges), or 1 µs without a PWM (our
    default for a static switch, where speed does not matter).

On-resistance, loss and heat (``on_resistance``, ``pwm_timing``, ``thermal``)
    The gate reaches the pin's worst-case high level (``drive_high_v``, its rated output high level), less
    the pull-down's divider share; the on-resistance there is interpolated between the part's stated points,
    and refused when the pin cannot reach the lowest of them. Conduction loss I²·R(Tj)·D by Ohm's law,
    switching loss V·I·(t_r + t_f)·f/6 with V the highest supply (the voltage across the switch when off,
    on the safe side), the junction temperature by thermal Ohm's law with the on-resistance's rise, against
    Tj,max less a 20 K margin (common practice) and the dissipation against the rating derated to the
    ambient.

Further checks: drain current within its rating; the highest supply within vds_max_v/1.2 (common practice);
the shortest pulse at least ten times the edges (common practice); the flicker of the PWM against IEEE Std
1789-2015's low-risk region (``flicker``). Units: volts, amperes, ohms, seconds, watts, °C.
"""

from __future__ import annotations

import numpy as np

from calcsvc.core import bjt_drive, eseries, on_resistance, pwm_timing, switch_pwm, thermal
from calcsvc.core.driver_pin import SWITCH_DRIVER
from calcsvc.core.mosfet_inputs import POINTS, MosfetSwitchInputs, gate_drive_v, validate, wanted_time
from calcsvc.core.outcome import Check, FloatArray, Notice, Outcome, add_notice, raise_violations
from calcsvc.core.spec import E_SERIES, CalculationSpec, Input, Result, Role, columns_as, fraction, positive

NAME = "mosfet-switch"
VERSION = "2"

PULLDOWN_MAX_OHM = 100e3  # gate pull-downs of 10–100 kΩ (common practice)


def _gate_resistor(i: MosfetSwitchInputs, rg_exact: FloatArray, rg_pin_min: FloatArray) -> FloatArray:
    """The largest standard value within the wanted time, raised to the pin's smallest where that is larger."""
    rg = eseries.pick_at_or_below_rows(rg_exact, i.e_series)
    known = ~np.isnan(rg_pin_min)
    pin = np.zeros_like(rg)
    pin[known] = eseries.pick_at_or_above_rows(rg_pin_min[known], i.e_series[known])
    return np.maximum(rg, pin)


def gate_voltage(i: MosfetSwitchInputs, rg_ohm: FloatArray, high_v: FloatArray) -> FloatArray:
    """The gate voltage when on from a pin at ``high_v``: less the pull-down's divider share, where fitted."""
    with np.errstate(invalid="ignore"):
        divider = np.where(np.isnan(i.gate_pulldown_ohm), 1.0, i.gate_pulldown_ohm / (rg_ohm + i.gate_pulldown_ohm))
    return high_v * divider


def rds_at(i: MosfetSwitchInputs, gate_v: FloatArray) -> FloatArray:
    """The largest on-resistance at 25 °C at ``gate_v`` from the stated points (``on_resistance``)."""
    points_v = np.stack([getattr(i, a) for a, _ in POINTS], axis=1)
    points_ohm = np.stack([getattr(i, b) for _, b in POINTS], axis=1)
    return on_resistance.at_gate_voltage(gate_v, points_v, points_ohm)


def pin_low_ohm(drive_low_v: FloatArray, driver_current_max_a: FloatArray) -> FloatArray:
    """The pin's own resistance when low (its low level at the current it is rated for), in the turn-off path."""
    sink_rating = np.where(np.isnan(driver_current_max_a), bjt_drive.VOL_RATED_UNKNOWN_A, driver_current_max_a)
    return drive_low_v / sink_rating


def compute(inputs: MosfetSwitchInputs, validated: bool = False) -> Outcome:
    """Choose the gate resistor; the switch's timing, losses, temperature and checks (module docstring).

    Raises DomainError when any row violates ``validate``.
    """
    if not validated:
        raise_violations(validate(inputs))
    i = inputs
    current = i.drain_current_a
    tolerance = eseries.tolerance_rows(i.resistor_tolerance, i.e_series)
    wanted = wanted_time(i)
    rg_exact = wanted * gate_drive_v(i) / i.qg_total_c
    pin_high = bjt_drive.pin_high(i.drive_high_v, i.drive_supply_v)
    rg_pin_min = pin_high / (i.driver_current_max_a * (1.0 - tolerance))
    rg = _gate_resistor(i, rg_exact, rg_pin_min)
    pin_peak = pin_high / (rg * (1.0 - tolerance))
    gate_v = gate_voltage(i, rg, i.drive_high_v)
    rds_25 = rds_at(i, gate_v)
    turn_on, turn_off = pwm_timing.gate_times(
        i.qg_total_c, rg, gate_v, pin_low_ohm(i.drive_low_v, i.driver_current_max_a), i.vgs_th_max_v
    )
    pwm = switch_pwm.pwm_stage(
        turn_on,
        turn_off,
        turn_on,  # the whole gate charge: on the safe side for the loss (pwm_timing)
        turn_off,
        i.supply_max_v,
        current,
        i.pwm_frequency_hz,
        i.pwm_resolution_bits,
        i.modulation_depth,
        i.camera_frame_rate_hz,
    )
    switching = pwm.results["switching_loss_w"]
    rth = np.where(np.isnan(i.rth_ja_k_per_w), thermal.rth_from_rating(i.tj_max_c, i.power_max_w), i.rth_ja_k_per_w)
    junction = on_resistance.junction(i.ambient_c, rth, current, i.duty_cycle, rds_25, switching)
    rds_hot = on_resistance.hot(rds_25, junction)
    conduction = current**2 * rds_hot * i.duty_cycle
    power = conduction + switching
    power_limit = thermal.derated_power(i.tj_max_c, i.ambient_c, rth, i.power_max_w)
    junction_limit = i.tj_max_c - thermal.JUNCTION_MARGIN_K
    supply_limit = bjt_drive.voltage_limit(i.vds_max_v)
    pulldown_target = np.minimum(
        PULLDOWN_MAX_OHM, pwm_timing.gate_threshold_low(i.vgs_th_max_v) / (2.0 * bjt_drive.LEAKAGE_HOT_A)
    )
    results: dict[str, np.ndarray] = {
        "switching_time_wanted_s": wanted,
        "rg_exact_ohm": rg_exact,
        "rg_pin_min_ohm": rg_pin_min,
        "rg_ohm": rg,
        "gate_peak_current_a": pin_peak,
        "gate_v": gate_v,
        "rds_on_ohm": rds_25,
        "rds_on_hot_ohm": rds_hot,
        "conduction_loss_w": conduction,
        "mosfet_power_w": power,
        "power_limit_w": power_limit,
        "junction_c": junction,
        "gate_pulldown_recommended_ohm": eseries.pick_at_or_below_rows(pulldown_target, i.e_series),
        **pwm.results,
    }
    pin_over = pin_peak > i.driver_current_max_a  # NaN rating: not checked
    with np.errstate(invalid="ignore"):
        hot_ok = junction <= junction_limit
        checks = [
            Check(
                "gate_reaches_stated_drive",
                gate_v >= i.vgs_1_v,
                gate_v,
                i.vgs_1_v,
                "min",
                "The gate voltage (the pin's high level less the pull-down's share) must reach the lowest gate "
                "voltage at which the part states its on-resistance.",
            ),
            Check(
                "edges_within_wanted_time",
                np.isnan(i.switching_time_s) | (np.maximum(turn_on, turn_off) <= wanted * (1 + 1e-9)),
                np.maximum(turn_on, turn_off),
                np.where(np.isnan(i.switching_time_s), np.nan, wanted),
                "max",
                "The slower gate edge (Q = I·t through rg_ohm) must fit the switching time asked for; it fails "
                "where the pin's current rating forces a larger gate resistor (not checked when none is asked "
                "for: the shortest-pulse check judges the edges then).",
            ),
            Check(
                "pin_peak_current",
                ~pin_over,
                pin_peak,
                i.driver_current_max_a,
                "max",
                "The pin's current into the uncharged gate (its supply over Rg at -tolerance) must not exceed its "
                "rating (not checked when unknown).",
            ),
            Check(
                "drain_current_rating",
                current <= i.id_max_a,
                current,
                i.id_max_a,
                "max",
                "The load current must not exceed the MOSFET's continuous drain current rating.",
            ),
            Check(
                "drain_voltage_rating",
                i.supply_max_v <= supply_limit,
                i.supply_max_v,
                supply_limit,
                "max",
                "The highest supply, across the MOSFET when off, must stay within vds_max_v / 1.2 (common practice).",
            ),
            Check(
                "dissipation_at_ambient",
                power <= power_limit,
                power,
                power_limit,
                "max",
                "Conduction plus switching loss must stay within the rating derated to the ambient.",
            ),
            Check(
                "junction_temperature",
                hot_ok,
                junction,
                junction_limit,
                "max",
                "The junction (its on-resistance rising with its heat) must stay 20 K below tj_max_c (common "
                "practice); it fails when the heat runs away.",
            ),
            *pwm.checks,
        ]
    warnings, cautions = _notices(i, rds_25, junction, power, power_limit, pin_over)
    return Outcome(results, checks, [*warnings, *pwm.warnings], [*cautions, *pwm.cautions])


def _notices(
    i: MosfetSwitchInputs,
    rds_25: FloatArray,
    junction: FloatArray,
    power: FloatArray,
    power_limit: FloatArray,
    pin_over: np.ndarray,
) -> tuple[list[Notice], list[Notice]]:
    warnings: list[Notice] = []
    cautions: list[Notice] = []
    add_notice(
        warnings,
        np.isnan(i.gate_pulldown_ohm),
        "No gate pull-down: while the pin floats (reset, programming) the gate can charge and turn the "
        "MOSFET partly on, where it dissipates heavily; add one of about gate_pulldown_recommended_ohm.",
    )
    add_notice(
        cautions,
        np.isnan(rds_25),
        "The gate does not reach a gate voltage at which the part states its on-resistance: losses and "
        "temperature are unknown; the MOSFET may run in its linear region and overheat.",
    )
    add_notice(
        cautions,
        ~np.isnan(rds_25) & np.isnan(junction),
        "The MOSFET runs away thermally: its on-resistance rises with its heat faster than it cools; it will fail.",
    )
    add_notice(
        cautions,
        power > power_limit,
        "The MOSFET dissipates more than its rating allows at this ambient: it will overheat and can fail.",
    )
    add_notice(cautions, i.drain_current_a > i.id_max_a, "The drain current exceeds the MOSFET's rating: it can fail.")
    add_notice(
        cautions,
        i.supply_max_v > bjt_drive.voltage_limit(i.vds_max_v),
        "The supply is too close to the MOSFET's drain-source rating: it can break down and fail.",
    )
    add_notice(
        cautions,
        pin_over,
        "The pin would source more than its rating into the gate: use a larger gate resistor or a gate driver.",
    )
    return warnings, cautions


# ---- declaration --------------------------------------------------------------------------------------------

PART_PARAMETERS = (
    "vds_max_v",
    "id_max_a",
    "vgs_1_v",
    "rds_on_1_ohm",
    "vgs_2_v",
    "rds_on_2_ohm",
    "vgs_3_v",
    "rds_on_3_ohm",
    "vgs_th_max_v",
    "qg_total_c",
    "power_max_w",
    "tj_max_c",
    "rth_ja_k_per_w",
)

SPEC = CalculationSpec(
    name=NAME,
    summary="Gate resistor, on-resistance, losses, heat, PWM timing and flicker of an N-MOSFET low-side switch",
    version=VERSION,
    inputs=(
        positive("vds_max_v", "V", "drain-source voltage rating"),
        positive("id_max_a", "A", "continuous drain current rating"),
        positive("vgs_1_v", "V", "lowest gate voltage at which an on-resistance is stated"),
        positive("rds_on_1_ohm", "ohm", "largest on-resistance at vgs_1_v, 25 °C"),
        positive("vgs_2_v", "V", "a higher stated gate voltage", optional=True),
        positive("rds_on_2_ohm", "ohm", "largest on-resistance at vgs_2_v, 25 °C", optional=True),
        positive("vgs_3_v", "V", "the highest stated gate voltage", optional=True),
        positive("rds_on_3_ohm", "ohm", "largest on-resistance at vgs_3_v, 25 °C", optional=True),
        positive("vgs_th_max_v", "V", "largest gate threshold voltage"),
        positive("qg_total_c", "C", "total gate charge"),
        positive("power_max_w", "W", "dissipation rating at 25 °C ambient"),
        Input("tj_max_c", "degC", "maximum junction temperature", 150.0),
        positive(
            "rth_ja_k_per_w", "K/W", "junction-to-ambient thermal resistance; absent: from power_max_w", optional=True
        ),
        positive("drain_current_a", "A", "load current when on"),
        positive("supply_max_v", "V", "highest supply across the switched load"),
        Input("drive_high_v", "V", "driver output voltage when on (its worst-case high level)"),
        Input("drive_low_v", "V", "driver output voltage when off", 0.0),
        positive("driver_current_max_a", "A", "largest current the driver may source", optional=True),
        bjt_drive.DRIVE_SUPPLY_V,
        positive(
            "switching_time_s",
            "s",
            "wanted gate edge time; absent: a twentieth of the shortest PWM pulse",
            optional=True,
        ),
        positive("gate_pulldown_ohm", "ohm", "gate-source pull-down resistor", optional=True),
        Input("e_series", "", "standard resistor series", "E24", choices=E_SERIES),
        fraction("resistor_tolerance", "gate resistor tolerance; absent: the series' own", optional=True),
        fraction("duty_cycle", "fraction of time on", default=1.0),
        Input("ambient_c", "degC", "ambient temperature around the MOSFET", thermal.REFERENCE_C),
        *pwm_timing.PWM_INPUTS,
    ),
    roles=(
        Role("transistor", "mosfet", tuple((p, p) for p in PART_PARAMETERS), must_have=(("channel", "n"),)),
        SWITCH_DRIVER,
    ),
    results=(
        Result("switching_time_wanted_s", "s", "wanted gate edge time: as given, or from the PWM"),
        Result("rg_exact_ohm", "ohm", "gate resistor giving exactly the wanted edge time"),
        Result("rg_pin_min_ohm", "ohm", "smallest gate resistor keeping the pin within its rating"),
        Result("rg_ohm", "ohm", "chosen standard gate resistor"),
        Result("gate_peak_current_a", "A", "pin current into the uncharged gate (its supply, Rg at -tolerance)"),
        Result("gate_v", "V", "gate voltage when on"),
        Result("rds_on_ohm", "ohm", "on-resistance at gate_v, 25 °C (interpolated between stated points)"),
        Result("rds_on_hot_ohm", "ohm", "on-resistance at the junction temperature"),
        Result("conduction_loss_w", "W", "I^2 R(Tj) x duty cycle"),
        Result("mosfet_power_w", "W", "conduction plus switching loss"),
        Result("power_limit_w", "W", "dissipation rating derated to the ambient"),
        Result("junction_c", "degC", "junction temperature (NaN: thermal runaway)"),
        *switch_pwm.PWM_RESULTS,
        Result("gate_pulldown_recommended_ohm", "ohm", "gate pull-down that holds a floating pin's MOSFET off"),
    ),
    make_inputs=lambda c: columns_as(MosfetSwitchInputs, c),
    validate=validate,
    compute=compute,
)
