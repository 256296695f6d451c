"""How the logic pin and temperature act on an NPN switch's base: the design ratio a part calls for, the pin's
stress corner, the off-state base voltage, the base pull-down and the voltage rating (``bjt_switch`` and the
channel's worst case use these).

Temperature
    A silicon junction's forward voltage falls about 2 mV/K (from memory; Sedra & Smith, "Microelectronic
    Circuits", diode temperature dependence). From the 25 °C datasheet values to a hot junction at 125 °C
    (100 K; from memory, the usual top of the operating junction range) each junction in the base path loses
    0.2 V; a Darlington pair has two in series (``base_junctions``).

Design ratio (forced beta)
    Vce(sat) is guaranteed only at the datasheet's test ratio Ic/Ib (``vce_sat_forced_beta``: 10 for most
    small-signal parts, a few hundred for Darlingtons; common practice, from memory). Unless the user sets one,
    the design ratio is that test ratio divided by (1 + the base resistor's tolerance), so a high resistor still
    keeps Ic/Ib within it, and lowered where needed to keep an overdrive of 2 over the worst-case gain
    (hfe_min/β ≥ 2, common practice). Designing a Darlington at Ic/Ib = 10 buys almost nothing: its output
    transistor never saturates, Vce ≥ Vbe2 + Vce_sat1 (textbook Darlington behaviour).

Pin stress corner
    The switch is checked for saturation at the corner of least base current; the pin at the corner of most
    (common practice: worst case is two-sided): its high level at its own supply (light load), the hot
    base-emitter voltage and the base resistor at −tolerance:  I_pin = (V_dd − (Vbe_sat − n·0.2 V)) / Rb.

Off state
    Off, the pin sinks only leakage, so its low level is vol·I_leak/I_rated (a resistive pin whose vol is stated
    at its rated current, taken as its source rating; common practice), not the vol stated at rated current.
    With no rating given, vol is taken as stated at 1 mA, the least sink current logic pins state it at (common
    practice, from memory): the most resistive pin a real rating would give.
    The leakage into the base when hot (collector-base leakage and the pin's input leakage) is taken as 1 µA
    (from memory, small-signal class near 125 °C). The base must stay below the hot turn-on threshold
    n·(0.6 V − 0.2 V) (0.6 V per junction at 25 °C, common practice):
        pin low:       Vb = V_low·Rbe/(Rb + Rbe) + I_leak·(Rb ∥ Rbe)
        pin floating:  Vb = I_leak·Rbe   (high impedance during reset or programming)
    Without a pull-down nothing holds a floating base. The recommended pull-down is the standard value at or
    below min(10·Rb, V_on/(2·I_leak)): it takes about a tenth of the drive and holds a floating base at half
    the threshold (common practice).

Voltage rating
    Off, the whole supply stands across the collector and emitter: the highest supply must stay within
    vceo_max_v / 1.2 (a 1.2 derating, common practice).
"""

from __future__ import annotations

import numpy as np

from calcsvc.core import eseries
from calcsvc.core.outcome import FloatArray, Violation, first_bad, require
from calcsvc.core.spec import Input, positive

JUNCTION_TEMPCO_V_PER_K = 2e-3  # fall of a junction's forward voltage with temperature (from memory)
HOT_RISE_K = 100.0  # 25 °C datasheet values to a 125 °C junction (from memory)
HOT_DROP_V = JUNCTION_TEMPCO_V_PER_K * HOT_RISE_K  # per junction
TURN_ON_V = 0.6  # per junction at 25 °C (common practice)
LEAKAGE_HOT_A = 1e-6  # leakage into the base, hot (from memory)
VOL_RATED_UNKNOWN_A = 1e-3  # the current vol is taken as stated at when the pin's rating is unknown
OVERDRIVE_MIN = 2.0  # hfe_min over the design ratio (common practice)
PULLDOWN_PER_RB = 10.0  # pull-down about ten times the base resistor: a tenth of the drive (common practice)
VCEO_DERATING = 1.2  # vceo_max_v at least 1.2 times the highest supply (common practice)


def design_forced_beta(
    forced_beta: FloatArray, hfe_min: FloatArray, vce_sat_forced_beta: FloatArray, rb_tolerance: FloatArray
) -> FloatArray:
    """The Ic/Ib to design for: as given, or from the part (module docstring)."""
    derived = np.maximum(1.0, np.minimum(vce_sat_forced_beta / (1.0 + rb_tolerance), hfe_min / OVERDRIVE_MIN))
    return np.where(np.isnan(forced_beta), derived, forced_beta)


def vbe_hot(vbe_sat_v: FloatArray, base_junctions: FloatArray) -> FloatArray:
    """The base-emitter voltage of a hot junction (never below zero)."""
    return np.maximum(vbe_sat_v - base_junctions * HOT_DROP_V, 0.0)


def turn_on_hot(base_junctions: FloatArray) -> FloatArray:
    """The base voltage at which a hot transistor starts to conduct."""
    return base_junctions * (TURN_ON_V - HOT_DROP_V)


def pin_high(drive_high_v: FloatArray, drive_supply_v: FloatArray) -> FloatArray:
    """The pin's high level at light load: its supply, or (not given) its rated high level."""
    return np.where(np.isnan(drive_supply_v), drive_high_v, drive_supply_v)


def pin_stress_current(
    high_v: FloatArray, vbe_sat_v: FloatArray, base_junctions: FloatArray, rb_ohm: FloatArray
) -> FloatArray:
    """The most the pin sources through ``rb_ohm`` (broadcasts): at ``high_v``, with a hot junction."""
    return (high_v - vbe_hot(vbe_sat_v, base_junctions)) / rb_ohm


def off_base_voltage(
    drive_low_v: FloatArray, pin_rating_a: FloatArray, rb_ohm: FloatArray, rbe_ohm: FloatArray
) -> FloatArray:
    """The higher base voltage, hot, of the pin driven low and (with a pull-down) the pin floating; broadcasts."""
    rated = np.where(np.isnan(pin_rating_a), VOL_RATED_UNKNOWN_A, pin_rating_a)
    scale = np.minimum(1.0, LEAKAGE_HOT_A / rated)
    v_low = drive_low_v * scale
    with np.errstate(invalid="ignore"):
        share = np.where(np.isnan(rbe_ohm), 1.0, rbe_ohm / (rb_ohm + rbe_ohm))
        driven = (v_low + LEAKAGE_HOT_A * rb_ohm) * share
        return np.fmax(driven, LEAKAGE_HOT_A * rbe_ohm)


def recommended_pulldown(rb_ohm: FloatArray, base_junctions: FloatArray, e_series: np.ndarray) -> FloatArray:
    """A base pull-down for the floating pin: the standard value at or below the rule in the docstring."""
    target = np.minimum(PULLDOWN_PER_RB * rb_ohm, turn_on_hot(base_junctions) / (2.0 * LEAKAGE_HOT_A))
    return eseries.pick_at_or_below_rows(target, e_series)


def voltage_limit(vceo_max_v: FloatArray) -> FloatArray:
    """The highest supply a transistor of this rating may switch (NaN: rating unknown)."""
    return vceo_max_v / VCEO_DERATING


def require_drive(
    v: list[Violation],
    given: dict[str, FloatArray],
    vce_sat_forced_beta: FloatArray,
    base_junctions: FloatArray,
    drive_high_v: FloatArray,
) -> None:
    """The preconditions on the inputs these models add; ``given`` holds the optional inputs (NaN: absent)."""
    with np.errstate(invalid="ignore"):
        for name, x in (("forced_beta", given["forced_beta"]), ("vce_sat_forced_beta", vce_sat_forced_beta)):
            bad = x < 1  # NaN (not given) compares False
            message = f"{name} ({first_bad(x, bad)}) must be at least 1: the base cannot need more than Ic"
            require(v, bad, name, message)
        tolerance = given["resistor_tolerance"]
        bad = (tolerance < 0) | (tolerance >= 1)  # at 1 the base resistor could be 0 Ω
        require(v, bad, "resistor_tolerance", f"resistor_tolerance ({first_bad(tolerance, bad)}) must lie in [0, 1)")
        bad = np.isfinite(base_junctions) & (base_junctions != 1) & (base_junctions != 2)
        require(v, bad, "base_junctions", f"base_junctions ({first_bad(base_junctions, bad)}) must be 1 or 2")
        for name in ("rbe_ohm", "driver_current_max_a", "vceo_max_v", "supply_max_v", "drive_supply_v"):
            bad = given[name] <= 0
            require(v, bad, name, f"{name} ({first_bad(given[name], bad)}) must be positive when given")
        bad = given["drive_supply_v"] < drive_high_v
        supply = first_bad(given["drive_supply_v"], bad)
        message = (
            f"drive_supply_v ({supply} V) must be at least drive_high_v: a pin's high level stays below its supply"
        )
        require(v, bad, "drive_supply_v", message)


# ---- the inputs these models add to the switch (shared by bjt-switch and the channel review) ----------------

FORCED_BETA = Input(
    "forced_beta", "dimensionless", "Ic/Ib to design for; absent: from the part", optional=True, minimum=1
)
VCE_SAT_FORCED_BETA = Input(
    "vce_sat_forced_beta", "dimensionless", "Ic/Ib at which vce_sat_v is specified", 10.0, minimum=1
)
BASE_JUNCTIONS = Input(
    "base_junctions",
    "dimensionless",
    "junctions base to emitter: 2 for a Darlington",
    1,
    minimum=1,
    maximum=2,
    integer=True,
)
VCEO_MAX_V = positive("vceo_max_v", "V", "transistor's collector-emitter rating", optional=True)
RBE_OHM = positive("rbe_ohm", "ohm", "base-emitter pull-down resistor", optional=True)
DRIVE_SUPPLY_V = positive("drive_supply_v", "V", "the driver pin's own supply", optional=True)
TRANSISTOR_EXTRAS = tuple((p, p) for p in ("vce_sat_forced_beta", "base_junctions", "vceo_max_v"))
