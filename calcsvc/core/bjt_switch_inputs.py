"""The inputs of the NPN low-side switch ("bjt-switch"), their physical preconditions, and the design base
current and exact base resistor both the checks and the calculation use (model: ``bjt_switch``)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calcsvc.core import bjt_drive, eseries, pwm_timing, switch_heat
from calcsvc.core.outcome import FloatArray, Violation, first_bad, require, require_practical

OPTIONAL = (
    "forced_beta",
    "resistor_tolerance",
    "rbe_ohm",
    "driver_current_max_a",
    "vceo_max_v",
    "supply_max_v",
    "drive_supply_v",
    "pwm_frequency_hz",
    "camera_frame_rate_hz",
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
    td_s: FloatArray  # stated switching times (pwm_timing.bipolar_times)
    tr_s: FloatArray
    ts_s: FloatArray
    tf_s: FloatArray
    pwm_frequency_hz: FloatArray  # NaN: static switching
    pwm_resolution_bits: FloatArray
    modulation_depth: FloatArray
    camera_frame_rate_hz: FloatArray  # NaN: no camera
    # Heat (``switch_heat``); NaN: not given.
    ambient_c: FloatArray
    tj_max_c: FloatArray
    rth_ja_k_per_w: FloatArray  # NaN: from power_max_w at 25 °C
    rth_jc_k_per_w: FloatArray
    heatsink_k_per_w: FloatArray  # NaN: none


def rbe_current(inputs: BjtSwitchInputs) -> FloatArray:
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
            **{name: getattr(i, name) for name in ("td_s", "tr_s", "ts_s", "tf_s", "pwm_resolution_bits")},
            "modulation_depth": i.modulation_depth,
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
        pwm_timing.require_pwm(v, i.pwm_frequency_hz, i.pwm_resolution_bits, i.modulation_depth, i.camera_frame_rate_hz)
        for name in ("td_s", "tr_s", "ts_s", "tf_s"):
            bad = getattr(i, name) < 0
            require(v, bad, name, f"{name} ({first_bad(getattr(i, name), bad)} s) must not be negative")
        bad = i.drive_high_v <= i.vbe_sat_v
        high, vbe = first_bad(i.drive_high_v, bad), first_bad(i.vbe_sat_v, bad)
        message = f"drive_high_v ({high} V) must exceed vbe_sat_v ({vbe} V): else no current flows through the base"
        require(v, bad, "drive_high_v", message)
        bad = i.drive_low_v >= i.drive_high_v
        low, high = first_bad(i.drive_low_v, bad), first_bad(i.drive_high_v, bad)
        require(v, bad, "drive_low_v", f"drive_low_v ({low} V) must be below drive_high_v ({high} V)")
        eseries.require_known_series(v, i.e_series)
        require_practical(v, required | given, ("rbe_ohm", "pwm_frequency_hz", "camera_frame_rate_hz"))
        v += switch_heat.validate(i)
        if not v:
            # Only when everything else holds: the exact base resistor must lie where standard values exist.
            rb_exact = exact_base_resistor(i)
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
            ib_req = i.collector_current_a / design_beta(i)
            bad = rbe_current(i) > MAX_PULLDOWN_SHARE * ib_req
            require(
                v,
                bad,
                "rbe_ohm",
                f"rbe_ohm ({first_bad(i.rbe_ohm, bad)} Ω) would take over {MAX_PULLDOWN_SHARE:g} times the "
                f"base current ({first_bad(ib_req, bad)} A): choose a larger pull-down",
            )
    return v


def design_beta(inputs: BjtSwitchInputs) -> FloatArray:
    tolerance = eseries.tolerance_rows(inputs.resistor_tolerance, inputs.e_series)
    return bjt_drive.design_forced_beta(inputs.forced_beta, inputs.hfe_min, inputs.vce_sat_forced_beta, tolerance)


def exact_base_resistor(inputs: BjtSwitchInputs) -> FloatArray:
    ib_req = inputs.collector_current_a / design_beta(inputs)
    return (inputs.drive_high_v - inputs.vbe_sat_v) / (ib_req + rbe_current(inputs))
