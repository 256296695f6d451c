"""The inputs of the MOSFET low-side switch ("mosfet-switch") and their physical preconditions; the wanted
edge time and the gate resistor's driving voltage both the checks and the calculation use (model:
``mosfet_switch``)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calcsvc.core import eseries, pwm_timing
from calcsvc.core.outcome import FloatArray, Violation, first_bad, require, require_practical

STATIC_SWITCHING_S = 1e-6  # wanted edge time without a PWM (our default; speed does not matter then)
EDGE_SHARE_OF_PULSE = 0.5 / pwm_timing.ON_TIME_MULTIPLE  # each edge a twentieth of the shortest pulse
POINTS = (("vgs_1_v", "rds_on_1_ohm"), ("vgs_2_v", "rds_on_2_ohm"), ("vgs_3_v", "rds_on_3_ohm"))
DIVISORS = (
    "qg_total_c",
    "power_max_w",
    "rth_ja_k_per_w",
    "driver_current_max_a",
    "gate_pulldown_ohm",
    "pwm_frequency_hz",
    "camera_frame_rate_hz",
)
OPTIONAL = (
    "vgs_2_v",
    "rds_on_2_ohm",
    "vgs_3_v",
    "rds_on_3_ohm",
    "rth_ja_k_per_w",
    "switching_time_s",
    "gate_pulldown_ohm",
    "driver_current_max_a",
    "drive_supply_v",
    "resistor_tolerance",
    "pwm_frequency_hz",
    "camera_frame_rate_hz",
)


@dataclass(frozen=True)
class MosfetSwitchInputs:
    vds_max_v: FloatArray
    id_max_a: FloatArray
    vgs_1_v: FloatArray  # lowest gate voltage with a stated on-resistance
    rds_on_1_ohm: FloatArray
    vgs_2_v: FloatArray  # NaN: not stated
    rds_on_2_ohm: FloatArray
    vgs_3_v: FloatArray
    rds_on_3_ohm: FloatArray
    vgs_th_max_v: FloatArray
    qg_total_c: FloatArray
    power_max_w: FloatArray  # at 25 °C ambient without a heat sink
    tj_max_c: FloatArray
    rth_ja_k_per_w: FloatArray  # NaN: from power_max_w
    drain_current_a: FloatArray  # load current when on
    supply_max_v: FloatArray  # highest supply across the switched load
    drive_high_v: FloatArray
    drive_low_v: FloatArray
    driver_current_max_a: FloatArray  # NaN: unknown
    drive_supply_v: FloatArray  # NaN: drive_high_v stands for it
    switching_time_s: FloatArray  # wanted edge time; NaN: from the PWM (module docstring)
    gate_pulldown_ohm: FloatArray  # NaN: none fitted
    e_series: np.ndarray
    resistor_tolerance: FloatArray  # NaN: the series' own
    duty_cycle: FloatArray
    ambient_c: FloatArray
    pwm_frequency_hz: FloatArray  # NaN: static switching
    pwm_resolution_bits: FloatArray
    modulation_depth: FloatArray  # of the light, 1 when the PWM switches it fully off
    camera_frame_rate_hz: FloatArray  # NaN: no camera


def validate(inputs: MosfetSwitchInputs) -> list[Violation]:
    """Every physical precondition, per row; never raises."""
    v: list[Violation] = []
    i = inputs
    optional = {name: getattr(i, name) for name in OPTIONAL}
    required = {
        f: getattr(i, f) for f in MosfetSwitchInputs.__dataclass_fields__ if f not in OPTIONAL and f != "e_series"
    }
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        for name, x in required.items():
            bad = ~np.isfinite(x)
            require(v, bad, name, f"{name} must be a finite number (got {first_bad(x, bad)})")
        for name, x in optional.items():
            require(v, np.isinf(x), name, f"{name} must be finite when given")
        for name, x in {**required, **optional}.items():
            if name in ("drive_low_v", "ambient_c", "tj_max_c", "duty_cycle", "resistor_tolerance", "modulation_depth"):
                continue
            bad = x <= 0
            require(v, bad, name, f"{name} ({first_bad(x, bad)}) must be positive")
        require_practical(v, {**required, **optional}, divisors=DIVISORS)
        eseries.require_known_series(v, i.e_series)
        bad = (i.duty_cycle < 0) | (i.duty_cycle > 1)
        require(v, bad, "duty_cycle", f"duty_cycle ({first_bad(i.duty_cycle, bad)}) must lie in [0, 1]")
        pwm_timing.require_pwm(v, i.pwm_frequency_hz, i.pwm_resolution_bits, i.modulation_depth, i.camera_frame_rate_hz)
        bad = (i.resistor_tolerance < 0) | (i.resistor_tolerance >= 1)
        require(
            v,
            bad,
            "resistor_tolerance",
            f"resistor_tolerance ({first_bad(i.resistor_tolerance, bad)}) must lie in [0, 1)",
        )
        _require_points(v, i)
        # A pin under vgs_1_v gives an unstated on-resistance (vgs_1_v > vgs_th_max_v: a pin at or under the
        # threshold is refused here too).
        unstated = i.drive_high_v < i.vgs_1_v
        threshold = first_bad(i.vgs_th_max_v, unstated)
        require(
            v,
            unstated,
            "drive_high_v",
            f"drive_high_v ({first_bad(i.drive_high_v, unstated)} V) is below the lowest gate voltage at which the "
            f"part states its on-resistance (vgs_1_v {first_bad(i.vgs_1_v, unstated)} V; threshold up to "
            f"{threshold} V): its on-resistance from this pin is not specified, so it is not a logic-level part "
            "for this pin; choose one stated at or below the pin's high level, or a gate driver",
        )
        bad = (i.drive_low_v < 0) | (i.drive_low_v >= i.drive_high_v)
        require(
            v, bad, "drive_low_v", f"drive_low_v ({first_bad(i.drive_low_v, bad)} V) must lie from 0 up to drive_high_v"
        )
        bad = i.drive_supply_v < i.drive_high_v
        require(
            v,
            bad,
            "drive_supply_v",
            f"drive_supply_v ({first_bad(i.drive_supply_v, bad)} V) must be at least drive_high_v",
        )
        bad = i.ambient_c >= i.tj_max_c
        require(v, bad, "ambient_c", f"ambient_c ({first_bad(i.ambient_c, bad)} °C) must be below tj_max_c")
        wanted = wanted_time(i)
        rg = wanted * gate_drive_v(i) / i.qg_total_c
        bad = (
            (rg > 0) & np.isfinite(rg) & ((rg < eseries.MIN_VALUE) | (rg > eseries.MAX_VALUE))
        )  # rg ≤ 0: refused above
        require(
            v,
            bad,
            "switching_time_s",
            f"the wanted switching time gives a gate resistor of {first_bad(rg, bad)} Ω, outside any practical range",
        )
    return v


def _require_points(v: list[Violation], i: MosfetSwitchInputs) -> None:
    """Each stated on-resistance has its gate voltage; points rise in gate voltage and fall in resistance."""
    for volts, ohms in POINTS[1:]:
        a, b = getattr(i, volts), getattr(i, ohms)
        bad = np.isnan(a) != np.isnan(b)
        require(v, bad, ohms, f"{volts} and {ohms} are given together or not at all")
    for (low_v, low_ohm), (high_v, high_ohm) in (
        (POINTS[0], POINTS[1]),
        (POINTS[1], POINTS[2]),
        (POINTS[0], POINTS[2]),
    ):
        bad = getattr(i, high_v) <= getattr(i, low_v)
        require(v, bad, high_v, f"{high_v} ({first_bad(getattr(i, high_v), bad)} V) must be greater than {low_v}")
        bad = getattr(i, high_ohm) > getattr(i, low_ohm)
        require(
            v,
            bad,
            high_ohm,
            f"{high_ohm} ({first_bad(getattr(i, high_ohm), bad)} Ω) must not exceed {low_ohm}: a higher gate "
            "voltage never raises the on-resistance",
        )
    bad = i.vgs_1_v <= i.vgs_th_max_v
    require(v, bad, "vgs_1_v", f"vgs_1_v ({first_bad(i.vgs_1_v, bad)} V) must be greater than vgs_th_max_v")


def gate_drive_v(i: MosfetSwitchInputs) -> FloatArray:
    """The smaller of the voltages driving the gate current through Rg on the two edges (pwm_timing; the pin's
    own resistance, small beside Rg, left out: the edge-time check counts it)."""
    return np.minimum(i.drive_high_v - i.vgs_th_max_v, pwm_timing.gate_threshold_low(i.vgs_th_max_v))


def wanted_time(i: MosfetSwitchInputs) -> FloatArray:
    shortest = pwm_timing.shortest_on_time(i.pwm_frequency_hz, i.pwm_resolution_bits)
    derived = np.where(np.isnan(shortest), STATIC_SWITCHING_S, shortest * EDGE_SHARE_OF_PULSE)
    return np.where(np.isnan(i.switching_time_s), derived, i.switching_time_s)
