"""Tests for the DC output error of an op-amp gain stage.

Outside sources: hand-worked examples with the textbook relation (Franco, *Design with Operational Amplifiers
and Analog Integrated Circuits*, 3rd ed., §5.1–5.2, from memory: Eo = NG·Vos + (Rf − NG·R+)·Ib ∓ (Rf + NG·R+)·Ios/2,
and the bias-compensation result Eo = Rf·Ios when R+ = Rf‖Rg), and an independent nodal solution of the circuit
(numpy.linalg.solve on Kirchhoff's current law with a finite open-loop gain) over every sign of the three sources.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calcsvc.core.opamp_dc_error import DcErrorInputs, compute, validate

NAN = math.nan


def make(
    gain: float = 10.0,
    rf_ohm: float = 90e3,
    plus_input_ohm: float = NAN,
    input_offset_v: float = 1e-3,
    input_bias_current_a: float = 100e-9,
    input_offset_current_a: float = 20e-9,
    output_error_max_v: float = NAN,
    adc_full_scale_v: float = NAN,
    adc_bits: float = NAN,
    inverting: bool = False,
) -> DcErrorInputs:
    def a(x: float) -> np.ndarray:
        return np.array([x], dtype=np.float64)

    return DcErrorInputs(
        inverting=np.array([inverting]),
        gain=a(gain),
        rf_ohm=a(rf_ohm),
        plus_input_ohm=a(plus_input_ohm),
        input_offset_v=a(input_offset_v),
        input_bias_current_a=a(input_bias_current_a),
        input_offset_current_a=a(input_offset_current_a),
        output_error_max_v=a(output_error_max_v),
        adc_full_scale_v=a(adc_full_scale_v),
        adc_bits=a(adc_bits),
    )


def test_hand_worked_non_inverting_gain_of_ten() -> None:
    # Rf = 90 kΩ, Rg = 10 kΩ (G = 10), R+ = 0, Vos = 1 mV, Ib = 100 nA, Ios = 20 nA:
    # 10 × 1 mV = 10 mV; 90 kΩ × 100 nA = 9 mV; 90 kΩ × 10 nA = 0.9 mV; worst case 19.9 mV.
    out = compute(make()).results
    assert out["output_error_offset_v"][0] == pytest.approx(10e-3, rel=1e-12)
    assert out["output_error_bias_v"][0] == pytest.approx(9e-3, rel=1e-12)
    assert out["output_error_offset_current_v"][0] == pytest.approx(0.9e-3, rel=1e-12)
    assert out["output_error_v"][0] == pytest.approx(19.9e-3, rel=1e-12)
    assert out["output_error_rss_v"][0] == pytest.approx(math.sqrt(10**2 + 9**2 + 0.9**2) * 1e-3, rel=1e-12)
    assert out["balanced_plus_input_ohm"][0] == pytest.approx(9e3, rel=1e-12)  # 90 kΩ ‖ 10 kΩ


def test_bias_compensation_leaves_rf_times_the_offset_current() -> None:
    # R+ = Rf‖Rg = 9 kΩ: the bias term cancels; the offset current's is Rf·Ios = 90 kΩ × 20 nA = 1.8 mV.
    out = compute(make(plus_input_ohm=9e3, input_offset_v=0.0)).results
    assert out["output_error_bias_v"][0] == pytest.approx(0.0, abs=1e-18)
    assert out["output_error_v"][0] == pytest.approx(1.8e-3, rel=1e-12)


def test_hand_worked_inverting_with_the_lsb() -> None:
    # Inverting G = 10 (Rf = 100 kΩ, Rg = 10 kΩ, NG = 11), R+ = 0, Vos = 2 mV, Ib = 50 nA, Ios = 10 nA:
    # 22 mV + 5 mV + 0.5 mV = 27.5 mV; a 12-bit converter over 4.096 V has a 1 mV LSB: 27.5 LSB.
    x = make(
        inverting=True,
        gain=10.0,
        rf_ohm=100e3,
        input_offset_v=2e-3,
        input_bias_current_a=50e-9,
        input_offset_current_a=10e-9,
        output_error_max_v=0.5e-3,
        adc_full_scale_v=4.096,
        adc_bits=12.0,
    )
    out = compute(x)
    assert out.results["output_error_v"][0] == pytest.approx(27.5e-3, rel=1e-12)
    assert out.results["output_error_lsb"][0] == pytest.approx(27.5, rel=1e-12)
    check = out.checks[0]
    assert check.name == "output_error" and not check.ok[0] and check.limit[0] == 0.5e-3


def nodal_output(x: DcErrorInputs, vos: float, ib_plus: float, ib_minus: float, a0: float = 1e9) -> float:
    """Vout of the stage with only its DC error sources, by Kirchhoff's current law (inputs' currents flow into
    the op-amp), the signal and the reference at 0 V. Unknowns: v−, vout."""
    ng = float(x.gain[0]) + (1.0 if x.inverting[0] else 0.0)
    rf = float(x.rf_ohm[0])
    rg = rf / (ng - 1.0)
    r_plus = 0.0 if math.isnan(x.plus_input_ohm[0]) else float(x.plus_input_ohm[0])
    v_plus = -ib_plus * r_plus
    # v−/Rg + (v− − vout)/Rf + Ib− = 0;  vout = A0·(v+ + Vos − v−)
    matrix = np.array([[1 / rg + 1 / rf, -1 / rf], [a0, 1.0]])
    rhs = np.array([-ib_minus, a0 * (v_plus + vos)])
    return float(np.linalg.solve(matrix, rhs)[1])


@pytest.mark.parametrize(
    "x",
    [
        make(),
        make(plus_input_ohm=4.7e3),
        make(plus_input_ohm=47e3, gain=3.0, rf_ohm=20e3),
        make(inverting=True, gain=4.7, rf_ohm=47e3, plus_input_ohm=8.2e3),
    ],
)
def test_worst_case_is_the_largest_output_over_every_sign_by_nodal_analysis(x: DcErrorInputs) -> None:
    vos, ib, ios = (float(x.input_offset_v[0]), float(x.input_bias_current_a[0]), float(x.input_offset_current_a[0]))
    outputs = [
        nodal_output(x, s1 * vos, s2 * ib + s3 * ios / 2, s2 * ib - s3 * ios / 2)
        for s1, s2, s3 in itertools.product((-1.0, 1.0), repeat=3)
    ]
    assert compute(x).results["output_error_v"][0] == pytest.approx(max(abs(v) for v in outputs), rel=1e-6)


def test_missing_terms_leave_the_total_and_its_check_out() -> None:
    out = compute(make(input_bias_current_a=NAN, output_error_max_v=1e-3))
    assert math.isnan(out.results["output_error_v"][0])
    assert out.checks[0].ok[0] and math.isnan(out.checks[0].limit[0])
    assert any("not computed" in w.message for w in out.warnings)


def test_refusals_name_their_fields() -> None:
    fields = {v.field for v in validate(make(rf_ohm=0.0, input_offset_v=-1e-3, adc_bits=12.0))}
    assert fields == {"rf_ohm", "input_offset_v", "adc_bits"}


@settings(max_examples=80, deadline=None, derandomize=True)
@given(
    gain=st.floats(1.0, 1000.0),
    rf=st.floats(1e2, 1e7),
    r_plus=st.floats(0.0, 1e6),
    vos=st.floats(0.0, 0.01),
    ib=st.floats(0.0, 1e-6),
    ios=st.floats(0.0, 1e-6),
)
def test_property_worst_case_bounds_the_rss_and_grows_with_each_source(
    gain: float, rf: float, r_plus: float, vos: float, ib: float, ios: float
) -> None:
    base = {"gain": gain, "rf_ohm": rf, "plus_input_ohm": r_plus, "input_offset_v": vos}
    out = compute(make(**base, input_bias_current_a=ib, input_offset_current_a=ios)).results
    more = compute(make(**base, input_bias_current_a=2 * ib, input_offset_current_a=2 * ios)).results
    assert out["output_error_rss_v"][0] <= out["output_error_v"][0] * (1 + 1e-12)
    assert more["output_error_v"][0] >= out["output_error_v"][0]
    assert np.isfinite(out["output_error_v"][0])
