"""Each heated part's temperature against the ambient, for a reviewed channel (the heat plot's curves).

The design is held as reviewed (resistors chosen, nominal values) and only the ambient varies: each point is
``channel_thermal.stage`` at that ambient, all points at once.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from calcsvc.core import channel_thermal, thermal
from calcsvc.core.channel import ChannelInputs, ChannelReview
from calcsvc.core.outcome import FloatArray, Outcome, take

POINTS = 161
SPAN_C = (-20.0, 100.0)  # the plotted ambients; widened to hold the design's own range


@dataclass(frozen=True)
class HeatCurves:
    ambient_c: FloatArray
    led_junction_c: FloatArray  # NaN where the string runs away
    transistor_junction_c: FloatArray
    resistor_hot_spot_c: FloatArray
    led_limit_c: float  # Tj,max less the margin
    transistor_limit_c: float
    resistor_limit_c: float  # the derating curve's zero-power point
    operating_ambient_c: float
    ambient_min_c: float
    ambient_max_c: float


def heat_curves(inputs: ChannelInputs, nominal: ChannelReview) -> HeatCurves:
    """The curves of one reviewed row (``inputs`` holds exactly one row)."""
    cold, hot = (float(x[0]) for x in channel_thermal.ambient_range(inputs))
    grid = np.linspace(min(SPAN_C[0], cold - 10.0), max(SPAN_C[1], hot + 10.0), POINTS)
    every = take(inputs, np.zeros(POINTS, dtype=np.intp))
    every = dataclasses.replace(every, ambient_c=grid, ambient_min_c=grid, ambient_max_c=grid)

    def spread(outcome: Outcome) -> Outcome:
        return Outcome(results={k: np.repeat(v[:1], POINTS) for k, v in outcome.results.items() if v.ndim == 1})

    heat = channel_thermal.stage(every, spread(nominal.led_string), spread(nominal.switch)).results
    return HeatCurves(
        ambient_c=grid,
        led_junction_c=heat["led_junction_c"],
        transistor_junction_c=heat["transistor_junction_c"],
        resistor_hot_spot_c=heat["resistor_hot_spot_c"],
        led_limit_c=float(inputs.led_tj_max_c[0] - thermal.JUNCTION_MARGIN_K),
        transistor_limit_c=float(inputs.tj_max_c[0] - thermal.JUNCTION_MARGIN_K),
        resistor_limit_c=float(inputs.resistor_zero_power_c[0]),
        operating_ambient_c=float(inputs.ambient_c[0]),
        ambient_min_c=cold,
        ambient_max_c=hot,
    )
