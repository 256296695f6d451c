"""Curves around one design, for the plots: each built from the calculation's own core inputs (one row) and
computed by that calculation, so every marked point is the calculation's number. Arrays in, arrays out; the
drawing is calcsvc.web.plots.

A range too extreme to draw (an axis that would reach zero or infinity) raises ``OffScale`` naming the input
to blame.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from calcsvc.core import closed_loop, eseries, led_string, slew
from calcsvc.core.outcome import FloatArray, Outcome, take

SWEEP_POINTS = 400
GRID_POINTS = 300
# The plotted range reaches this factor beyond the frequencies of interest on each side.
MARGIN = 30.0


class OffScale(ValueError):
    """The range a plot would draw is not finite and positive; ``field`` is the input extreme enough to cause it."""

    def __init__(self, field: str, message: str) -> None:
        super().__init__(message)
        self.field = field
        self.message = message


def _span(low: float, high: float, field: str) -> None:
    if not (0.0 < low < high < math.inf):
        raise OffScale(field, f"{field} is too extreme to plot: the axis would run from {low:g} to {high:g}")


def _given(x: np.ndarray) -> float | None:
    """A one-row value, None where it is NaN (not given, or does not apply)."""
    value = float(x[0])
    return None if math.isnan(value) else value


def _first(outcome: Outcome, name: str) -> float | None:
    return _given(outcome.results[name])


def open_loop(frequency_hz: np.ndarray, gbw_hz: float, open_loop_gain: float | None) -> tuple[np.ndarray, np.ndarray]:
    """Gain (dB) and phase (deg) of the single-pole op-amp model of ``calcsvc.core.closed_loop``.

    Without a DC gain the model is the integrator GBW/f (the GBW asymptote) with a constant -90° phase.
    """
    if open_loop_gain is None:
        return 20.0 * np.log10(gbw_hz / frequency_hz), np.full_like(frequency_hz, -90.0)
    pole_hz = gbw_hz / open_loop_gain
    ratio = frequency_hz / pole_hz
    gain_db = 20.0 * np.log10(open_loop_gain) - 10.0 * np.log10(1.0 + ratio**2)
    return gain_db, -np.degrees(np.arctan(ratio))


@dataclass(frozen=True)
class ClosedLoopCurves:
    """The core's sweep of the closed-loop response, the open loop it is built on, and the -3 dB point."""

    frequency_hz: np.ndarray
    gain_db: np.ndarray
    phase_deg: np.ndarray
    open_loop_gain_db: np.ndarray
    open_loop_phase_deg: np.ndarray
    corner_hz: float
    corner_name: str  # bandwidth_hz (one stage) or cascade_bandwidth_hz
    corner_gain_db: float
    corner_phase_deg: float
    gbw_hz: float
    open_loop_gain: float | None  # None: ideal at DC, only the GBW asymptote is drawn
    stages: int
    signal_hz: float | None


def closed_loop_curves(inputs: closed_loop.ClosedLoopInputs) -> ClosedLoopCurves:
    """The response of the one row of ``inputs`` from well below its corner to ten times the GBW (or over the
    row's own sweep when it gives one). Raises DomainError when the core refuses the row."""
    one = closed_loop.compute(inputs)
    stages = int(inputs.stages[0])
    corner_name = "bandwidth_hz" if stages == 1 else "cascade_bandwidth_hz"
    corner_hz = float(one.results[corner_name][0])
    gbw, a0 = float(inputs.gbw_hz[0]), _given(inputs.open_loop_gain)
    start = corner_hz / 100.0 if a0 is None else min(corner_hz / 100.0, gbw / a0 / 10.0)
    sweep = (start, 10.0 * gbw, float(SWEEP_POINTS))
    if _given(inputs.sweep_points):
        sweep = (float(inputs.sweep_start_hz[0]), float(inputs.sweep_stop_hz[0]), float(inputs.sweep_points[0]))
    _span(sweep[0], sweep[1], "gbw_hz")
    # signal_hz at the corner makes the core report the gain and phase there, for the marker.
    at_corner = dataclasses.replace(
        inputs,
        **{
            name: np.array([value])
            for name, value in zip(("sweep_start_hz", "sweep_stop_hz", "sweep_points"), sweep, strict=True)
        },
        signal_hz=np.array([corner_hz]),
    )
    swept = closed_loop.compute(at_corner).results
    frequency = swept["sweep_frequency_hz"]  # one row: the whole flat sweep
    open_gain, open_phase = open_loop(frequency, gbw, a0)
    return ClosedLoopCurves(
        frequency_hz=frequency,
        gain_db=swept["sweep_gain_db"],
        phase_deg=swept["sweep_phase_deg"],
        open_loop_gain_db=open_gain,
        open_loop_phase_deg=open_phase,
        corner_hz=corner_hz,
        corner_name=corner_name,
        corner_gain_db=float(swept["gain_at_signal_db"][0]),
        corner_phase_deg=float(swept["phase_at_signal_deg"][0]),
        gbw_hz=gbw,
        open_loop_gain=a0,
        stages=stages,
        signal_hz=_given(inputs.signal_hz),
    )


@dataclass(frozen=True)
class SlewCurves:
    """The core's slew and swing limits over a frequency grid, and the operating point if one was given."""

    frequency_hz: np.ndarray
    slew_limited_amplitude_v: np.ndarray
    swing_limited_amplitude_v: float | None
    max_amplitude_v: np.ndarray
    operating_hz: float | None
    operating_amplitude_v: float | None
    operating_ok: bool


def slew_curves(inputs: slew.SlewInputs) -> SlewCurves:
    """The largest undistorted amplitude of the one row of ``inputs`` over frequencies well around its own.
    Raises DomainError when the core refuses the row."""
    one = slew.compute(inputs)
    swing = _first(one, "swing_limited_amplitude_v")
    frequency, amplitude = _given(inputs.frequency_hz), _given(inputs.amplitude_v)
    # The knee: the full-power bandwidth of the whole swing (or of the amplitude asked about, or of 1 V).
    reference_v = swing or amplitude or 1.0
    knee = float(
        slew.compute(dataclasses.replace(inputs, amplitude_v=np.array([reference_v]))).results[
            "full_power_bandwidth_hz"
        ][0]
    )
    around = [f for f in (frequency, knee, _first(one, "full_power_bandwidth_hz")) if f]
    low, high = min(around) / MARGIN, max(around) * MARGIN
    _span(low, high, "frequency_hz" if frequency else "slew_rate_v_per_s")
    grid = np.geomspace(low, high, GRID_POINTS)
    rows = dataclasses.replace(take(inputs, np.zeros(GRID_POINTS, dtype=np.intp)), frequency_hz=grid)
    curve = slew.compute(rows).results
    return SlewCurves(
        frequency_hz=grid,
        slew_limited_amplitude_v=curve["slew_limited_amplitude_v"],
        swing_limited_amplitude_v=swing,
        max_amplitude_v=curve["max_amplitude_v"],
        operating_hz=frequency,
        operating_amplitude_v=amplitude,
        # Every check that applies to the design passes (one without a limit does not apply).
        operating_ok=all(bool(c.ok[0]) for c in one.checks if not math.isnan(float(c.limit[0]))),
    )


@dataclass(frozen=True)
class LedCurves:
    """String current against supply voltage for one fixed resistor, nominal and worst case."""

    supply_v: np.ndarray
    current_a: np.ndarray
    current_low_a: np.ndarray
    current_high_a: np.ndarray
    resistor_ohm: float
    operating_supply_v: float
    supply_tolerance: float
    operating_current_a: float  # the core's nominal current at the operating supply
    worst_min_a: float  # the core's worst-case currents at the supply's tolerance limits
    worst_max_a: float
    if_max_a: float


def led_curves(inputs: led_string.LedStringInputs) -> LedCurves:
    """The string current of the one row of ``inputs`` against supply voltage, with the resistor the calculation
    chooses: nominal, and the worst-case band of forward voltage and resistor tolerance. Raises DomainError when
    the core refuses the row."""
    results = led_string.compute(inputs).results
    leds, switch_v, supply_v = (
        float(inputs.leds_in_series[0]),
        float(inputs.switch_drop_v[0]),
        float(inputs.supply_v[0]),
    )
    tolerance = _given(inputs.resistor_tolerance)
    if tolerance is None:
        tolerance = float(eseries.default_tolerance_rows(inputs.e_series)[0])
    supply_tolerance = float(inputs.supply_tolerance[0])
    resistor = float(results["resistor_ohm"][0])
    vf_min, vf_typ, vf_max = float(inputs.vf_min_v[0]), float(inputs.vf_typ_v[0]), float(inputs.vf_max_v[0])
    low, high = 0.9 * (leds * vf_min + switch_v), 1.3 * supply_v * (1.0 + supply_tolerance)
    _span(low, high, "supply_v")
    grid: FloatArray = np.linspace(low, high, GRID_POINTS)
    return LedCurves(
        supply_v=grid,
        current_a=led_string.string_current(grid - (leds * vf_typ + switch_v), resistor),
        current_low_a=led_string.string_current(grid - (leds * vf_max + switch_v), resistor * (1.0 + tolerance)),
        current_high_a=led_string.string_current(grid - (leds * vf_min + switch_v), resistor * (1.0 - tolerance)),
        resistor_ohm=resistor,
        operating_supply_v=supply_v,
        supply_tolerance=supply_tolerance,
        operating_current_a=float(results["current_a"][0]),
        worst_min_a=float(results["current_min_a"][0]),
        worst_max_a=float(results["current_max_a"][0]),
        if_max_a=float(inputs.if_max_a[0]),
    )
