"""DC error at the output of an op-amp gain stage from its input offset voltage and input bias currents
("opamp-dc-error").

Model (Franco, *Design with Operational Amplifiers and Analog Integrated Circuits*, 3rd ed., §5.1–5.2, from
memory): with the op-amp's offset voltage Vos, bias current Ib (the mean of the two inputs' currents) and offset
current Ios (their difference), a stage of noise gain NG = 1 + Rf/Rg, feedback resistor Rf, and a DC
resistance R+ from the non-inverting input to its source (non-inverting: the sensor's source resistance;
inverting: a bias-compensation resistor, 0 when the input sits on the reference directly) has the output
error

    Eo = NG·Vos + (Rf − NG·R+)·Ib ∓ (Rf + NG·R+)·Ios/2          (Rf = NG·(Rf‖Rg))

each term of either sign on a given part. Worst case (``output_error_v``): every term at its datasheet
magnitude, all of one sign. ``output_error_rss_v``: their root sum of squares, the likely error when the
three are independent (common practice). R+ = Rf‖Rg cancels the bias-current term and leaves Rf·Ios
(``balanced_plus_input_ohm``).

Check ``output_error``: the worst case within ``output_error_max_v`` (for example a fraction of the
converter's LSB, which ``output_error_lsb`` expresses the error in). Assumptions: DC, at the datasheet's
magnitudes (take the maxima over temperature for a worst case); the open-loop gain ≫ NG. Units: V, A, Ω.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calcsvc.core.adc import ADC_INPUTS, lsb_v, validate_adc
from calcsvc.core.feedback import (
    CONFIGURATION,
    GAIN,
    noise_gain,
    stage_inputs,
    validate_network,
)
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

NAME = "opamp-dc-error"
VERSION = "1"

_MAGNITUDES = ("input_offset_v", "input_bias_current_a", "input_offset_current_a")


@dataclass(frozen=True)
class DcErrorInputs:
    """Per-row inputs, arrays of shape ``(n,)``. NaN: not given; a term whose inputs are missing is NaN and so
    is the total (``plus_input_ohm`` NaN counts as 0 Ω)."""

    inverting: BoolArray
    gain: FloatArray
    rf_ohm: FloatArray
    plus_input_ohm: FloatArray
    input_offset_v: FloatArray
    input_bias_current_a: FloatArray
    input_offset_current_a: FloatArray
    output_error_max_v: FloatArray
    adc_full_scale_v: FloatArray
    adc_bits: FloatArray


def validate(inputs: DcErrorInputs) -> list[Violation]:
    """Every physical precondition, per row; never raises."""
    i = inputs
    v: list[Violation] = []
    inverting = np.asarray(i.inverting, dtype=bool)
    validate_network(v, inverting, i.gain, i.rf_ohm, i.plus_input_ohm)
    for name in (*_MAGNITUDES, "output_error_max_v"):
        values = getattr(i, name)
        require(v, np.isinf(values), name, f"{name} must be a finite number when given")
        bad = np.isfinite(values) & (values < 0.0)
        require(v, bad, name, f"{name} ({first_bad(values, bad)}) is a magnitude: not negative")
    bad = i.output_error_max_v == 0.0
    require(v, bad, "output_error_max_v", "output_error_max_v must be above 0 V (no output is free of error)")
    validate_adc(v, i.adc_full_scale_v, i.adc_bits)
    names = ("gain", "rf_ohm", "plus_input_ohm", *_MAGNITUDES, "output_error_max_v", "adc_full_scale_v")
    require_practical(v, {name: getattr(i, name) for name in names})
    return v


def compute(inputs: DcErrorInputs, validated: bool = False) -> Outcome:
    """Each term, the worst case and the RSS at the output (model: module docstring)."""
    if not validated:
        raise_violations(validate(inputs))
    i = inputs
    ng = noise_gain(np.asarray(i.inverting, dtype=bool), i.gain)
    r_plus = np.where(np.isnan(i.plus_input_ohm), 0.0, i.plus_input_ohm)
    offset_term = ng * i.input_offset_v
    bias_term = np.abs(i.rf_ohm - ng * r_plus) * i.input_bias_current_a
    offset_current_term = (i.rf_ohm + ng * r_plus) * i.input_offset_current_a / 2.0
    worst = offset_term + bias_term + offset_current_term
    rss = np.sqrt(offset_term**2 + bias_term**2 + offset_current_term**2)
    results = {
        "output_error_offset_v": offset_term,
        "output_error_bias_v": bias_term,
        "output_error_offset_current_v": offset_current_term,
        "output_error_v": worst,
        "output_error_rss_v": rss,
        "output_error_lsb": worst / lsb_v(i.adc_full_scale_v, i.adc_bits),
        "balanced_plus_input_ohm": i.rf_ohm / ng,
    }
    limit = np.where(np.isnan(worst), np.nan, i.output_error_max_v)
    checks = [
        Check(
            "output_error",
            ~(worst > limit),
            np.where(np.isnan(limit), np.nan, worst),
            limit,
            "max",
            "the worst-case DC output error (offset voltage × noise gain plus the bias and offset currents through "
            "the resistances, all of one sign) must not exceed output_error_max_v; does not apply unless it and "
            "every term's inputs are given",
        )
    ]
    warnings: list[Notice] = []
    add_notice(
        warnings,
        np.isnan(worst),
        "the DC output error is not computed: it needs rf_ohm, input_offset_v, input_bias_current_a and "
        "input_offset_current_a",
    )
    add_notice(
        warnings,
        (bias_term > offset_term) & (bias_term > offset_current_term),
        "the bias current's term dominates the DC output error: a resistance of balanced_plus_input_ohm at the "
        "non-inverting input cancels it, leaving the offset current's",
    )
    return Outcome(results=results, checks=checks, warnings=warnings)


# ---- declaration --------------------------------------------------------------------------------------------

RF_OHM = Input("rf_ohm", "ohm", "feedback resistor (0: a follower's wire)", optional=True, minimum=0)
PLUS_INPUT_OHM = Input(
    "plus_input_ohm",
    "ohm",
    "DC resistance from the non-inverting input to its source (non-inverting: the source's; inverting: a "
    "compensation resistor); absent: 0",
    optional=True,
    minimum=0,
)
BIAS_INPUTS = (
    Input("input_bias_current_a", "A", "op-amp input bias current (magnitude)", optional=True, minimum=0),
    Input("input_offset_current_a", "A", "op-amp input offset current (magnitude)", optional=True, minimum=0),
)
OUTPUT_ERROR_MAX_V = positive("output_error_max_v", "V", "largest DC output error the design allows", optional=True)
PARAMETERS = (("input_offset_v", "input_offset_v"), ("input_bias_current_a", "input_bias_current_a"))
PARAMETERS += (("input_offset_current_a", "input_offset_current_a"),)

SPEC = CalculationSpec(
    name=NAME,
    summary="Worst-case DC output error of an op-amp gain stage from offset voltage and bias currents",
    version=VERSION,
    inputs=(
        CONFIGURATION,
        GAIN,
        RF_OHM,
        PLUS_INPUT_OHM,
        Input("input_offset_v", "V", "op-amp input offset voltage (magnitude)", optional=True, minimum=0),
        *BIAS_INPUTS,
        OUTPUT_ERROR_MAX_V,
        *ADC_INPUTS,
    ),
    roles=(Role("opamp", "opamp", PARAMETERS),),
    results=(
        Result("output_error_offset_v", "V", "input offset voltage × noise gain"),
        Result("output_error_bias_v", "V", "bias current through Rf and the non-inverting input's resistance"),
        Result("output_error_offset_current_v", "V", "offset current's share through the same resistances"),
        Result("output_error_v", "V", "worst case: the three added, all of one sign"),
        Result("output_error_rss_v", "V", "root sum of squares of the three (independent terms)"),
        Result("output_error_lsb", "", "output_error_v in converter LSBs"),
        Result("balanced_plus_input_ohm", "ohm", "non-inverting input resistance that cancels the bias term (Rf‖Rg)"),
    ),
    make_inputs=stage_inputs(DcErrorInputs),
    validate=validate,
    compute=compute,
)
