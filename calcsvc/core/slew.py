"""Slew-rate and output-swing limits of an op-amp output (large-signal limits).

Model
-----
An output can change no faster than its slew rate SR (V/s). The steepest slope of a waveform of peak amplitude
Vp and frequency f is ``k·f·Vp`` with ``k = 2π`` for a sine (slope of ``Vp·sin 2πft`` at the zero crossing)
and ``k = 4`` for a symmetric triangle (it travels ``2·Vp`` in half a period). Hence:

- slew-limited amplitude at f:          ``SR / (k·f)``
- full-power bandwidth for Vp:           ``SR / (k·Vp)`` (highest undistorted frequency at that amplitude);
  without ``amplitude_v`` it is the datasheet's full-power bandwidth, at the largest swing the rails allow
- slew rate the waveform needs:          ``k·f·Vp``
- time to slew a step ΔV:                ``|ΔV| / SR``

The output swing is limited by the rails: with a total rail-to-rail span ``supply_v`` and an output that stops
``output_headroom_v`` short of each rail, a signal centred between the rails reaches at most
``supply_v/2 - headroom`` peak. An unknown headroom counts as 0 (a rail-to-rail output), so that limit is then
an upper bound.

The op-amp works only on a total supply span from ``opamp_supply_min_v`` to ``opamp_supply_max_v`` (its rated operating
range): ``supply_v`` is checked against both ends, and above the top one the part may be destroyed.

Assumptions: a symmetric slew rate (same rising and falling), a signal centred between the rails, no
small-signal bandwidth limit (see the closed-loop-bandwidth calculation). Units: SI (V, Hz, s, V/s);
amplitudes are peak values, ``max_amplitude_vpp`` is peak-to-peak.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

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

NAME = "slew-limit"
VERSION = "2"

SINE_SLOPE_FACTOR = 2.0 * np.pi
TRIANGLE_SLOPE_FACTOR = 4.0


@dataclass(frozen=True)
class SlewInputs:
    """Per-row inputs, arrays of shape ``(n,)``; NaN marks an optional value as not given.

    ``triangle``: True for a symmetric triangle wave, False for a sine. ``amplitude_v`` is the peak amplitude.
    ``supply_v`` is the total rail-to-rail span (e.g. 30 V for ±15 V rails). ``step_v`` is a step size of
    either sign. ``opamp_supply_min_v``/``opamp_supply_max_v`` are the op-amp's rated total supply span.
    """

    slew_rate_v_per_s: FloatArray
    output_headroom_v: FloatArray
    frequency_hz: FloatArray
    amplitude_v: FloatArray
    triangle: BoolArray
    supply_v: FloatArray
    step_v: FloatArray
    opamp_supply_min_v: FloatArray
    opamp_supply_max_v: FloatArray


_OPTIONAL = (
    "output_headroom_v",
    "frequency_hz",
    "amplitude_v",
    "supply_v",
    "step_v",
    "opamp_supply_min_v",
    "opamp_supply_max_v",
)
_QUANTITIES = ("slew_rate_v_per_s", *_OPTIONAL)


def validate(inputs: SlewInputs) -> list[Violation]:
    """Every physical precondition, per row; never raises."""
    v: list[Violation] = []

    sr = inputs.slew_rate_v_per_s
    require(v, ~np.isfinite(sr), "slew_rate_v_per_s", "slew_rate_v_per_s is required and must be a finite number")
    bad = np.isfinite(sr) & (sr <= 0.0)
    require(v, bad, "slew_rate_v_per_s", f"slew_rate_v_per_s ({first_bad(sr, bad)} V/s) must be above 0 V/s")

    for name in _OPTIONAL:
        values = getattr(inputs, name)
        bad = np.isinf(values)
        require(v, bad, name, f"{name} ({first_bad(values, bad)}) must be a finite number when given")

    require(
        v,
        np.isnan(inputs.frequency_hz) & np.isnan(inputs.amplitude_v) & np.isnan(inputs.supply_v),
        "frequency_hz",
        "give frequency_hz, amplitude_v or supply_v: without any of them there is nothing to limit",
    )
    for name, unit in (
        ("frequency_hz", "Hz"),
        ("amplitude_v", "V"),
        ("supply_v", "V"),
        ("opamp_supply_min_v", "V"),
        ("opamp_supply_max_v", "V"),
    ):
        values = getattr(inputs, name)
        bad = np.isfinite(values) & (values <= 0.0)
        require(v, bad, name, f"{name} ({first_bad(values, bad)} {unit}) must be above 0 {unit} when given")

    headroom = inputs.output_headroom_v
    bad = np.isfinite(headroom) & (headroom < 0.0)
    require(
        v,
        bad,
        "output_headroom_v",
        f"output_headroom_v ({first_bad(headroom, bad)} V) cannot be negative: an output cannot swing past its rails",
    )

    step = inputs.step_v
    bad = step == 0.0
    require(v, bad, "step_v", "step_v must not be 0 V when given (leave it out instead)")

    supply = inputs.supply_v
    bad = np.isfinite(supply) & (supply > 0.0) & np.isfinite(headroom) & (headroom >= 0.0) & (supply <= 2.0 * headroom)
    require(
        v,
        bad,
        "supply_v",
        f"supply_v ({first_bad(supply, bad)} V) must exceed twice output_headroom_v "
        f"({first_bad(2.0 * headroom, bad)} V): otherwise the output has no room to swing",
    )
    low, high = inputs.opamp_supply_min_v, inputs.opamp_supply_max_v
    bad = np.isfinite(low) & np.isfinite(high) & (low >= high)
    require(
        v,
        bad,
        "opamp_supply_max_v",
        f"opamp_supply_max_v ({first_bad(high, bad)} V) must be above opamp_supply_min_v ({first_bad(low, bad)} V)",
    )
    require_practical(
        v, {name: getattr(inputs, name) for name in _QUANTITIES}, ("slew_rate_v_per_s", "frequency_hz", "amplitude_v")
    )
    return v


def compute(inputs: SlewInputs, validated: bool = False) -> Outcome:
    """Slew and swing limits (model: module docstring); NaN results where an input they need is not given."""
    if not validated:  # the caller has just validated these very inputs
        raise_violations(validate(inputs))

    sr = inputs.slew_rate_v_per_s
    f = inputs.frequency_hz
    vp = inputs.amplitude_v
    k = np.where(inputs.triangle, TRIANGLE_SLOPE_FACTOR, SINE_SLOPE_FACTOR)

    slew_limited_amplitude = sr / (k * f)
    headroom_known = ~np.isnan(inputs.output_headroom_v)
    headroom = np.where(headroom_known, inputs.output_headroom_v, 0.0)
    swing_limited_amplitude = inputs.supply_v / 2.0 - headroom
    # fmin skips a NaN (a limit that does not apply); NaN only when neither applies.
    max_amplitude = np.fmin(slew_limited_amplitude, swing_limited_amplitude)
    # The datasheet's full-power bandwidth is at the rated swing: the rails' when no amplitude is given.
    full_power_bandwidth = sr / (k * np.where(np.isnan(vp), swing_limited_amplitude, vp))
    required_slew_rate = k * f * vp
    slew_limited = required_slew_rate > sr  # NaN compares False: not both given
    step_slew_time = np.abs(inputs.step_v) / sr

    results: dict[str, np.ndarray] = {
        "slew_limited_amplitude_v": slew_limited_amplitude,
        "swing_limited_amplitude_v": swing_limited_amplitude,
        "max_amplitude_v": max_amplitude,
        "max_amplitude_vpp": 2.0 * max_amplitude,
        "full_power_bandwidth_hz": full_power_bandwidth,
        "required_slew_rate_v_per_s": required_slew_rate,
        "slew_limited": slew_limited,
        "step_slew_time_s": step_slew_time,
    }

    slew_limit = np.where(np.isnan(required_slew_rate), np.nan, sr)
    swing_limit = np.where(np.isnan(vp), np.nan, swing_limited_amplitude)
    supply = inputs.supply_v
    # A check applies only where both its value and its limit are known.
    supply_min = np.where(np.isnan(supply), np.nan, inputs.opamp_supply_min_v)
    supply_max = np.where(np.isnan(supply), np.nan, inputs.opamp_supply_max_v)
    checks = [
        Check(
            "slew_rate",
            ~(required_slew_rate > slew_limit),
            required_slew_rate,
            slew_limit,
            "max",
            "the slew rate the waveform needs at frequency_hz and amplitude_v must not exceed "
            "slew_rate_v_per_s, or the output distorts (a sine turns toward a triangle and loses amplitude); "
            "does not apply unless both are given",
        ),
        Check(
            "output_swing",
            ~(vp > swing_limit),
            vp,
            swing_limit,
            "max",
            "amplitude_v must not exceed supply_v/2 - output_headroom_v, or the output clips at the rails; "
            "does not apply unless amplitude_v and supply_v are given",
        ),
        Check(
            "opamp_supply_min",
            ~(supply < supply_min),
            np.where(np.isnan(supply_min), np.nan, supply),
            supply_min,
            "min",
            "supply_v must reach the op-amp's opamp_supply_min_v, below which it is not specified to work; "
            "does not apply unless both are given",
        ),
        Check(
            "opamp_supply_max",
            ~(supply > supply_max),
            np.where(np.isnan(supply_max), np.nan, supply),
            supply_max,
            "max",
            "supply_v must not exceed the op-amp's opamp_supply_max_v, above which it may be destroyed; "
            "does not apply unless both are given",
        ),
    ]

    warnings: list[Notice] = []
    mask = ~np.isnan(inputs.supply_v) & ~headroom_known
    add_notice(
        warnings,
        mask,
        "output_headroom_v not given: swing_limited_amplitude_v assumes the output reaches the rails "
        "(0 V headroom), so it is an upper bound",
    )
    add_notice(
        warnings,
        ~np.isnan(supply) & (np.isnan(inputs.opamp_supply_min_v) | np.isnan(inputs.opamp_supply_max_v)),
        "the op-amp's supply range (opamp_supply_min_v, opamp_supply_max_v) is not fully given: supply_v is not "
        "checked against it",
    )
    cautions: list[Notice] = []
    add_notice(
        cautions,
        supply > inputs.opamp_supply_max_v,
        "supply_v is above the op-amp's opamp_supply_max_v: powering it there can destroy it (and what it drives); "
        "use an op-amp rated for this supply or give it a lower rail of its own",
    )
    return Outcome(results=results, checks=checks, warnings=warnings, cautions=cautions)


# ---- declaration --------------------------------------------------------------------------------------------

SPEC = CalculationSpec(
    name=NAME,
    summary="Largest undistorted amplitude, full-power bandwidth and required slew rate of an op-amp output",
    version=VERSION,
    inputs=(
        positive("slew_rate_v_per_s", "V/s", "op-amp slew rate"),
        Input("output_headroom_v", "V", "how close the output swings to each rail", optional=True, minimum=0),
        positive("frequency_hz", "Hz", "signal frequency", optional=True),
        positive("amplitude_v", "V", "peak amplitude", optional=True),
        Input("waveform", "", "sine or triangle", "sine", choices=("sine", "triangle")),
        positive("supply_v", "V", "total rail-to-rail supply span", optional=True),
        Input("step_v", "V", "size of a step to slew through", optional=True),
        positive("opamp_supply_min_v", "V", "op-amp's lowest rated total supply span", optional=True),
        positive("opamp_supply_max_v", "V", "op-amp's highest rated total supply span", optional=True),
    ),
    roles=(
        Role(
            "opamp",
            "opamp",
            (
                ("slew_rate_v_per_s", "slew_rate_v_per_s"),
                ("output_headroom_v", "output_headroom_v"),
                ("supply_min_v", "opamp_supply_min_v"),
                ("supply_max_v", "opamp_supply_max_v"),
            ),
        ),
    ),
    results=(
        Result("slew_limited_amplitude_v", "V", "largest peak amplitude the slew rate allows at frequency_hz"),
        Result("swing_limited_amplitude_v", "V", "largest peak amplitude the supply and headroom allow"),
        Result("max_amplitude_v", "V", "the smaller of the two"),
        Result("max_amplitude_vpp", "V", "the same, peak to peak"),
        Result(
            "full_power_bandwidth_hz",
            "Hz",
            "highest frequency at which amplitude_v (absent: the largest swing supply_v allows) is undistorted",
        ),
        Result("required_slew_rate_v_per_s", "V/s", "slew rate amplitude_v at frequency_hz needs"),
        Result("slew_limited", "", "true when the required slew rate exceeds the op-amp's", "boolean"),
        Result("step_slew_time_s", "s", "time to slew through step_v"),
    ),
    make_inputs=lambda c: SlewInputs(
        **{k: c[k] for k in SlewInputs.__dataclass_fields__ if k != "triangle"},
        triangle=c["waveform"] == "triangle",
    ),
    validate=validate,
    compute=compute,
)
