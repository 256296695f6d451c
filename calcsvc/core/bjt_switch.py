"""NPN low-side switch driven from a logic pin ("bjt-switch").

Model
    A logic output at ``drive_high_v`` (Vh) drives the base through Rb; the emitter is grounded and the
    load sits between the supply and the collector. In saturation the base-emitter junction holds
    ``vbe_sat_v`` and the collector-emitter ``vce_sat_v``. An optional pull-down Rbe from base to emitter
    (``rbe_ohm``) steals Vbe_sat/Rbe of the drive current. To saturate hard the base gets Ic/β_forced
    with a forced beta well under the transistor's worst-case gain (β_forced = 10 is common practice):

        Ib_req = Ic / β_forced
        Rb_exact = (Vh − Vbe_sat) / (Ib_req + Vbe_sat/Rbe)

    Rb is the largest standard value (of the row's IEC 60063 series) at or below Rb_exact, so the base
    current is never less than required and saturation is kept. Then

        I_drive = (Vh − Vbe_sat)/Rb      (sourced by the pin)
        Ib      = I_drive − Vbe_sat/Rbe  (into the base)
        β_actual = Ic/Ib,  saturation margin = hfe_min/β_actual
        P = (Vce_sat·Ic + Vbe_sat·Ib)·D  (average over the switching period at duty cycle D)

Assumptions
    Saturation voltages are the datasheet-style constants given; switching losses are ignored; the load
    current Ic is set by the load, not by the transistor. Units: volts, amperes, ohms, watts.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calcsvc.core import eseries
from calcsvc.core.outcome import (
    Check,
    FloatArray,
    Notice,
    Outcome,
    Violation,
    add_notice,
    first_bad,
    raise_violations,
    require,
    require_practical,
    rows,
)
from calcsvc.core.spec import E_SERIES, CalculationSpec, Input, Result, Role, columns_as, fraction, positive

NAME = "bjt-switch"
VERSION = "1"

# The base-emitter junction starts to conduct around 0.6 V (0.6–0.7 V, common practice); keeping the
# "low" drive at or below 0.4 V leaves a 0.2 V margin so the transistor stays off (common practice).
OFF_STATE_MAX_V = 0.4
SATURATION_MARGIN_WARN = 2.0  # hfe_min at least twice the actual forced beta (common practice)
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
    forced_beta: FloatArray  # Ic/Ib to design for; 10 is common practice for hard saturation
    e_series: np.ndarray  # numpy str array, e.g. "E24"
    rbe_ohm: FloatArray  # NaN: no base-emitter pull-down
    driver_current_max_a: FloatArray  # NaN: unknown
    duty_cycle: FloatArray  # fraction of time on, 0..1


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
            "forced_beta": i.forced_beta,
            "duty_cycle": i.duty_cycle,
        }
        for name, x in required.items():
            bad = ~np.isfinite(x)
            require(v, bad, name, f"{name} must be a finite number (got {first_bad(x, bad)})")
        for name, x in (("rbe_ohm", i.rbe_ohm), ("driver_current_max_a", i.driver_current_max_a)):
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
        bad = i.forced_beta < 1
        require(
            v,
            bad,
            "forced_beta",
            f"forced_beta ({first_bad(i.forced_beta, bad)}) must be at least 1: the base cannot need more "
            "current than the collector carries",
        )
        bad = i.rbe_ohm <= 0  # NaN (not given) compares False
        require(v, bad, "rbe_ohm", f"rbe_ohm ({first_bad(i.rbe_ohm, bad)} Ω) must be positive when given")
        bad = i.driver_current_max_a <= 0
        require(
            v,
            bad,
            "driver_current_max_a",
            f"driver_current_max_a ({first_bad(i.driver_current_max_a, bad)} A) must be positive when given",
        )
        bad = (i.duty_cycle < 0) | (i.duty_cycle > 1)
        require(v, bad, "duty_cycle", f"duty_cycle ({first_bad(i.duty_cycle, bad)}) must lie in [0, 1]")
        bad = i.drive_high_v <= i.vbe_sat_v
        if bad.any():
            k = int(np.argmax(bad))
            require(
                v,
                bad,
                "drive_high_v",
                f"drive_high_v ({i.drive_high_v[k]:g} V) must exceed vbe_sat_v ({i.vbe_sat_v[k]:g} V): "
                "otherwise no current flows through the base resistor",
            )
        bad = i.drive_low_v >= i.drive_high_v
        if bad.any():
            k = int(np.argmax(bad))
            require(
                v,
                bad,
                "drive_low_v",
                f"drive_low_v ({i.drive_low_v[k]:g} V) must be below drive_high_v ({i.drive_high_v[k]:g} V)",
            )
        eseries.require_known_series(v, i.e_series)
        require_practical(
            v, required | {"rbe_ohm": i.rbe_ohm, "driver_current_max_a": i.driver_current_max_a}, ("rbe_ohm",)
        )
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
            ib_req = i.collector_current_a / i.forced_beta
            bad = _rbe_current(i) > MAX_PULLDOWN_SHARE * ib_req
            require(
                v,
                bad,
                "rbe_ohm",
                f"rbe_ohm ({first_bad(i.rbe_ohm, bad)} Ω) would take over {MAX_PULLDOWN_SHARE:g} times the "
                f"base current ({first_bad(ib_req, bad)} A): choose a larger pull-down",
            )
    return v


def _rb_exact(inputs: BjtSwitchInputs) -> FloatArray:
    ib_req = inputs.collector_current_a / inputs.forced_beta
    return (inputs.drive_high_v - inputs.vbe_sat_v) / (ib_req + _rbe_current(inputs))


def compute(inputs: BjtSwitchInputs, validated: bool = False) -> Outcome:
    """Choose the base resistor and check saturation, the driver pin and the transistor's ratings.

    Raises DomainError when any row violates ``validate``.
    """
    if not validated:  # the caller has just validated these very inputs
        raise_violations(validate(inputs))
    i = inputs
    n = i.hfe_min.shape[0]
    ic = i.collector_current_a
    ib_req = ic / i.forced_beta
    i_rbe = _rbe_current(i)
    rb_exact = _rb_exact(i)
    rb = eseries.pick_at_or_below_rows(rb_exact, i.e_series)
    drive = (i.drive_high_v - i.vbe_sat_v) / rb
    ib = drive - i_rbe  # > 0: rb ≤ rb_exact means drive ≥ ib_req + i_rbe (to 1e-9)
    beta_actual = ic / ib
    margin = i.hfe_min / beta_actual
    power = (i.vce_sat_v * ic + i.vbe_sat_v * ib) * i.duty_cycle

    results: dict[str, np.ndarray] = {
        "base_current_required_a": ib_req,
        "rb_exact_ohm": rb_exact,
        "rb_ohm": rb,
        "drive_current_a": drive,
        "base_current_a": ib,
        "forced_beta_actual": beta_actual,
        "saturation_margin": margin,
        "transistor_power_w": power,
    }

    driver_limit = np.asarray(i.driver_current_max_a, dtype=np.float64)
    driver_over = ~np.isnan(driver_limit) & (drive > driver_limit)
    off_limit = rows(n, OFF_STATE_MAX_V)
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
            "driver_current",
            ~driver_over,
            drive,
            driver_limit,
            "max",
            "The current the drive pin sources must not exceed its rating (not checked when unknown).",
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
            "power_rating",
            power <= i.power_max_w,
            power,
            i.power_max_w,
            "max",
            "The transistor's average dissipation must not exceed its power rating.",
        ),
        Check(
            "off_state",
            i.drive_low_v <= OFF_STATE_MAX_V,
            i.drive_low_v,
            off_limit,
            "max",
            "The low drive level must stay at or below 0.4 V, a 0.2 V margin under the ~0.6 V at which the "
            "base-emitter junction starts to conduct (common practice), so the transistor turns off.",
        ),
    ]

    warnings: list[Notice] = []
    cautions: list[Notice] = []

    add_notice(
        warnings,
        margin < 1.0,
        "The actual forced beta is at or above hfe_min: at worst-case gain the transistor does not saturate "
        "and will dissipate far more than computed.",
    )
    add_notice(
        warnings,
        (margin >= 1.0) & (margin < SATURATION_MARGIN_WARN),
        "hfe_min is less than twice the actual forced beta: little margin over worst-case gain "
        "(gain also falls at low temperature and high current).",
    )
    add_notice(
        warnings,
        i.duty_cycle < 1.0,
        "transistor_power_w is averaged over the switching period; the power while on is higher "
        "(divide by duty_cycle).",
    )
    add_notice(
        cautions,
        ic > i.ic_max_a,
        "The collector current exceeds the transistor's rating: the transistor can fail.",
    )
    add_notice(
        cautions,
        power > i.power_max_w,
        "The transistor dissipates more than its rating: it will overheat and can fail.",
    )
    add_notice(
        cautions,
        driver_over,
        "The drive pin would source more than its rating: this can damage the microcontroller or logic "
        "output; use a larger base resistor with a higher-gain transistor, or a buffer.",
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
        Input("forced_beta", "dimensionless", "Ic/Ib to design for (10: common practice)", 10.0, minimum=1),
        Input("e_series", "", "standard resistor series", "E24", choices=E_SERIES),
        positive("rbe_ohm", "ohm", "base-emitter pull-down resistor", optional=True),
        positive("driver_current_max_a", "A", "largest current the driver may source", optional=True),
        fraction("duty_cycle", "fraction of time on", default=1.0),
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
            ),
            must_have=(("polarity", "npn"),),
        ),
        Role(
            "driver",
            "driver",
            (("voh_v", "drive_high_v"), ("vol_v", "drive_low_v"), ("source_current_max_a", "driver_current_max_a")),
        ),
    ),
    results=(
        Result("base_current_required_a", "A", "collector current / forced beta"),
        Result("rb_exact_ohm", "ohm", "base resistor giving exactly the required base current"),
        Result("rb_ohm", "ohm", "largest standard value not above the exact one"),
        Result("drive_current_a", "A", "current the driver sources through rb_ohm"),
        Result("base_current_a", "A", "current into the base after the pull-down's share"),
        Result("forced_beta_actual", "A/A", "collector current / base current with rb_ohm"),
        Result("saturation_margin", "", "hfe_min / forced_beta_actual"),
        Result("transistor_power_w", "W", "(Vce_sat Ic + Vbe_sat Ib) x duty cycle"),
    ),
    make_inputs=lambda c: columns_as(BjtSwitchInputs, c),
    validate=validate,
    compute=compute,
)
