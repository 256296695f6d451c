"""NPN low-side switch driven from a logic pin ("bjt-switch").

Model
    A logic output at ``drive_high_v`` (Vh) drives the base through Rb; the emitter is grounded and the
    load sits between the supply and the collector. In saturation the base-emitter junction holds
    ``vbe_sat_v`` and the collector-emitter ``vce_sat_v``. An optional pull-down Rbe from base to emitter
    (``rbe_ohm``) steals Vbe_sat/Rbe of the drive current. To saturate hard the base gets Ic/β_forced with a
    forced beta no higher than the ratio at which the part's Vce(sat) is specified and well under its
    worst-case gain; unless given it follows from the part (``bjt_drive``: the test ratio, at most hfe_min/2):

        Ib_req = Ic / β_forced
        Rb_exact = (Vh − Vbe_sat) / (Ib_req + Vbe_sat/Rbe)

    Rb is the largest standard value (of the row's IEC 60063 series) at or below Rb_exact, so the base
    current is never less than required and saturation is kept. Then

        I_drive = (Vh − Vbe_sat)/Rb      (sourced by the pin)
        Ib      = I_drive − Vbe_sat/Rbe  (into the base)
        β_actual = Ic/Ib,  saturation margin = hfe_min/β_actual
        P = (Vce_sat·Ic + Vbe_sat·Ib)·D + P_sw  (average over the switching period at duty cycle D)

    Further checks (models in ``bjt_drive``): Ic/Ib within the Vce(sat) test ratio; the pin's current at its
    stress corner; the hot off-state base voltage against the turn-on threshold of one or two junctions; the
    highest supply against the collector-emitter rating. Without a pull-down a warning recommends one.

Assumptions
    Saturation voltages are the datasheet-style constants given; the switching times are the part's stated
    ones (``pwm_timing``; conservative defaults where it states none) and its PWM stage (switching loss P_sw
    at supply_max_v, the on-time and flicker checks) is ``switch_pwm``'s; the load current Ic is set by the
    load, not by the transistor. Units: volts, amperes, ohms, seconds, watts.
"""

from __future__ import annotations

import numpy as np

from calcsvc.core import bjt_drive, blocks, eseries, pwm_timing, switch_heat, switch_notices, switch_pwm, thermal_inputs
from calcsvc.core.bjt_switch_inputs import BjtSwitchInputs, design_beta, exact_base_resistor, rbe_current, validate
from calcsvc.core.driver_pin import SWITCH_DRIVER
from calcsvc.core.outcome import (
    Check,
    Outcome,
    add_notice,
    rows,
)
from calcsvc.core.spec import E_SERIES, CalculationSpec, Input, Result, Role, columns_as, fraction, positive

NAME = "bjt-switch"
VERSION = "5"


def compute(inputs: BjtSwitchInputs, validated: bool = False) -> Outcome:
    """The design (``design``) and its heat at ``ambient_c`` (``switch_heat``).

    Raises DomainError when any row violates ``validate``; ``validated``: the caller has just validated these very
    inputs.
    """
    return blocks.evaluate(inputs, validate, _designed_with_heat, validated)


def _designed_with_heat(inputs: BjtSwitchInputs) -> Outcome:
    cold = design(inputs)
    heat = switch_heat.outcome(inputs, cold.results["transistor_power_w"])
    return Outcome(
        results={**cold.results, **heat.results},
        checks=cold.checks + heat.checks,
        warnings=cold.warnings,
        cautions=cold.cautions + heat.cautions,
    )


def design(inputs: BjtSwitchInputs) -> Outcome:
    """Choose the base resistor and check saturation, the driver pin and the transistor's ratings at 25 °C;
    the channel review judges heat in its own stage. ``inputs`` must have passed ``validate``."""
    i = inputs
    n = i.hfe_min.shape[0]
    ic = i.collector_current_a
    beta_design = design_beta(i)
    ib_req = ic / beta_design
    i_rbe = rbe_current(i)
    rb_exact = exact_base_resistor(i)
    rb = eseries.pick_at_or_below_rows(rb_exact, i.e_series)
    drive = (i.drive_high_v - i.vbe_sat_v) / rb
    ib = drive - i_rbe  # > 0: rb ≤ rb_exact means drive ≥ ib_req + i_rbe (to 1e-9)
    beta_actual = ic / ib
    margin = i.hfe_min / beta_actual
    turn_on, turn_off = pwm_timing.bipolar_times(i.td_s, i.tr_s, i.ts_s, i.tf_s)
    pwm = switch_pwm.pwm_stage(
        turn_on,
        turn_off,
        i.tr_s,
        i.tf_s,
        i.supply_max_v,
        ic,
        i.pwm_frequency_hz,
        i.pwm_resolution_bits,
        i.modulation_depth,
        i.camera_frame_rate_hz,
    )
    switching = pwm.results["switching_loss_w"]  # NaN: PWM given but not the supply
    power = (i.vce_sat_v * ic + i.vbe_sat_v * ib) * i.duty_cycle + np.nan_to_num(switching)
    high = bjt_drive.pin_high(i.drive_high_v, i.drive_supply_v)
    rb_low = rb * (1.0 - eseries.tolerance_rows(i.resistor_tolerance, i.e_series))
    pin_max = bjt_drive.pin_stress_current(high, i.vbe_sat_v, i.base_junctions, rb_low)
    off_base = bjt_drive.off_base_voltage(i.drive_low_v, i.driver_current_max_a, rb, i.rbe_ohm)
    turn_on = bjt_drive.turn_on_hot(i.base_junctions)
    supply_limit = np.where(np.isnan(i.supply_max_v), np.nan, bjt_drive.voltage_limit(i.vceo_max_v))

    results: dict[str, np.ndarray] = {
        "forced_beta_design": beta_design,
        "base_current_required_a": ib_req,
        "rb_exact_ohm": rb_exact,
        "rb_ohm": rb,
        "drive_current_a": drive,
        "drive_current_max_a": pin_max,
        "base_current_a": ib,
        "forced_beta_actual": beta_actual,
        "saturation_margin": margin,
        "transistor_power_w": power,
        "off_state_base_v": off_base,
        "rbe_recommended_ohm": bjt_drive.recommended_pulldown(rb, i.base_junctions, i.e_series),
        **pwm.results,
    }

    driver_limit = np.asarray(i.driver_current_max_a, dtype=np.float64)
    driver_over = ~np.isnan(driver_limit) & (pin_max > driver_limit)
    over_voltage = i.supply_max_v > supply_limit
    checks = [
        Check(
            "saturation",
            beta_actual < i.hfe_min,
            beta_actual,
            i.hfe_min,
            "max",
            "The actual forced beta (Ic/Ib) must stay below the worst-case gain hfe_min so the transistor saturates.",
        ),
        Check(
            "vce_sat_guarantee",
            beta_actual <= i.vce_sat_forced_beta,
            beta_actual,
            rows(n, i.vce_sat_forced_beta),
            "max",
            "The actual Ic/Ib must not exceed the ratio at which the part's Vce(sat) is specified, or the "
            "saturation voltage used for the load current and dissipation is not guaranteed.",
        ),
        Check(
            "driver_current",
            ~driver_over,
            pin_max,
            driver_limit,
            "max",
            "The pin's current at its stress corner (high level at its supply, hot junction, Rb at -tolerance) "
            "must not exceed its rating (not checked when unknown).",
        ),
        Check(
            "collector_current_rating",
            ic <= i.ic_max_a,
            ic,
            i.ic_max_a,
            "max",
            "The load current must not exceed the transistor's maximum collector current.",
        ),
        Check(
            "voltage_rating",
            ~over_voltage,
            i.supply_max_v,
            supply_limit,
            "max",
            "The highest supply, which stands across the transistor when off, must stay within vceo_max_v / 1.2 "
            "(common practice; not checked when either is unknown).",
        ),
        Check(
            "power_rating",
            power <= i.power_max_w,
            power,
            i.power_max_w,
            "max",
            "The transistor's average dissipation must not exceed its power rating.",
        ),
        Check(
            "off_state",
            off_base <= turn_on,
            off_base,
            turn_on,
            "max",
            "Off, with the pin low at the leakage it then sinks (and floating, with a pull-down), the hot base "
            "must stay below the turn-on threshold: 0.4 V per junction at 125 °C (0.6 V at 25 °C less 2 mV/K).",
        ),
        *pwm.checks,
    ]

    warnings, cautions = switch_notices.notices(i, margin, beta_actual, power, driver_over, over_voltage)
    warnings, cautions = [*pwm.warnings, *warnings], [*pwm.cautions, *cautions]
    add_notice(
        warnings,
        np.isnan(switching),
        "supply_max_v is not given: the switching loss is unknown and left out of transistor_power_w.",
    )
    return Outcome(results=results, checks=checks, warnings=warnings, cautions=cautions)


# ---- declaration --------------------------------------------------------------------------------------------


SPEC = CalculationSpec(
    name=NAME,
    summary="Base resistor for a saturated NPN low-side switch, with drive, rating and dissipation checks",
    version=VERSION,
    inputs=(
        positive("hfe_min", "dimensionless", "lowest DC current gain at the operating current"),
        positive("vbe_sat_v", "V", "base-emitter voltage in saturation"),
        Input("vce_sat_v", "V", "collector-emitter voltage in saturation", minimum=0),
        positive("ic_max_a", "A", "transistor's collector current rating"),
        positive("power_max_w", "W", "transistor's dissipation rating"),
        positive("collector_current_a", "A", "load current when on"),
        Input("drive_high_v", "V", "driver output voltage when on"),
        Input("drive_low_v", "V", "driver output voltage when off", 0.0),
        bjt_drive.FORCED_BETA,
        bjt_drive.VCE_SAT_FORCED_BETA,
        bjt_drive.BASE_JUNCTIONS,
        bjt_drive.VCEO_MAX_V,
        positive("supply_max_v", "V", "highest supply across the switched load", optional=True),
        Input("e_series", "", "standard resistor series", "E24", choices=E_SERIES),
        fraction("resistor_tolerance", "base resistor tolerance; absent: the series' own", optional=True),
        bjt_drive.RBE_OHM,
        positive("driver_current_max_a", "A", "largest current the driver may source", optional=True),
        bjt_drive.DRIVE_SUPPLY_V,
        fraction("duty_cycle", "fraction of time on", default=1.0),
        thermal_inputs.AMBIENT_C,
        *thermal_inputs.TRANSISTOR,
        *pwm_timing.BIPOLAR_TIMES,
        *pwm_timing.PWM_INPUTS,
    ),
    roles=(
        Role(
            "transistor",
            "bjt",
            (
                ("hfe_min", "hfe_min"),
                ("vbe_sat_v", "vbe_sat_v"),
                ("vce_sat_v", "vce_sat_v"),
                ("ic_max_a", "ic_max_a"),
                ("power_max_w", "power_max_w"),
                *bjt_drive.TRANSISTOR_EXTRAS,
                *thermal_inputs.TRANSISTOR_PARAMETERS,
                *((name, name) for name in ("td_s", "tr_s", "ts_s", "tf_s")),
            ),
            must_have=(("polarity", "npn"),),
        ),
        SWITCH_DRIVER,
    ),
    results=(
        Result("forced_beta_design", "A/A", "Ic/Ib designed for: as given, or from the part"),
        Result("base_current_required_a", "A", "collector current / forced beta"),
        Result("rb_exact_ohm", "ohm", "base resistor giving exactly the required base current"),
        Result("rb_ohm", "ohm", "largest standard value not above the exact one"),
        Result("drive_current_a", "A", "current the driver sources through rb_ohm"),
        Result("drive_current_max_a", "A", "pin current at its stress corner (its supply, hot Vbe, Rb at -tol)"),
        Result("base_current_a", "A", "current into the base after the pull-down's share"),
        Result("forced_beta_actual", "A/A", "collector current / base current with rb_ohm"),
        Result("saturation_margin", "", "hfe_min / forced_beta_actual"),
        Result("transistor_power_w", "W", "(Vce_sat Ic + Vbe_sat Ib) x duty cycle + switching loss"),
        Result("off_state_base_v", "V", "base voltage when off, hot (pin low; floating with a pull-down)"),
        Result("rbe_recommended_ohm", "ohm", "base pull-down that holds a floating pin's transistor off"),
        Result("transistor_rth_k_per_w", "K/W", "junction to ambient thermal resistance used"),
        Result("junction_c", "°C", "junction temperature at ambient_c and transistor_power_w"),
        Result("derated_power_limit_w", "W", "dissipation limit derated to ambient_c"),
        *switch_pwm.PWM_RESULTS,
    ),
    make_inputs=lambda c: columns_as(BjtSwitchInputs, c),
    validate=validate,
    compute=compute,
)
