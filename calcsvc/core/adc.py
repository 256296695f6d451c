"""The converter after an op-amp stage, as the stage calculations use it: its least significant bit and the
number of ideal bits a noise level is worth.

- LSB = full scale / 2^bits (full scale: the input span, e.g. 0 to 10 V is 10 V).
- An ideal N-bit converter's quantization noise is LSB/√12 RMS, so a noise of v RMS is worth
  log2(full scale / (√12 · v)) bits: the effective-number-of-bits relation ENOB = (SINAD − 1.76 dB)/6.02 dB
  with a full-scale sine (IEEE Std 1241, "effective bits"; the two forms are the same algebra).
"""

from __future__ import annotations

import numpy as np

from calcsvc.core.outcome import FloatArray, Violation, first_bad, require
from calcsvc.core.spec import Input, positive

MAX_BITS = 32
ADC_INPUTS = (
    positive("adc_full_scale_v", "V", "input span of the converter the stage drives", optional=True),
    Input(
        "adc_bits", "dimensionless", "resolution of that converter", optional=True, minimum=1, maximum=32, integer=True
    ),
)


def lsb_v(full_scale_v: FloatArray, bits: FloatArray) -> FloatArray:
    """One least significant bit; NaN when either is not given."""
    return full_scale_v / np.exp2(bits)


def noise_bits(full_scale_v: FloatArray, noise_rms_v: FloatArray) -> FloatArray:
    """The ideal bits whose quantization noise equals ``noise_rms_v`` (module docstring)."""
    with np.errstate(divide="ignore"):
        return np.log2(full_scale_v / (np.sqrt(12.0) * noise_rms_v))


def validate_adc(v: list[Violation], full_scale_v: FloatArray, bits: FloatArray) -> None:
    require(v, np.isinf(full_scale_v), "adc_full_scale_v", "adc_full_scale_v must be a finite number when given")
    bad = np.isfinite(full_scale_v) & (full_scale_v <= 0.0)
    require(v, bad, "adc_full_scale_v", f"adc_full_scale_v ({first_bad(full_scale_v, bad)} V) must be above 0 V")
    bad = np.isinf(bits) | (np.isfinite(bits) & ((bits != np.round(bits)) | (bits < 1) | (bits > MAX_BITS)))
    require(v, bad, "adc_bits", f"adc_bits ({first_bad(bits, bad)}) must be a whole number from 1 to {MAX_BITS}")
    require(
        v,
        np.isnan(full_scale_v) != np.isnan(bits),
        "adc_bits",
        "adc_full_scale_v and adc_bits go together: give both (or neither)",
    )
