"""Stability of an op-amp gain stage with a second open-loop pole and a capacitive load
("opamp-stability").

Model
-----
The op-amp's open-loop gain is an integrator to its gain-bandwidth product with a second pole p2
(``second_pole_hz``, where given): A(s) = ωt/s · 1/(1 + s/ω2). Its output resistance Ro
(``output_resistance_ohm``) drives the load capacitance CL (``load_capacitance_f``) through an optional
isolation resistor Riso (``isolation_ohm``); the feedback is taken at the op-amp's output pin, so the loop sees

    T(s) = A(s)/NG · (1 + s·Riso·CL) / (1 + s·(Ro + Riso)·CL)

(a pole at 1/(2π(Ro+Riso)CL) and, with Riso, a zero at 1/(2π·Riso·CL)). The crossover fc solves |T| = 1
(|T| falls monotonically, found by bisection) and the phase margin is PM = 180° + ∠T(fc)
= 90° − atan(fc/p2) − atan(fc/pL) + atan(fc/z). Textbook two-pole analysis (e.g. Franco, *Design with
Operational Amplifiers and Analog Integrated Circuits*, 3rd ed., §8.1–8.3, from memory): a follower with its
second pole at the GBW has PM = 51.8°.

Closed-loop peaking and step overshoot are those of the two-pole loop with the same phase margin (exact for
two poles; Ogata, *Modern Control Engineering*, §5.3 and §7.2, from memory): its damping is
ζ = ½·√(x/√(1 + x)) with x = tan²PM, the step overshoot exp(−πζ/√(1 − ζ²)) for ζ < 1 and the peaking
1/(2ζ√(1 − ζ²)) for ζ < 1/√2.

Check ``phase_margin``: PM at least ``phase_margin_min_deg`` (45° is common practice); it applies only where a
second pole or a load (Ro with CL) is given, since a single-pole loop always has 90°. Where it fails and the
load is given, ``isolation_suggested_ohm`` is the smallest E24 value whose PM meets the limit (bisection for
the least Riso, then the E24 value at or above it, re-evaluated: ``isolation_phase_margin_deg``). The load then
sees Riso·CL as a low-pass outside the loop (``isolated_load_pole_hz``).

Assumptions: linear small signals; the feedback network does not load the output (Rf + Rg ≫ Ro); ideal at DC.
Units: Hz, Ω, F, degrees.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from calcsvc.core import eseries
from calcsvc.core.feedback import CONFIGURATION, GAIN, noise_gain, stage_inputs, validate_gain, validate_resistance
from calcsvc.core.outcome import (
    BoolArray,
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
)
from calcsvc.core.spec import CalculationSpec, Input, Result, Role, positive

NAME = "opamp-stability"
VERSION = "1"

DEFAULT_PHASE_MARGIN_MIN_DEG = 45.0  # common practice
_BISECTIONS = 80  # halvings of a log interval of at most 1e40: far below float64 resolution
_RISO_RANGE_OHM = (1e-3, 1e9)


@dataclass(frozen=True)
class StabilityInputs:
    """Per-row inputs, arrays of shape ``(n,)``; NaN: not given (``isolation_ohm`` NaN: no resistor)."""

    inverting: BoolArray
    gain: FloatArray
    gbw_hz: FloatArray
    second_pole_hz: FloatArray
    output_resistance_ohm: FloatArray
    load_capacitance_f: FloatArray
    isolation_ohm: FloatArray
    phase_margin_min_deg: FloatArray


def validate(inputs: StabilityInputs) -> list[Violation]:
    """Every physical precondition, per row; never raises."""
    i = inputs
    v: list[Violation] = []
    validate_gain(v, np.asarray(i.inverting, dtype=bool), i.gain)
    for name, unit in (("gbw_hz", "Hz"), ("phase_margin_min_deg", "°")):
        values = getattr(i, name)
        bad = ~np.isfinite(values) | (values <= 0.0)
        require(v, bad, name, f"{name} ({first_bad(values, bad)} {unit}) is required and must be above 0")
    bad = i.phase_margin_min_deg >= 90.0
    require(
        v,
        bad,
        "phase_margin_min_deg",
        f"phase_margin_min_deg ({first_bad(i.phase_margin_min_deg, bad)}°) must be below 90°, the most any loop "
        "of this model has",
    )
    for name in ("second_pole_hz", "load_capacitance_f"):
        values = getattr(i, name)
        bad = np.isinf(values) | (values <= 0.0)
        require(v, bad, name, f"{name} ({first_bad(values, bad)}) must be a finite number above 0 when given")
    for name in ("output_resistance_ohm", "isolation_ohm"):
        validate_resistance(v, name, getattr(i, name))
    names = ("gain", "gbw_hz", "second_pole_hz", "output_resistance_ohm", "load_capacitance_f", "isolation_ohm")
    require_practical(v, {name: getattr(i, name) for name in names}, ("gain", "second_pole_hz"))
    return v


@dataclass(frozen=True)
class Loop:
    """The loop's corner frequencies per row (Hz; inf: absent)."""

    unity_hz: FloatArray  # GBW/NG: where the loop would cross without the extra poles
    second_pole_hz: FloatArray
    load_pole_hz: FloatArray
    load_zero_hz: FloatArray

    def magnitude(self, f: FloatArray) -> FloatArray:
        return (
            (self.unity_hz / f)
            / np.hypot(1.0, f / self.second_pole_hz)
            / np.hypot(1.0, f / self.load_pole_hz)
            * np.hypot(1.0, f / self.load_zero_hz)
        )

    def crossover_hz(self) -> FloatArray:
        """|T| = 1 by bisection in log frequency: |T| falls monotonically, is ≥ 1 far below every corner and
        ≤ 1 at ``unity_hz``."""
        low = np.log(np.fmin(np.fmin(self.unity_hz, self.second_pole_hz), self.load_pole_hz) * 1e-6)
        high = np.log(self.unity_hz)
        for _ in range(_BISECTIONS):
            middle = 0.5 * (low + high)
            above = self.magnitude(np.exp(middle)) >= 1.0
            low = np.where(above, middle, low)
            high = np.where(above, high, middle)
        return np.exp(0.5 * (low + high))

    def phase_margin_deg(self) -> FloatArray:
        fc = self.crossover_hz()
        lag = (
            np.arctan(fc / self.second_pole_hz) + np.arctan(fc / self.load_pole_hz) - np.arctan(fc / self.load_zero_hz)
        )
        return 90.0 - np.degrees(lag)


def loop_of(unity_hz: FloatArray, second_pole_hz: FloatArray, ro: FloatArray, cl: FloatArray, riso: FloatArray) -> Loop:
    """The loop with NaN (absent) corners as infinite; the load pole needs both Ro and CL."""
    # A vanishing R·C puts its corner at infinity: division by zero or overflow both mean "no corner".
    with np.errstate(divide="ignore", over="ignore"):
        pole = 1.0 / (2.0 * np.pi * (ro + riso) * cl)
        zero = 1.0 / (2.0 * np.pi * riso * cl)
    return Loop(
        unity_hz,
        np.where(np.isnan(second_pole_hz), np.inf, second_pole_hz),
        np.where(np.isnan(pole), np.inf, pole),
        np.where(np.isnan(zero), np.inf, zero),
    )


def damping(phase_margin_deg: FloatArray) -> FloatArray:
    """ζ of the two-pole loop with this phase margin (module docstring); NaN at 0° or less (unstable)."""
    with np.errstate(invalid="ignore", over="ignore"):
        x = np.tan(np.radians(np.clip(phase_margin_deg, None, 90.0))) ** 2
        zeta = np.where(phase_margin_deg >= 90.0, np.inf, 0.5 * np.sqrt(x / np.sqrt(1.0 + x)))
    return np.where(phase_margin_deg > 0.0, zeta, np.nan)


def overshoot_pct(zeta: FloatArray) -> FloatArray:
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(
            zeta < 1.0, 100.0 * np.exp(-np.pi * zeta / np.sqrt(1.0 - zeta**2)), np.where(zeta >= 1.0, 0.0, np.nan)
        )


def peaking_db(zeta: FloatArray) -> FloatArray:
    with np.errstate(invalid="ignore", divide="ignore"):
        peak = -20.0 * np.log10(2.0 * zeta * np.sqrt(1.0 - zeta**2))
        return np.where(zeta < math.sqrt(0.5), peak, np.where(zeta >= math.sqrt(0.5), 0.0, np.nan))


def _least_isolation(
    unity_hz: FloatArray, second_pole_hz: FloatArray, ro: FloatArray, cl: FloatArray, target_deg: FloatArray
) -> FloatArray:
    """The least Riso whose phase margin reaches ``target_deg`` (bisection in log Riso); NaN where even the
    largest Riso considered does not reach it."""
    low = np.full(unity_hz.shape, math.log(_RISO_RANGE_OHM[0]))
    high = np.full(unity_hz.shape, math.log(_RISO_RANGE_OHM[1]))
    reachable = loop_of(unity_hz, second_pole_hz, ro, cl, np.exp(high)).phase_margin_deg() >= target_deg
    for _ in range(_BISECTIONS // 2):
        middle = 0.5 * (low + high)
        enough = loop_of(unity_hz, second_pole_hz, ro, cl, np.exp(middle)).phase_margin_deg() >= target_deg
        low = np.where(enough, low, middle)
        high = np.where(enough, middle, high)
    return np.where(reachable, np.exp(high), np.nan)


def compute(inputs: StabilityInputs, validated: bool = False) -> Outcome:
    """Phase margin, peaking, overshoot and, where it falls short, an isolation resistor (model: module doc)."""
    if not validated:
        raise_violations(validate(inputs))
    i = inputs
    ng = noise_gain(np.asarray(i.inverting, dtype=bool), i.gain)
    unity = i.gbw_hz / ng
    riso = np.where(np.isnan(i.isolation_ohm), 0.0, i.isolation_ohm)
    loop = loop_of(unity, i.second_pole_hz, i.output_resistance_ohm, i.load_capacitance_f, riso)
    crossover = loop.crossover_hz()
    margin = loop.phase_margin_deg()
    zeta = damping(margin)
    load_known = ~np.isnan(i.output_resistance_ohm) & ~np.isnan(i.load_capacitance_f)
    applies = ~np.isnan(i.second_pole_hz) | load_known
    limit = np.where(applies, i.phase_margin_min_deg, np.nan)
    failing = margin < limit

    suggested = np.full(margin.shape, np.nan)
    suggested_margin = np.full(margin.shape, np.nan)
    rows = failing & load_known
    if rows.any():
        least = _least_isolation(
            unity[rows], i.second_pole_hz[rows], i.output_resistance_ohm[rows], i.load_capacitance_f[rows], limit[rows]
        )
        pick = np.where(np.isnan(least), np.nan, eseries.pick_at_or_above(np.nan_to_num(least, nan=1.0), "E24"))
        suggested[rows] = pick
        suggested_margin[rows] = loop_of(
            unity[rows], i.second_pole_hz[rows], i.output_resistance_ohm[rows], i.load_capacitance_f[rows], pick
        ).phase_margin_deg()
    with np.errstate(divide="ignore", over="ignore"):  # as in loop_of: a vanishing R·C has no corner
        load_pole = np.where(riso > 0.0, 1.0 / (2.0 * np.pi * riso * i.load_capacitance_f), np.nan)

    results = {
        "crossover_hz": crossover,
        "phase_margin_deg": margin,
        "damping_ratio": np.where(np.isinf(zeta), np.nan, zeta),
        "closed_loop_peaking_db": peaking_db(zeta),
        "step_overshoot_pct": overshoot_pct(zeta),
        "isolation_suggested_ohm": suggested,
        "isolation_phase_margin_deg": suggested_margin,
        "isolated_load_pole_hz": load_pole,
    }
    checks = [
        Check(
            "phase_margin",
            ~failing,
            np.where(applies, margin, np.nan),
            limit,
            "min",
            "the loop's phase margin with the second pole and the capacitive load must reach phase_margin_min_deg "
            "(45° is common practice) or the stage rings, peaks or oscillates; does not apply unless "
            "second_pole_hz or output_resistance_ohm with load_capacitance_f is given",
        )
    ]
    warnings: list[Notice] = []
    add_notice(
        warnings,
        ~(margin > 0.0),
        "the loop has no phase margin: this stage oscillates (peaking and overshoot do not apply)",
    )
    add_notice(
        warnings,
        failing & load_known & ~np.isnan(suggested),
        "the phase margin is short: an isolation resistor of isolation_suggested_ohm between the output and the "
        "capacitive load (feedback taken at the op-amp's pin) restores it; give it as isolation_ohm to check",
    )
    add_notice(
        warnings,
        failing & load_known & np.isnan(suggested),
        "the phase margin is short even without the load: no isolation resistor restores it; raise the noise "
        "gain or choose an op-amp stable at this gain",
    )
    add_notice(
        warnings,
        ~np.isnan(i.load_capacitance_f) & np.isnan(i.output_resistance_ohm),
        "load_capacitance_f is given without output_resistance_ohm: the load's pole is not in the loop",
    )
    return Outcome(results=results, checks=checks, warnings=warnings)


# ---- declaration --------------------------------------------------------------------------------------------

PART_INPUTS = (
    positive("second_pole_hz", "Hz", "op-amp's second open-loop pole", optional=True),
    Input("output_resistance_ohm", "ohm", "op-amp's open-loop output resistance", optional=True, minimum=0),
)
LOAD_INPUTS = (
    positive("load_capacitance_f", "F", "capacitance the output drives (cable, converter input)", optional=True),
    Input("isolation_ohm", "ohm", "resistor between the output and the capacitive load", optional=True, minimum=0),
    Input("phase_margin_min_deg", "deg", "least phase margin accepted", DEFAULT_PHASE_MARGIN_MIN_DEG, minimum=0,
          exclusive_minimum=True, maximum=89),
)  # fmt: skip
PARAMETERS = tuple((spec.name, spec.name) for spec in PART_INPUTS)

SPEC = CalculationSpec(
    name=NAME,
    summary="Phase margin, peaking and overshoot of an op-amp stage with a second pole and a capacitive load",
    version=VERSION,
    inputs=(CONFIGURATION, GAIN, positive("gbw_hz", "Hz", "op-amp gain-bandwidth product"), *PART_INPUTS, *LOAD_INPUTS),
    roles=(Role("opamp", "opamp", (("gbw_hz", "gbw_hz"), *PARAMETERS)),),
    results=(
        Result("crossover_hz", "Hz", "frequency where the loop gain falls to 1"),
        Result("phase_margin_deg", "deg", "180° plus the loop's phase at crossover"),
        Result("damping_ratio", "", "damping of the two-pole loop with this phase margin"),
        Result("closed_loop_peaking_db", "dB", "closed-loop peaking above the DC gain"),
        Result("step_overshoot_pct", "%", "small-signal step overshoot"),
        Result("isolation_suggested_ohm", "ohm", "E24 isolation resistor that restores the phase margin"),
        Result("isolation_phase_margin_deg", "deg", "phase margin with that resistor"),
        Result("isolated_load_pole_hz", "Hz", "the low-pass isolation_ohm and the load form outside the loop"),
    ),
    make_inputs=stage_inputs(StabilityInputs),
    validate=validate,
    compute=compute,
)
