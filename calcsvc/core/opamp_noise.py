"""Output noise of an op-amp gain stage over its closed-loop bandwidth ("opamp-noise").

Model (white noise; e.g. Franco, *Design with Operational Amplifiers and Analog Integrated Circuits*, 3rd ed.,
§7.3–7.4, from memory). Sources, each uncorrelated, referred to the output as densities (per √Hz), with noise
gain NG = 1 + Rf/Rg (so Rf/Rg = NG − 1), feedback resistor Rf and the non-inverting input's DC source
resistance R+:

    op-amp voltage noise  en·NG
    op-amp current noise  in·R+·NG  (non-inverting input)  and  in·Rf  (inverting input: in·(Rf‖Rg)·NG)
    resistors (4kTR)      R+: √(4kT·R+)·NG,  Rg: √(4kT·Rg)·Rf/Rg,  Rf: √(4kT·Rf)
                          together 4kT·(Rf·NG + R+·NG²)

added in power. Every source reaches the output through the same closed-loop response, one pole at
f1 = GBW/NG (single-pole op-amp, open-loop gain ≫ NG; see the closed-loop calculation), whose noise
bandwidth is π/2·f1 (the equivalent brick-wall bandwidth of a single-pole low-pass; Horowitz & Hill, *The Art of
Electronics*, 3rd ed., §8.1, from memory). Output RMS = density·√(π/2·f1). Referred to the input it is divided
by the signal gain. With a converter (``adc_full_scale_v``, ``adc_bits``) the noise is also given in LSBs and
as the ideal bits it is worth (calcsvc.core.adc); check ``noise_bits``: the front end's noise is worth at least
the converter's bits, so it costs no resolution (common practice).

Assumptions: densities flat over the band (1/f corner well below it), resistors at ``ambient_c``, no noise
from the reference or the supply, no filter after the stage. Units: V/√Hz, A/√Hz, Ω, Hz, V, °C.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from calcsvc.core.adc import ADC_INPUTS, lsb_v, noise_bits, validate_adc
from calcsvc.core.feedback import (
    CONFIGURATION,
    GAIN,
    noise_gain,
    stage_inputs,
    validate_network,
)
from calcsvc.core.opamp_dc_error import PLUS_INPUT_OHM, RF_OHM
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

NAME = "opamp-noise"
VERSION = "1"

BOLTZMANN_J_PER_K = 1.380649e-23  # exact since the 2019 SI redefinition
ZERO_CELSIUS_K = 273.15
SINGLE_POLE_NOISE_BANDWIDTH = math.pi / 2.0
DEFAULT_AMBIENT_C = 25.0


@dataclass(frozen=True)
class NoiseInputs:
    """Per-row inputs, arrays of shape ``(n,)``. NaN: not given; results needing a missing input are NaN
    (``plus_input_ohm`` NaN counts as 0 Ω)."""

    inverting: BoolArray
    gain: FloatArray
    gbw_hz: FloatArray
    rf_ohm: FloatArray
    plus_input_ohm: FloatArray
    voltage_noise_v_per_rthz: FloatArray
    current_noise_a_per_rthz: FloatArray
    ambient_c: FloatArray
    adc_full_scale_v: FloatArray
    adc_bits: FloatArray


def validate(inputs: NoiseInputs) -> list[Violation]:
    """Every physical precondition, per row; never raises."""
    i = inputs
    v: list[Violation] = []
    inverting = np.asarray(i.inverting, dtype=bool)
    validate_network(v, inverting, i.gain, i.rf_ohm, i.plus_input_ohm)
    bad = ~np.isfinite(i.gbw_hz) | (i.gbw_hz <= 0.0)
    require(v, bad, "gbw_hz", f"gbw_hz ({first_bad(i.gbw_hz, bad)} Hz) is required and must be above 0 Hz")
    for name in ("voltage_noise_v_per_rthz", "current_noise_a_per_rthz"):
        values = getattr(i, name)
        require(v, np.isinf(values), name, f"{name} must be a finite number when given")
        bad = np.isfinite(values) & (values < 0.0)
        require(v, bad, name, f"{name} ({first_bad(values, bad)}) is a density: not negative")
    bad = ~np.isfinite(i.ambient_c) | (i.ambient_c <= -ZERO_CELSIUS_K)
    require(v, bad, "ambient_c", f"ambient_c ({first_bad(i.ambient_c, bad)} °C) must be above absolute zero")
    validate_adc(v, i.adc_full_scale_v, i.adc_bits)
    names = ("gain", "gbw_hz", "rf_ohm", "plus_input_ohm", "voltage_noise_v_per_rthz", "current_noise_a_per_rthz")
    require_practical(v, {name: getattr(i, name) for name in names}, ("gain",))
    return v


def compute(inputs: NoiseInputs, validated: bool = False) -> Outcome:
    """Densities, RMS noise and its worth in converter bits (model: module docstring)."""
    if not validated:
        raise_violations(validate(inputs))
    i = inputs
    inverting = np.asarray(i.inverting, dtype=bool)
    ng = noise_gain(inverting, i.gain)
    r_plus = np.where(np.isnan(i.plus_input_ohm), 0.0, i.plus_input_ohm)
    four_kt = 4.0 * BOLTZMANN_J_PER_K * (i.ambient_c + ZERO_CELSIUS_K)
    voltage = i.voltage_noise_v_per_rthz * ng
    current = i.current_noise_a_per_rthz * np.hypot(r_plus * ng, i.rf_ohm)
    resistors = np.sqrt(four_kt * (i.rf_ohm * ng + r_plus * ng**2))
    density = np.sqrt(voltage**2 + current**2 + resistors**2)
    bandwidth = i.gbw_hz / ng
    noise_bandwidth = SINGLE_POLE_NOISE_BANDWIDTH * bandwidth
    rms = density * np.sqrt(noise_bandwidth)
    enob = noise_bits(i.adc_full_scale_v, rms)
    results = {
        "output_noise_opamp_voltage_v_per_rthz": voltage,
        "output_noise_opamp_current_v_per_rthz": current,
        "output_noise_resistors_v_per_rthz": resistors,
        "output_noise_density_v_per_rthz": density,
        "noise_bandwidth_hz": noise_bandwidth,
        "output_noise_rms_v": rms,
        "input_noise_rms_v": rms / np.where(inverting, i.gain, ng),
        "output_noise_lsb_rms": rms / lsb_v(i.adc_full_scale_v, i.adc_bits),
        "noise_bits": enob,
    }
    limit = np.where(np.isnan(enob), np.nan, i.adc_bits)
    checks = [
        Check(
            "noise_bits",
            ~(enob < limit),
            np.where(np.isnan(limit), np.nan, enob),
            limit,
            "min",
            "the stage's output noise over its closed-loop bandwidth must be worth at least adc_bits ideal bits, "
            "so that it costs the converter no resolution (common practice); does not apply unless the converter "
            "and both noise densities are given",
        )
    ]
    warnings: list[Notice] = []
    add_notice(
        warnings,
        np.isnan(density),
        "the output noise is not computed: it needs rf_ohm, voltage_noise_v_per_rthz and current_noise_a_per_rthz",
    )
    return Outcome(results=results, checks=checks, warnings=warnings)


# ---- declaration --------------------------------------------------------------------------------------------

NOISE_INPUTS = (
    Input("voltage_noise_v_per_rthz", "V/Hz**0.5", "op-amp input voltage noise density (white)", optional=True,
          minimum=0),
    Input("current_noise_a_per_rthz", "A/Hz**0.5", "op-amp input current noise density (white)", optional=True,
          minimum=0),
)  # fmt: skip
PARAMETERS = tuple((spec.name, spec.name) for spec in NOISE_INPUTS)

SPEC = CalculationSpec(
    name=NAME,
    summary="Output noise of an op-amp gain stage over its closed-loop bandwidth, in V RMS and converter bits",
    version=VERSION,
    inputs=(
        CONFIGURATION,
        GAIN,
        positive("gbw_hz", "Hz", "op-amp gain-bandwidth product"),
        RF_OHM,
        PLUS_INPUT_OHM,
        *NOISE_INPUTS,
        Input(
            "ambient_c",
            "degC",
            "temperature of the resistors",
            DEFAULT_AMBIENT_C,
            minimum=-273.15,
            exclusive_minimum=True,
        ),
        *ADC_INPUTS,
    ),
    roles=(Role("opamp", "opamp", (("gbw_hz", "gbw_hz"), *PARAMETERS)),),
    results=(
        Result("output_noise_opamp_voltage_v_per_rthz", "V/√Hz", "op-amp voltage noise at the output"),
        Result("output_noise_opamp_current_v_per_rthz", "V/√Hz", "op-amp current noise at the output"),
        Result("output_noise_resistors_v_per_rthz", "V/√Hz", "resistors' thermal noise at the output"),
        Result("output_noise_density_v_per_rthz", "V/√Hz", "total output noise density"),
        Result("noise_bandwidth_hz", "Hz", "π/2 × the closed-loop -3 dB bandwidth"),
        Result("output_noise_rms_v", "V", "output noise over the noise bandwidth"),
        Result("input_noise_rms_v", "V", "the same referred to the input (divided by the signal gain)"),
        Result("output_noise_lsb_rms", "", "output noise in converter LSBs"),
        Result("noise_bits", "", "ideal converter bits the output noise is worth"),
    ),
    make_inputs=stage_inputs(NoiseInputs),
    validate=validate,
    compute=compute,
)
