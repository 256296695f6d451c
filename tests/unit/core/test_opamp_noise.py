"""Tests for the output noise of an op-amp gain stage.

Outside sources: a numerical integral (scipy.integrate.quad) of the output noise density through the closed-loop
response, written here independently; Johnson–Nyquist thermal noise 4kTR with the SI value of k; the textbook
equivalence that Rf and Rg together add the noise of Rf‖Rg at the inverting input times the noise gain; and the
ideal converter's quantization noise LSB/√12 (IEEE Std 1241, from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import constants, integrate

from calcsvc.core.opamp_noise import NoiseInputs, compute

NAN = math.nan


def make(
    gain: float = 101.0,
    gbw_hz: float = 10e6,
    rf_ohm: float = 100e3,
    plus_input_ohm: float = NAN,
    en: float = 10e-9,
    in_: float = 0.0,
    ambient_c: float = 26.85,
    adc_full_scale_v: float = NAN,
    adc_bits: float = NAN,
    inverting: bool = False,
) -> NoiseInputs:
    def a(x: float) -> np.ndarray:
        return np.array([x], dtype=np.float64)

    return NoiseInputs(
        inverting=np.array([inverting]),
        gain=a(gain),
        gbw_hz=a(gbw_hz),
        rf_ohm=a(rf_ohm),
        plus_input_ohm=a(plus_input_ohm),
        voltage_noise_v_per_rthz=a(en),
        current_noise_a_per_rthz=a(in_),
        ambient_c=a(ambient_c),
        adc_full_scale_v=a(adc_full_scale_v),
        adc_bits=a(adc_bits),
    )


def by_superposition(x: NoiseInputs) -> float:
    """The output density (V/√Hz) source by source, each to the output through its own gain."""
    ng = float(x.gain[0]) + (1.0 if x.inverting[0] else 0.0)
    rf = float(x.rf_ohm[0])
    r_plus = 0.0 if math.isnan(x.plus_input_ohm[0]) else float(x.plus_input_ohm[0])
    four_kt = 4 * constants.k * (float(x.ambient_c[0]) + 273.15)
    parallel = rf * (rf / (ng - 1)) / (rf + rf / (ng - 1))  # Rf‖Rg
    en, in_ = float(x.voltage_noise_v_per_rthz[0]), float(x.current_noise_a_per_rthz[0])
    powers = [
        (en * ng) ** 2,
        (in_ * r_plus * ng) ** 2,
        (in_ * parallel * ng) ** 2,
        four_kt * r_plus * ng**2,
        four_kt * parallel * ng**2,  # Rf and Rg seen as Rf‖Rg at the inverting input
    ]
    return math.sqrt(sum(powers))


def integrated_rms(x: NoiseInputs, density: float) -> float:
    """√∫ density²·|H(f)/H(0)|² df over 0..∞ for the single-pole closed loop at GBW/NG."""
    ng = float(x.gain[0]) + (1.0 if x.inverting[0] else 0.0)
    f1 = float(x.gbw_hz[0]) / ng
    # Integrated over u = f/f1 (density²·f1 taken out) so the integrand is of order 1.
    area, _ = integrate.quad(lambda u: 1.0 / (1.0 + u**2), 0.0, math.inf, epsabs=1e-13, epsrel=1e-12)
    return math.sqrt(density**2 * f1 * area)


CASES = [
    make(),
    make(in_=1e-12, plus_input_ohm=10e3, gain=10.0, rf_ohm=9e3),
    make(inverting=True, gain=20.0, rf_ohm=200e3, en=20e-9, in_=0.5e-12, plus_input_ohm=9.1e3, gbw_hz=1.2e6),
    make(gain=1.0 + 1e-9, rf_ohm=1e-3, en=5e-9, gbw_hz=1e6),  # nearly a follower
]


@pytest.mark.parametrize("x", CASES)
def test_output_noise_against_a_numerical_integral(x: NoiseInputs) -> None:
    out = compute(x).results
    density = by_superposition(x)
    assert out["output_noise_density_v_per_rthz"][0] == pytest.approx(density, rel=1e-9)
    assert out["output_noise_rms_v"][0] == pytest.approx(integrated_rms(x, density), rel=1e-6)


def test_hand_worked_gain_of_101() -> None:
    # 300 K, Rf = 100 kΩ, Rg = 1 kΩ, en = 10 nV/√Hz: en·NG = 1.01 µV/√Hz; resistors 4kT·Rf·NG
    # = 1.6568e-20 × 1.01e7 → 0.4091 µV/√Hz; total 1.0897 µV/√Hz over π/2 × 99.01 kHz = 155.5 kHz: 0.4298 mV.
    out = compute(make()).results
    assert out["output_noise_resistors_v_per_rthz"][0] == pytest.approx(0.4091e-6, rel=1e-3)
    assert out["output_noise_density_v_per_rthz"][0] == pytest.approx(1.0897e-6, rel=1e-4)
    assert out["noise_bandwidth_hz"][0] == pytest.approx(math.pi / 2 * 10e6 / 101, rel=1e-12)
    assert out["output_noise_rms_v"][0] == pytest.approx(0.4298e-3, rel=1e-3)
    assert out["input_noise_rms_v"][0] == pytest.approx(out["output_noise_rms_v"][0] / 101, rel=1e-12)


def test_noise_of_one_ideal_lsb_is_worth_exactly_the_converters_bits() -> None:
    # A 12-bit converter over 4.096 V: LSB 1 mV, quantization noise 1 mV/√12 = 0.2887 mV RMS.
    # Voltage noise alone (resistors of a micro-ohm): en·NG·√(π/2·GBW/NG) = LSB/√12 sets en.
    en = 1e-3 / math.sqrt(12) / (101 * math.sqrt(math.pi / 2 * 10e6 / 101))
    scaled = make(en=en, rf_ohm=1e-6, adc_full_scale_v=4.096, adc_bits=12.0)
    out = compute(scaled)
    assert out.results["output_noise_rms_v"][0] == pytest.approx(1e-3 / math.sqrt(12), rel=1e-6)
    assert out.results["noise_bits"][0] == pytest.approx(12.0, abs=1e-5)
    assert out.results["output_noise_lsb_rms"][0] == pytest.approx(1 / math.sqrt(12), rel=1e-5)
    assert out.checks[0].name == "noise_bits" and out.checks[0].limit[0] == 12.0


def test_without_current_noise_the_total_does_not_apply() -> None:
    out = compute(make(in_=NAN, adc_full_scale_v=10.0, adc_bits=12.0))
    assert math.isnan(out.results["output_noise_rms_v"][0])
    assert out.checks[0].ok[0] and math.isnan(out.checks[0].limit[0])


@settings(max_examples=80, deadline=None, derandomize=True)
@given(
    gain=st.floats(1.5, 1000.0),
    rf=st.floats(1e2, 1e7),
    r_plus=st.floats(0.0, 1e6),
    en=st.floats(1e-9, 1e-6),
    in_=st.floats(0.0, 1e-10),
    ambient=st.floats(-40.0, 125.0),
)
def test_property_noise_is_finite_and_grows_with_temperature_and_resistance(
    gain: float, rf: float, r_plus: float, en: float, in_: float, ambient: float
) -> None:
    x = make(gain=gain, rf_ohm=rf, plus_input_ohm=r_plus, en=en, in_=in_, ambient_c=ambient)
    out = compute(x).results["output_noise_rms_v"][0]
    hotter = compute(make(gain=gain, rf_ohm=rf, plus_input_ohm=r_plus, en=en, in_=in_, ambient_c=ambient + 10))
    larger = compute(make(gain=gain, rf_ohm=rf, plus_input_ohm=2 * r_plus + 1, en=en, in_=in_, ambient_c=ambient))
    assert np.isfinite(out) and out > 0
    assert hotter.results["output_noise_rms_v"][0] > out
    assert larger.results["output_noise_rms_v"][0] > out
