"""Closed-loop gain and bandwidth of op-amp gain stages (single-pole op-amp model).

Model
-----
The op-amp's open-loop gain has one pole: ``A(s) = A0 / (1 + s/ωa)`` with ``ωa = 2π·GBW/A0``, so above
the pole ``|A|·f = GBW``. The feedback network sets the feedback factor ``β = 1/NG`` (NG = noise gain) and
the loop gain ``T = A·β``. For both configurations the stage gain is the ideal gain times ``T/(1 + T)``::

    H(s) = G_ideal · T/(1 + T) = G_dc / (1 + s/ω1)
    ω1   = 2π·f1,   f1 = GBW/NG + GBW/A0          (exact -3 dB frequency of one stage)
    G_dc = G_ideal / (1 + NG/A0)                  (DC gain with finite open-loop gain)

Non-inverting: ``NG = G_ideal = G`` (or ``1 + Rf/Rg``). Inverting: ``G_ideal = -G`` (or ``-Rf/Rg``) and
``NG = 1 + G``. Without ``open_loop_gain`` the op-amp is ideal at DC (``A0 → ∞``): ``A(s) = ωt/s`` with
``ωt = 2π·GBW``, so ``G_dc = G_ideal`` and ``f1 = GBW/NG``.

Output offset: the input offset voltage Vos is amplified by the noise gain, ``Vos·NG/(1 + NG/A0)`` per stage;
in a cascade each stage's offset is amplified by the stages after it, and the worst case (every offset of one
sign) is ``Vos·NG/(1 + NG/A0) · Σ|G_dc|^k`` over k = 0..n-1.

``stages`` identical stages in cascade multiply: ``H(s)^n``. The cascade's -3 dB frequency solves
``(1 + (f/f1)²)^n = 2``, i.e. ``f1·√(2^(1/n) - 1)``. Rise times (10-90 %) use ``0.35/bandwidth``: exact to
0.1 % for one pole (``ln 9 / 2π``), the usual approximation for the cascade.

Assumptions: small signals (no slew-rate or output-swing limit, see the slew-limit calculation), a single
dominant pole (no second pole, so no peaking), ideal resistors, no source or load impedance, stages that do
not load each other. Units: SI (Hz, Ω, s, V/V); gains in dB are 20·log10 of a voltage ratio.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calcsvc.core.frequency_sweep import MAX_SWEEP_POINTS, stage_response, sweep_frequencies, validate_sweep
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
from calcsvc.core.spec import CalculationSpec, Columns, Input, Result, Role, positive

NAME = "closed-loop-bandwidth"
VERSION = "2"

MAX_STAGES = 20
# At least 20 dB of loop gain at DC (NG ≤ A0/10) keeps the gain set by the resistors (common practice).
MIN_DC_LOOP_GAIN = 10.0
GAIN_ERROR_WARN_PCT = 1.0
# Above a tenth of the bandwidth the response is measurably below its DC value.
IN_BAND_FRACTION = 0.1
RISE_TIME_CONSTANT = 0.35


@dataclass(frozen=True)
class ClosedLoopInputs:
    """Per-row inputs (arrays of shape ``(n,)``).

    ``inverting``: True for the inverting configuration, False for non-inverting. Give either ``gain``
    (magnitude, V/V) or both ``rf_ohm`` and ``rg_ohm``; the others are NaN. ``open_loop_gain`` (V/V) NaN means
    ideal at DC. ``stages`` holds whole numbers. ``signal_hz`` NaN means no signal frequency. A row sweeps when
    it gives ``sweep_start_hz``, ``sweep_stop_hz`` and ``sweep_points`` (a whole number, 2..2000); each row has
    its own number of points. ``input_offset_v`` (magnitude) and ``output_offset_max_v`` (the output error
    the design allows) are NaN when not given.
    """

    inverting: BoolArray
    gain: FloatArray
    rf_ohm: FloatArray
    rg_ohm: FloatArray
    gbw_hz: FloatArray
    open_loop_gain: FloatArray
    stages: FloatArray
    signal_hz: FloatArray
    sweep_start_hz: FloatArray
    sweep_stop_hz: FloatArray
    sweep_points: FloatArray
    input_offset_v: FloatArray
    output_offset_max_v: FloatArray


_OPTIONAL = ("gain", "rf_ohm", "rg_ohm", "open_loop_gain", "signal_hz", "sweep_start_hz", "sweep_stop_hz")
_OPTIONAL += ("input_offset_v", "output_offset_max_v")
_QUANTITIES = ("gbw_hz", *_OPTIONAL)


def validate(inputs: ClosedLoopInputs) -> list[Violation]:
    """Every physical precondition, per row; never raises."""
    v: list[Violation] = []
    inv = np.asarray(inputs.inverting, dtype=bool)

    # Optional values: NaN is "not given", but ±inf never makes sense.
    for name in _OPTIONAL:
        values = getattr(inputs, name)
        bad = np.isinf(values)
        require(v, bad, name, f"{name} ({first_bad(values, bad)}) must be a finite number when given")

    # Required values.
    for name in ("gbw_hz", "stages"):
        values = getattr(inputs, name)
        bad = ~np.isfinite(values)
        require(v, bad, name, f"{name} is required and must be a finite number")

    gain_given = ~np.isnan(inputs.gain)
    rf_given = ~np.isnan(inputs.rf_ohm)
    rg_given = ~np.isnan(inputs.rg_ohm)
    require(
        v,
        gain_given & (rf_given | rg_given),
        "gain",
        "give either gain or rf_ohm and rg_ohm, not both: the two would set the gain twice",
    )
    require(
        v,
        ~gain_given & ~rf_given & ~rg_given,
        "gain",
        "give gain, or rf_ohm and rg_ohm, to set the stage gain",
    )
    require(
        v,
        ~gain_given & (rf_given ^ rg_given),
        "gain",
        "rf_ohm and rg_ohm must be given together (or give gain instead): one resistor alone sets no gain",
    )

    gain = inputs.gain
    finite_gain = np.isfinite(gain)
    bad = finite_gain & ~inv & (gain < 1.0)
    require(
        v,
        bad,
        "gain",
        f"gain ({first_bad(gain, bad)} V/V) is below 1 V/V: a non-inverting stage cannot "
        "have gain below 1 V/V (its gain is 1 + Rf/Rg)",
    )
    bad = finite_gain & inv & (gain <= 0.0)
    require(
        v,
        bad,
        "gain",
        f"gain ({first_bad(gain, bad)} V/V) of an inverting stage must be above 0 "
        "(give the magnitude; the inversion comes from the configuration)",
    )
    for name in ("rf_ohm", "rg_ohm"):
        values = getattr(inputs, name)
        bad = np.isfinite(values) & (values <= 0.0)
        require(v, bad, name, f"{name} ({first_bad(values, bad)} Ω) must be above 0 Ω")

    gbw = inputs.gbw_hz
    bad = np.isfinite(gbw) & (gbw <= 0.0)
    require(v, bad, "gbw_hz", f"gbw_hz ({first_bad(gbw, bad)} Hz) must be above 0 Hz")

    a0 = inputs.open_loop_gain
    bad = np.isfinite(a0) & (a0 <= 1.0)
    require(
        v,
        bad,
        "open_loop_gain",
        f"open_loop_gain ({first_bad(a0, bad)} V/V) must be above 1 V/V when given "
        "(leave it out for an op-amp that is ideal at DC)",
    )

    stages = inputs.stages
    bad = np.isfinite(stages) & ((stages != np.round(stages)) | (stages < 1) | (stages > MAX_STAGES))
    require(
        v,
        bad,
        "stages",
        f"stages ({first_bad(stages, bad)}) must be a whole number from 1 to {MAX_STAGES} "
        f"({MAX_STAGES} is this service's cap on identical cascaded stages)",
    )

    offset = inputs.input_offset_v
    bad = np.isfinite(offset) & (offset < 0.0)
    require(v, bad, "input_offset_v", f"input_offset_v ({first_bad(offset, bad)} V) is a magnitude: not negative")
    allowed = inputs.output_offset_max_v
    bad = np.isfinite(allowed) & (allowed <= 0.0)
    require(v, bad, "output_offset_max_v", f"output_offset_max_v ({first_bad(allowed, bad)} V) must be above 0 V")

    sig = inputs.signal_hz
    bad = np.isfinite(sig) & (sig <= 0.0)
    require(v, bad, "signal_hz", f"signal_hz ({first_bad(sig, bad)} Hz) must be above 0 Hz")

    require_practical(v, {name: getattr(inputs, name) for name in _QUANTITIES}, ("rg_ohm", "gbw_hz"))
    v.extend(validate_sweep(inputs.sweep_points, inputs.sweep_start_hz, inputs.sweep_stop_hz))
    return v


def compute(inputs: ClosedLoopInputs, validated: bool = False) -> Outcome:
    """Gains, bandwidths, rise times, response at ``signal_hz`` and the optional sweep (model: module doc).

    The sweep results are present only when some row sweeps, flat with one entry per point: ``sweep_row`` (the
    row of each point, ascending), ``sweep_frequency_hz``, ``sweep_gain_db`` and ``sweep_phase_deg``. Rows do
    not share a size, so output grows with the points asked for, not with rows times the largest sweep.
    """
    if not validated:  # the caller has just validated these very inputs
        raise_violations(validate(inputs))

    inv = np.asarray(inputs.inverting, dtype=bool)
    by_gain = ~np.isnan(inputs.gain)
    # Magnitude of the configured ratio: G, or Rf/Rg.
    ratio = np.where(by_gain, inputs.gain, inputs.rf_ohm / inputs.rg_ohm)
    noise_gain = np.where(inv, 1.0 + ratio, np.where(by_gain, inputs.gain, 1.0 + ratio))
    signal_gain = np.where(inv, -ratio, noise_gain)

    a0_given = ~np.isnan(inputs.open_loop_gain)
    a0 = np.where(a0_given, inputs.open_loop_gain, np.inf)
    loss = noise_gain / a0  # NG/A0, 0 for the ideal op-amp
    closed_loop_gain = signal_gain / (1.0 + loss)
    # (closed - ideal)/ideal written without the cancelling subtraction.
    gain_error_pct = np.where(loss > 0.0, -100.0 * loss / (1.0 + loss), 0.0)  # no -0.0 for the ideal op-amp

    gbw = inputs.gbw_hz
    stages = inputs.stages
    bandwidth = gbw / noise_gain + gbw / a0
    # √(2^(1/n) - 1) via expm1 stays accurate for large n.
    cascade_bandwidth = bandwidth * np.sqrt(np.expm1(np.log(2.0) / stages))
    rise_time = RISE_TIME_CONSTANT / bandwidth
    cascade_rise_time = RISE_TIME_CONSTANT / cascade_bandwidth

    output_offset = inputs.input_offset_v * noise_gain / (1.0 + loss)
    g = np.abs(closed_loop_gain)
    # Σ|G|^k for k < n (a follower, |G| = 1, sums to n); only an absurd cascade overflows it, to inf.
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        carried = np.where(g == 1.0, stages, np.expm1(stages * np.log(g)) / (g - 1.0))
        cascade_output_offset = np.where(output_offset == 0.0, 0.0, output_offset * carried)

    gain_at_signal_db, phase_at_signal_deg = stage_response(inputs.signal_hz, closed_loop_gain, bandwidth, stages)

    results: dict[str, np.ndarray] = {
        "noise_gain": noise_gain,
        "signal_gain": signal_gain,
        "closed_loop_gain": closed_loop_gain,
        "gain_error_pct": gain_error_pct,
        "bandwidth_hz": bandwidth,
        "cascade_bandwidth_hz": cascade_bandwidth,
        "rise_time_s": rise_time,
        "cascade_rise_time_s": cascade_rise_time,
        "gain_at_signal_db": gain_at_signal_db,
        "phase_at_signal_deg": phase_at_signal_deg,
        "output_offset_v": output_offset,
    }

    sweeping = ~np.isnan(inputs.sweep_points)
    if sweeping.any():
        rows = np.flatnonzero(sweeping)
        points = inputs.sweep_points[rows].astype(np.int64)
        row = np.repeat(rows, points)
        freq = sweep_frequencies(inputs.sweep_start_hz[rows], inputs.sweep_stop_hz[rows], points)
        sweep_gain, sweep_phase = stage_response(freq, closed_loop_gain[row], bandwidth[row], stages[row])
        results["sweep_row"] = row
        results["sweep_frequency_hz"] = freq
        results["sweep_gain_db"] = sweep_gain
        results["sweep_phase_deg"] = sweep_phase

    loop_limit = np.where(a0_given, inputs.open_loop_gain / MIN_DC_LOOP_GAIN, np.nan)
    signal_given = ~np.isnan(inputs.signal_hz)
    band_limit = np.where(signal_given, cascade_bandwidth, np.nan)
    offset_limit = np.where(np.isnan(cascade_output_offset), np.nan, inputs.output_offset_max_v)
    checks = [
        Check(
            "gain_achievable",
            ~(noise_gain > loop_limit),
            noise_gain,
            loop_limit,
            "max",
            "noise gain must not exceed open_loop_gain/10, leaving at least 20 dB of loop gain at DC so "
            "the resistors, not the op-amp, set the gain (common practice); does not apply without "
            "open_loop_gain",
        ),
        Check(
            "signal_in_band",
            ~(inputs.signal_hz > band_limit),
            inputs.signal_hz,
            band_limit,
            "max",
            "signal_hz must not exceed the cascade's -3 dB bandwidth; does not apply without signal_hz",
        ),
        Check(
            "output_offset",
            ~(cascade_output_offset > offset_limit),
            np.where(np.isnan(offset_limit), np.nan, cascade_output_offset),
            offset_limit,
            "max",
            "the output offset the input offset voltages cause (output_offset_v carried through every later "
            "stage, all offsets of one sign) must not exceed output_offset_max_v; does not apply unless both "
            "input_offset_v and output_offset_max_v are given",
        ),
    ]

    warnings: list[Notice] = []
    mask = np.abs(gain_error_pct) > GAIN_ERROR_WARN_PCT
    add_notice(
        warnings,
        mask,
        f"the finite open_loop_gain costs more than {GAIN_ERROR_WARN_PCT:g} % of the ideal gain per "
        "stage (see gain_error_pct): use an op-amp with more open-loop gain or a lower stage gain",
    )
    mask = signal_given & (inputs.signal_hz > IN_BAND_FRACTION * cascade_bandwidth)
    add_notice(
        warnings,
        mask,
        "signal_hz is above a tenth of the cascade bandwidth: the gain there is already below its DC "
        "value and the phase lag is appreciable (see gain_at_signal_db and phase_at_signal_deg)",
    )

    add_notice(
        warnings,
        ~np.isnan(inputs.output_offset_max_v) & np.isnan(inputs.input_offset_v),
        "output_offset_max_v is given but input_offset_v is not: the output offset is not checked",
    )

    return Outcome(results=results, checks=checks, warnings=warnings)


# ---- declaration --------------------------------------------------------------------------------------------


def _inputs_from_columns(c: Columns) -> ClosedLoopInputs:
    return ClosedLoopInputs(
        inverting=c["configuration"] == "inverting",
        gain=c["gain"],
        rf_ohm=c["rf_ohm"],
        rg_ohm=c["rg_ohm"],
        gbw_hz=c["gbw_hz"],
        open_loop_gain=c["open_loop_gain"],
        stages=c["stages"],
        signal_hz=c["signal_hz"],
        sweep_start_hz=c["sweep_start_hz"],
        sweep_stop_hz=c["sweep_stop_hz"],
        sweep_points=c["sweep_points"],
        input_offset_v=c["input_offset_v"],
        output_offset_max_v=c["output_offset_max_v"],
    )


SPEC = CalculationSpec(
    name=NAME,
    summary="Closed-loop gain, bandwidth, rise time and response of a single-pole op-amp gain stage",
    version=VERSION,
    inputs=(
        Input(
            "configuration", "", "non_inverting or inverting", "non_inverting", choices=("non_inverting", "inverting")
        ),
        positive("gain", "V/V", "closed-loop gain magnitude (or give rf_ohm and rg_ohm)", optional=True),
        positive("rf_ohm", "ohm", "feedback resistor", optional=True),
        positive("rg_ohm", "ohm", "gain-setting resistor to ground (or input resistor when inverting)", optional=True),
        positive("gbw_hz", "Hz", "op-amp gain-bandwidth product"),
        positive("open_loop_gain", "V/V", "DC open-loop gain; absent: ideal at DC", optional=True),
        Input("stages", "dimensionless", "identical cascaded stages", 1, minimum=1, maximum=20, integer=True),
        positive("signal_hz", "Hz", "signal frequency to evaluate", optional=True),
        positive("sweep_start_hz", "Hz", "first frequency of a log sweep", optional=True),
        positive("sweep_stop_hz", "Hz", "last frequency of a log sweep", optional=True),
        Input(
            "sweep_points",
            "dimensionless",
            "points in the sweep",
            optional=True,
            minimum=2,
            maximum=MAX_SWEEP_POINTS,
            integer=True,
        ),
        Input("input_offset_v", "V", "op-amp input offset voltage (magnitude)", optional=True, minimum=0),
        positive("output_offset_max_v", "V", "largest output offset the design allows", optional=True),
    ),
    roles=(
        Role(
            "opamp",
            "opamp",
            (("gbw_hz", "gbw_hz"), ("open_loop_gain", "open_loop_gain"), ("input_offset_v", "input_offset_v")),
        ),
    ),
    results=(
        Result("noise_gain", "V/V", "1 + Rf/Rg, the gain the loop sees"),
        Result("signal_gain", "V/V", "ideal signed signal gain"),
        Result("closed_loop_gain", "V/V", "signed DC gain with the finite open-loop gain"),
        Result("gain_error_pct", "%", "(closed_loop_gain - ideal)/ideal x 100"),
        Result("bandwidth_hz", "Hz", "-3 dB frequency of one stage"),
        Result("cascade_bandwidth_hz", "Hz", "-3 dB frequency of all stages"),
        Result("rise_time_s", "s", "10-90 % rise time of one stage"),
        Result("cascade_rise_time_s", "s", "10-90 % rise time of all stages"),
        Result("gain_at_signal_db", "dB", "gain of all stages at signal_hz"),
        Result("phase_at_signal_deg", "deg", "phase lag from finite bandwidth at signal_hz"),
        Result("output_offset_v", "V", "output offset of one stage from input_offset_v (Vos x noise gain)"),
        Result(
            "sweep",
            "",
            "frequency_hz [Hz], gain_db [dB] and phase_deg [deg] arrays, when a sweep was asked for",
            "sweep",
        ),
    ),
    make_inputs=_inputs_from_columns,
    validate=validate,
    compute=compute,
)
