"""Single-supply windows of an op-amp stage: where its inputs and output may go, rail by rail
("opamp-windows").

Model
-----
One supply: the negative rail is 0 V, the positive rail ``supply_v``. Each window is stated against its own
rail, as datasheets state it, and is not assumed centred on mid-rail:

- input common-mode range: from ``input_low_headroom_v`` above 0 V to ``input_high_headroom_v`` below
  ``supply_v`` (a negative headroom reaches beyond the rail, as rail-to-rail inputs do);
- output swing: from ``output_low_headroom_v`` above 0 V to ``output_high_headroom_v`` below ``supply_v``.

The stage works about ``reference_v``: the output is ``reference_v`` ± ``amplitude_v`` (peak). Non-inverting
(the gain resistor returns to the reference, the signal sits on it): the input swings ``reference_v`` ±
``amplitude_v``/G. Inverting (the non-inverting input at the reference): both inputs stay at ``reference_v``
(virtual ground). Checks: each end of the signal inside its window (``input_common_mode_low``/``_high``,
``output_swing_low``/``_high``), a check applying only where its headroom, ``reference_v`` and
``amplitude_v`` are given.

Assumptions: the reference does not move with the supply (a regulated reference; a divider from the supply
would track it); DC errors at the output (see the DC-error calculation) are small beside the headrooms; the
windows are the datasheet's over its load and temperature. Units: V.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from calcsvc.core.feedback import CONFIGURATION, GAIN, stage_inputs, validate_gain
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

NAME = "opamp-windows"
VERSION = "1"

HEADROOMS = ("input_low_headroom_v", "input_high_headroom_v", "output_low_headroom_v", "output_high_headroom_v")


@dataclass(frozen=True)
class WindowInputs:
    """Per-row inputs, arrays of shape ``(n,)``; NaN: not given (``reference_v``, ``amplitude_v`` and each
    headroom are optional: a check needing one that is missing does not apply)."""

    inverting: BoolArray
    gain: FloatArray
    supply_v: FloatArray
    reference_v: FloatArray
    amplitude_v: FloatArray
    input_low_headroom_v: FloatArray
    input_high_headroom_v: FloatArray
    output_low_headroom_v: FloatArray
    output_high_headroom_v: FloatArray


def validate(inputs: WindowInputs) -> list[Violation]:
    """Every physical precondition, per row; never raises."""
    i = inputs
    v: list[Violation] = []
    inverting = np.asarray(i.inverting, dtype=bool)
    validate_gain(v, inverting, i.gain)
    supply = i.supply_v
    bad = ~np.isfinite(supply) | (supply <= 0.0)
    require(v, bad, "supply_v", f"supply_v ({first_bad(supply, bad)} V) is required and must be above 0 V")
    for name in ("reference_v", "amplitude_v", *HEADROOMS):
        values = getattr(i, name)
        require(v, np.isinf(values), name, f"{name} must be a finite number when given")
    ref = i.reference_v
    bad = np.isfinite(ref) & ((ref < 0.0) | (ref > supply))
    require(
        v,
        bad,
        "reference_v",
        f"reference_v ({first_bad(ref, bad)} V) must lie between the rails, 0 V and supply_v: a single supply has "
        "no other voltages",
    )
    bad = np.isfinite(i.amplitude_v) & (i.amplitude_v <= 0.0)
    require(v, bad, "amplitude_v", f"amplitude_v ({first_bad(i.amplitude_v, bad)} V) must be above 0 V")
    for name in ("output_low_headroom_v", "output_high_headroom_v"):
        values = getattr(i, name)
        bad = np.isfinite(values) & (values < 0.0)
        require(v, bad, name, f"{name} ({first_bad(values, bad)} V) cannot be negative: no output passes its rail")
    require_practical(v, {name: getattr(i, name) for name in ("gain", "supply_v", "reference_v", *HEADROOMS)})
    return v


def compute(inputs: WindowInputs, validated: bool = False) -> Outcome:
    """The windows and the signal's extent against them (model: module docstring)."""
    if not validated:
        raise_violations(validate(inputs))
    i = inputs
    inverting = np.asarray(i.inverting, dtype=bool)
    input_min = i.input_low_headroom_v
    input_max = i.supply_v - i.input_high_headroom_v
    output_min = i.output_low_headroom_v
    output_max = i.supply_v - i.output_high_headroom_v
    input_swing = np.where(inverting, 0.0, i.amplitude_v / i.gain)
    signal_input_min = i.reference_v - input_swing
    signal_input_max = i.reference_v + input_swing
    signal_output_min = i.reference_v - i.amplitude_v
    signal_output_max = i.reference_v + i.amplitude_v
    results = {
        "input_common_mode_min_v": input_min,
        "input_common_mode_max_v": input_max,
        "output_swing_min_v": output_min,
        "output_swing_max_v": output_max,
        "signal_input_min_v": signal_input_min,
        "signal_input_max_v": signal_input_max,
        "signal_output_min_v": signal_output_min,
        "signal_output_max_v": signal_output_max,
        # The largest peak about the reference before either rail's swing limit.
        "max_amplitude_about_reference_v": np.fmin(i.reference_v - output_min, output_max - i.reference_v),
    }

    def check(name: str, value: FloatArray, limit: FloatArray, sense: Literal["max", "min"], detail: str) -> Check:
        limit = np.where(np.isnan(value), np.nan, limit)
        ok = ~(value > limit) if sense == "max" else ~(value < limit)
        return Check(name, ok, np.where(np.isnan(limit), np.nan, value), limit, sense, detail)

    unless = "; does not apply unless reference_v, amplitude_v and that headroom are given"
    checks = [
        check(
            "input_common_mode_low",
            signal_input_min,
            input_min,
            "min",
            "the lowest input voltage must stay at or above the input common-mode range's low end "
            f"(input_low_headroom_v above the 0 V rail){unless}",
        ),
        check(
            "input_common_mode_high",
            signal_input_max,
            input_max,
            "max",
            "the highest input voltage must stay at or below the input common-mode range's high end "
            f"(input_high_headroom_v below supply_v){unless}",
        ),
        check(
            "output_swing_low",
            signal_output_min,
            output_min,
            "min",
            f"the output's lowest voltage must stay at or above output_low_headroom_v (above the 0 V rail){unless}",
        ),
        check(
            "output_swing_high",
            signal_output_max,
            output_max,
            "max",
            f"the output's highest voltage must stay at or below supply_v - output_high_headroom_v{unless}",
        ),
    ]
    warnings: list[Notice] = []
    add_notice(
        warnings,
        np.isnan(i.reference_v),
        "reference_v not given: the single-supply windows are not checked (give the voltage the signal is centred on)",
    )
    add_notice(
        warnings,
        input_min >= input_max,
        "the input common-mode range is empty at this supply: the op-amp cannot work with its inputs anywhere",
    )
    return Outcome(results=results, checks=checks, warnings=warnings)


# ---- declaration --------------------------------------------------------------------------------------------

HEADROOM_INPUTS = (
    Input("input_low_headroom_v", "V", "input common-mode range's end above the 0 V rail (negative: beyond it)",
          optional=True),
    Input("input_high_headroom_v", "V", "input common-mode range's end below the positive rail (negative: beyond "
          "it)", optional=True),
    Input("output_low_headroom_v", "V", "output swing's end above the 0 V rail", optional=True, minimum=0),
    Input("output_high_headroom_v", "V", "output swing's end below the positive rail", optional=True, minimum=0),
)  # fmt: skip
REFERENCE_V = Input("reference_v", "V", "voltage the signal is centred on (single supply)", optional=True, minimum=0)
ROLE = Role("opamp", "opamp", tuple((name, name) for name in HEADROOMS))

SPEC = CalculationSpec(
    name=NAME,
    summary="Single-supply input common-mode and output swing windows of an op-amp stage, rail by rail",
    version=VERSION,
    inputs=(
        CONFIGURATION,
        GAIN,
        positive("supply_v", "V", "single supply: the positive rail above 0 V"),
        REFERENCE_V,
        positive("amplitude_v", "V", "output peak amplitude about reference_v", optional=True),
        *HEADROOM_INPUTS,
    ),
    roles=(ROLE,),
    results=(
        Result("input_common_mode_min_v", "V", "lowest input voltage the op-amp works at"),
        Result("input_common_mode_max_v", "V", "highest input voltage the op-amp works at"),
        Result("output_swing_min_v", "V", "lowest voltage the output reaches"),
        Result("output_swing_max_v", "V", "highest voltage the output reaches"),
        Result("signal_input_min_v", "V", "lowest voltage at the op-amp's inputs"),
        Result("signal_input_max_v", "V", "highest voltage at the op-amp's inputs"),
        Result("signal_output_min_v", "V", "lowest output voltage the signal needs"),
        Result("signal_output_max_v", "V", "highest output voltage the signal needs"),
        Result("max_amplitude_about_reference_v", "V", "largest output peak about reference_v within the swing"),
    ),
    make_inputs=stage_inputs(WindowInputs),
    validate=validate,
    compute=compute,
)
