"""Tests for the single-supply windows of an op-amp stage: hand-worked with Kirchhoff's voltage law and the ideal
op-amp's virtual short (the inputs sit at the same voltage; non-inverting gain 1 + Rf/Rg about the reference;
any op-amp text, e.g. Franco, 3rd ed., §1.3–1.4, from memory)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calcsvc.core.opamp_windows import WindowInputs, compute, validate

NAN = math.nan


def make(
    gain: float = 2.0,
    supply_v: float = 5.0,
    reference_v: float = 2.5,
    amplitude_v: float = 2.0,
    input_low_headroom_v: float = -0.1,
    input_high_headroom_v: float = -0.1,
    output_low_headroom_v: float = 0.03,
    output_high_headroom_v: float = 0.04,
    inverting: bool = False,
) -> WindowInputs:
    def a(x: float) -> np.ndarray:
        return np.array([x], dtype=np.float64)

    return WindowInputs(
        inverting=np.array([inverting]),
        gain=a(gain),
        supply_v=a(supply_v),
        reference_v=a(reference_v),
        amplitude_v=a(amplitude_v),
        input_low_headroom_v=a(input_low_headroom_v),
        input_high_headroom_v=a(input_high_headroom_v),
        output_low_headroom_v=a(output_low_headroom_v),
        output_high_headroom_v=a(output_high_headroom_v),
    )


def verdicts(x: WindowInputs) -> dict[str, bool]:
    return {c.name: bool(c.ok[0]) for c in compute(x).checks}


def test_rail_to_rail_part_on_5_v_about_mid_supply() -> None:
    # Gain 2 about 2.5 V, 2 V peak out: the input swings 2.5 ± 1 V inside −0.1…5.1 V, the output 0.5…4.5 V
    # inside 0.03…4.96 V.
    out = compute(make())
    r = out.results
    assert (r["signal_input_min_v"][0], r["signal_input_max_v"][0]) == (1.5, 3.5)
    assert (r["input_common_mode_min_v"][0], r["input_common_mode_max_v"][0]) == (-0.1, 5.1)
    assert (r["output_swing_min_v"][0], r["output_swing_max_v"][0]) == (0.03, 4.96)
    assert r["max_amplitude_about_reference_v"][0] == pytest.approx(2.46)
    assert all(verdicts(make()).values())


def test_classic_inputs_two_volts_from_each_rail_fail_on_5_v() -> None:
    # Common-mode range 2…3 V: the input's 1.5…3.5 V leaves it at both ends.
    found = verdicts(make(input_low_headroom_v=2.0, input_high_headroom_v=2.0))
    assert not found["input_common_mode_low"] and not found["input_common_mode_high"]
    assert found["output_swing_low"] and found["output_swing_high"]


def test_the_windows_are_rail_by_rail_not_centred_on_mid_supply() -> None:
    # An output reaching 0.05 V of ground but only 1.5 V of the top rail: 2.5 ± 1.5 V reaches 4.0 V > 3.5 V.
    # A symmetric mid-rail model with the better headroom would pass it; the low side does pass.
    x = make(gain=5.0, amplitude_v=1.5, output_low_headroom_v=0.05, output_high_headroom_v=1.5)
    found = verdicts(x)
    assert found["output_swing_low"] and not found["output_swing_high"]
    # A reference moved down to 1.6 V fits it (0.1…3.1 V).
    assert all(verdicts(make(gain=5.0, amplitude_v=1.5, output_low_headroom_v=0.05, output_high_headroom_v=1.5,
                             reference_v=1.6)).values())  # fmt: skip


def test_inverting_inputs_stay_on_the_reference() -> None:
    # Virtual ground: both inputs at the reference whatever the signal; a range ending 2 V below the top rail
    # takes a 2.5 V reference, not a 3.5 V one.
    r = compute(make(inverting=True, gain=10.0, input_high_headroom_v=2.0)).results
    assert r["signal_input_min_v"][0] == r["signal_input_max_v"][0] == 2.5
    assert verdicts(make(inverting=True, gain=10.0, input_high_headroom_v=2.0))["input_common_mode_high"]
    assert not verdicts(make(inverting=True, reference_v=3.5, input_high_headroom_v=2.0, amplitude_v=1.0))[
        "input_common_mode_high"
    ]


def test_without_a_reference_nothing_is_checked() -> None:
    out = compute(make(reference_v=NAN))
    assert all(c.ok[0] and math.isnan(c.limit[0]) for c in out.checks)
    assert any("reference_v not given" in w.message for w in out.warnings)


def test_refusals_name_their_fields() -> None:
    found = {v.field for v in validate(make(reference_v=6.0, output_low_headroom_v=-0.1, gain=0.5))}
    assert found == {"reference_v", "output_low_headroom_v", "gain"}


@settings(max_examples=80, deadline=None, derandomize=True)
@given(
    supply=st.floats(1.0, 40.0),
    ref_fraction=st.floats(0.0, 1.0),
    amplitude=st.floats(1e-3, 20.0),
    gain=st.floats(1.0, 100.0),
    headroom=st.floats(0.0, 2.0),
)
def test_property_a_higher_supply_never_fails_a_window_that_passed(
    supply: float, ref_fraction: float, amplitude: float, gain: float, headroom: float
) -> None:
    common = {"reference_v": supply * ref_fraction, "amplitude_v": amplitude, "gain": gain}
    common |= {name: headroom for name in ("input_low_headroom_v", "input_high_headroom_v")}
    common |= {name: headroom for name in ("output_low_headroom_v", "output_high_headroom_v")}
    low, high = verdicts(make(supply_v=supply, **common)), verdicts(make(supply_v=supply * 1.1, **common))
    assert all(high[name] for name, ok in low.items() if ok)
