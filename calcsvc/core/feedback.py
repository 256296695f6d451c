"""The feedback network of one op-amp gain stage, shared by the stage calculations that need its noise gain
or its resistors (DC error, noise, windows, stability).

Model (any op-amp text; e.g. Franco, *Design with Operational Amplifiers and Analog Integrated Circuits*,
3rd ed., §1.3–1.5): with feedback resistor Rf and gain resistor Rg (to the reference, or the input resistor
when inverting), the noise gain is NG = 1 + Rf/Rg. Non-inverting: the signal gain G = NG. Inverting: G = Rf/Rg
(magnitude) and NG = 1 + G. So Rf/Rg = NG − 1 in both configurations, and a follower (non-inverting, G = 1)
has no Rg at all (Rf may be a wire).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from calcsvc.core.outcome import BoolArray, FloatArray, Violation, first_bad, require
from calcsvc.core.spec import Columns, Input, columns_as, positive

CONFIGURATION = Input(
    "configuration", "", "non_inverting or inverting", "non_inverting", choices=("non_inverting", "inverting")
)
GAIN = positive("gain", "V/V", "closed-loop gain magnitude")


def noise_gain(inverting: BoolArray, gain: FloatArray) -> FloatArray:
    """1 + Rf/Rg: the gain magnitude the loop sees (and the input offset and voltage noise see)."""
    return np.where(inverting, 1.0 + gain, gain)


def validate_gain(v: list[Violation], inverting: BoolArray, gain: FloatArray) -> None:
    """The stage gain is required and possible for its configuration."""
    require(v, ~np.isfinite(gain), "gain", "gain is required and must be a finite number")
    bad = np.isfinite(gain) & ~inverting & (gain < 1.0)
    require(
        v,
        bad,
        "gain",
        f"gain ({first_bad(gain, bad)} V/V) is below 1 V/V: a non-inverting stage's gain is 1 + Rf/Rg",
    )
    bad = np.isfinite(gain) & inverting & (gain <= 0.0)
    require(v, bad, "gain", f"gain ({first_bad(gain, bad)} V/V) of an inverting stage must be above 0 (the magnitude)")


def validate_resistance(v: list[Violation], name: str, values: FloatArray) -> None:
    """An optional resistance: NaN (not given) or finite and not negative."""
    require(v, np.isinf(values), name, f"{name} must be a finite number when given")
    bad = np.isfinite(values) & (values < 0.0)
    require(v, bad, name, f"{name} ({first_bad(values, bad)} Ω) cannot be negative")


def validate_feedback_resistor(v: list[Violation], inverting: BoolArray, gain: FloatArray, rf: FloatArray) -> None:
    """Rf, when given, can set the gain: only a follower (non-inverting, gain 1) may have Rf = 0."""
    validate_resistance(v, "rf_ohm", rf)
    bad = (rf == 0.0) & (inverting | (gain != 1.0))
    require(v, bad, "rf_ohm", "rf_ohm of 0 Ω sets no gain: only a follower (non-inverting, gain 1) has no Rf")


def validate_network(
    v: list[Violation], inverting: BoolArray, gain: FloatArray, rf: FloatArray, plus_input: FloatArray
) -> None:
    """The whole network the DC error and the noise see: the gain, Rf and the resistance at the + input."""
    validate_gain(v, inverting, gain)
    validate_feedback_resistor(v, inverting, gain, rf)
    validate_resistance(v, "plus_input_ohm", plus_input)


def stage_inputs(cls: type) -> Callable[[Columns], Any]:
    """A stage calculation's ``make_inputs``: its dataclass from the columns, ``configuration`` as ``inverting``."""
    return lambda c: columns_as(cls, {**c, "inverting": c["configuration"] == "inverting"})
