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
        P = (Vce_sat·Ic + Vbe_sat·Ib)·D  (average over the switching period at duty cycle D)

    Further checks (models in ``bjt_drive``): Ic/Ib within the Vce(sat) test ratio; the pin's current at its
    stress corner; the hot off-state base voltage against the turn-on threshold of one or two junctions; the
    highest supply against the collector-emitter rating. Without a pull-down a warning recommends one.

Assumptions
    Saturation voltages are the datasheet-style constants given; switching losses are ignored; the load
    current Ic is set by the load, not by the transistor. Units: volts, amperes, ohms, watts.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calcsvc.core import bjt_drive, eseries, switch_heat, switch_notices, thermal_inputs
from calcsvc.core.outcome import (
    Check,
    FloatArray,
    Outcome,
    Violation,
    first_bad,
    raise_violations,
    require,
    require_practical,
    rows,
)
from calcsvc.core.spec import E_SERIES, CalculationSpec, Input, Result, Role, columns_as, fraction, positive

NAME = "bjt-switch"
VERSION = "3"

OPTIONAL = (
    "forced_beta",
    "resistor_tolerance",
    "rbe_ohm",
    "driver_current_max_a",
    "vceo_max_v",
    "supply_max_v",
    "drive_supply_v",
)
MAX_PULLDOWN_SHARE = 1e6  # pull-down current / required base current beyond which Ib is lost in rounding


@dataclass(frozen=True)
class BjtSwitchInputs:
    hfe_min: FloatArray  # worst-case DC current gain at the operating collector current
    vbe_sat_v: FloatArray
    vce_sat_v: FloatArray
    ic_max_a: FloatArray  # transistor's maximum collector current
    power_max_w: FloatArray  # transistor's maximum dissipation under the design's cooling
    collector_current_a: FloatArray  # load current when on
    drive_high_v: FloatArray
    drive_low_v: FloatArray
    forced_beta: FloatArray  # Ic/Ib to design for; NaN: from the part (bjt_drive.design_forced_beta)
    vce_sat_forced_beta: FloatArray  # Ic/Ib at which vce_sat_v is specified
    base_junctions: FloatArray  # 1, or 2 for a Darlington pair
    vceo_max_v: FloatArray  # NaN: unknown
    supply_max_v: FloatArray  # highest supply across the switched load; NaN: not given
    e_series: np.ndarray  # numpy str array, e.g. "E24"
    resistor_tolerance: FloatArray  # of the base resistor; NaN: the series' own
    rbe_ohm: FloatArray  # NaN: no base-emitter pull-down
    driver_current_max_a: FloatArray  # NaN: unknown
    drive_supply_v: FloatArray  # the pin's own supply; NaN: not given (drive_high_v stands for it)
    duty_cycle: FloatArray  # fraction of time on, 0..1
    # Heat (``switch_heat``); NaN: not given.
    ambient_c: FloatArray
    tj_max_c: FloatArray
    rth_ja_k_per_w: FloatArray  # NaN: from power_max_w at 25 °C
    rth_jc_k_per_w: FloatArray
    heatsink_k_per_w: FloatArray  # NaN: none


def _rbe_current(inputs: BjtSwitchInputs) -> FloatArray:
    """Current the base-emitter pull-down takes from the drive (A); 0 without one."""
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(np.isnan(inputs.rbe_ohm), 0.0, inputs.vbe_sat_v / inputs.rbe_ohm)


def validate(inputs: BjtSwitchInputs) -> list[Violation]:
    """Every physical precondition, per row; never raises."""
    v: list[Violation] = []
    i = inputs
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        required = {
            "hfe_min": i.hfe_min,
            "vbe_sat_v": i.vbe_sat_v,
            "vce_sat_v": i.vce_sat_v,
            "ic_max_a": i.ic_max_a,
            "power_max_w": i.power_max_w,
            "collector_current_a": i.collector_current_a,
            "drive_high_v": i.drive_high_v,
            "drive_low_v": i.drive_low_v,
            "vce_sat_forced_beta": i.vce_sat_forced_beta,
            "base_junctions": i.base_junctions,
            "duty_cycle": i.duty_cycle,
        }
        for name, x in required.items():
            bad = ~np.isfinite(x)
            require(v, bad, name, f"{name} must be a finite number (got {first_bad(x, bad)})")
        given = {name: getattr(i, name) for name in OPTIONAL}
        for name, x in given.items():
            require(v, np.isinf(x), name, f"{name} must be finite when given")

        positive = {
            "hfe_min": (i.hfe_min, ""),
            "vbe_sat_v": (i.vbe_sat_v, " V"),
            "ic_max_a": (i.ic_max_a, " A"),
            "power_max_w": (i.power_max_w, " W"),
            "collector_current_a": (i.collector_current_a, " A"),
        }
        for name, (x, unit) in positive.items():
            bad = x <= 0
            require(v, bad, name, f"{name} ({first_bad(x, bad)}{unit}) must be positive")
        bad = i.vce_sat_v < 0
        require(v, bad, "vce_sat_v", f"vce_sat_v ({first_bad(i.vce_sat_v, bad)} V) must not be negative")
        bjt_drive.require_drive(v, given, i.vce_sat_forced_beta, i.base_junctions, i.drive_high_v)
        bad = (i.duty_cycle < 0) | (i.duty_cycle > 1)
        require(v, bad, "duty_cycle", f"duty_cycle ({first_bad(i.duty_cycle, bad)}) must lie in [0, 1]")
        bad = i.drive_high_v <= i.vbe_sat_v
        high, vbe = first_bad(i.drive_high_v, bad), first_bad(i.vbe_sat_v, bad)
        message = f"drive_high_v ({high} V) must exceed vbe_sat_v ({vbe} V): else no current flows through the base"
        require(v, bad, "drive_high_v", message)
        bad = i.drive_low_v >= i.drive_high_v
        low, high = first_bad(i.drive_low_v, bad), first_bad(i.drive_high_v, bad)
        require(v, bad, "drive_low_v", f"drive_low_v ({low} V) must be below drive_high_v ({high} V)")
        eseries.require_known_series(v, i.e_series)
        require_practical(v, required | given, ("rbe_ohm",))
        v += switch_heat.validate(i)
        if not v:
            # Only when everything else holds: the exact base resistor must lie where standard values exist.
            rb_exact = _rb_exact(i)
            bad = (rb_exact < eseries.MIN_VALUE) | (rb_exact > eseries.MAX_VALUE)
            require(
                v,
                bad,
                "collector_current_a",
                f"collector_current_a ({first_bad(i.collector_current_a, bad)} A) gives a base resistor of "
                f"{first_bad(rb_exact, bad)} Ω, outside any practical range",
            )
            # The base current is the drive less the pull-down's share; when that share is millions of times
            # larger, the difference drowns in rounding (no real design wastes its drive so).
            ib_req = i.collector_current_a / _design_beta(i)
            bad = _rbe_current(i) > MAX_PULLDOWN_SHARE * ib_req
            require(
                v,
                bad,
                "rbe_ohm",
                f"rbe_ohm ({first_bad(i.rbe_ohm, bad)} Ω) would take over {MAX_PULLDOWN_SHARE:g} times the "
                f"base current ({first_bad(ib_req, bad)} A): choose a larger pull-down",
            )
    return v


def _design_beta(inputs: BjtSwitchInputs) -> FloatArray:
    tolerance = eseries.tolerance_rows(inputs.resistor_tolerance, inputs.e_series)
    return bjt_drive.design_forced_beta(inputs.forced_beta, inputs.hfe_min, inputs.vce_sat_forced_beta, tolerance)


def _rb_exact(inputs: BjtSwitchInputs) -> FloatArray:
    ib_req = inputs.collector_current_a / _design_beta(inputs)
    return (inputs.drive_high_v - inputs.vbe_sat_v) / (ib_req + _rbe_current(inputs))


def compute(inputs: BjtSwitchInputs, validated: bool = False) -> Outcome:
    """The design (``design``) and its heat at ``ambient_c`` (``switch_heat``).

    Raises DomainError when any row violates ``validate``.
    """
    if not validated:  # the caller has just validated these very inputs
        raise_violations(validate(inputs))
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
    beta_design = _design_beta(i)
    ib_req = ic / beta_design
    i_rbe = _rbe_current(i)
    rb_exact = _rb_exact(i)
    rb = eseries.pick_at_or_below_rows(rb_exact, i.e_series)
    drive = (i.drive_high_v - i.vbe_sat_v) / rb
    ib = drive - i_rbe  # > 0: rb ≤ rb_exact means drive ≥ ib_req + i_rbe (to 1e-9)
    beta_actual = ic / ib
    margin = i.hfe_min / beta_actual
    power = (i.vce_sat_v * ic + i.vbe_sat_v * ib) * i.duty_cycle
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
    ]

    warnings, cautions = switch_notices.notices(i, margin, beta_actual, power, driver_over, over_voltage)
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
            ),
            must_have=(("polarity", "npn"),),
        ),
        Role(
            "driver",
            "driver",
            (
                ("voh_v", "drive_high_v"),
                ("vol_v", "drive_low_v"),
                ("source_current_max_a", "driver_current_max_a"),
                ("vdd_v", "drive_supply_v"),
            ),
        ),
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
        Result("transistor_power_w", "W", "(Vce_sat Ic + Vbe_sat Ib) x duty cycle"),
        Result("off_state_base_v", "V", "base voltage when off, hot (pin low; floating with a pull-down)"),
        Result("rbe_recommended_ohm", "ohm", "base pull-down that holds a floating pin's transistor off"),
        Result("transistor_rth_k_per_w", "K/W", "junction to ambient thermal resistance used"),
        Result("junction_c", "°C", "junction temperature at ambient_c and transistor_power_w"),
        Result("derated_power_limit_w", "W", "dissipation limit derated to ambient_c"),
    ),
    make_inputs=lambda c: columns_as(BjtSwitchInputs, c),
    validate=validate,
    compute=compute,
)
