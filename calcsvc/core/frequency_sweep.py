"""A log-spaced frequency sweep of cascaded single-pole stages: its preconditions, its frequencies and the
response (gain in dB, phase lag in degrees) at them. Used by the closed-loop-bandwidth calculation."""

from __future__ import annotations

import numpy as np

from calcsvc.core.outcome import FloatArray, Violation, first_bad, require

MAX_SWEEP_POINTS = 2000


def validate_sweep(points: FloatArray, start: FloatArray, stop: FloatArray) -> list[Violation]:
    """A sweep's preconditions per row: both ends or neither, a rising log-spaced span, 2 to
    ``MAX_SWEEP_POINTS`` whole points; NaN is "not given"."""
    v: list[Violation] = []
    points_given = ~np.isnan(points)
    with np.errstate(invalid="ignore"):
        bad = points_given & ((points != np.round(points)) | ~(points >= 2) | ~(points <= MAX_SWEEP_POINTS))
    message = f"sweep_points ({first_bad(points, bad)}) must be a whole number from 2 to {MAX_SWEEP_POINTS}"
    require(v, bad, "sweep_points", message)

    start_given, stop_given = ~np.isnan(start), ~np.isnan(stop)
    require(v, start_given & ~stop_given, "sweep_stop_hz", "sweep_stop_hz is needed with sweep_start_hz")
    require(v, stop_given & ~start_given, "sweep_start_hz", "sweep_start_hz is needed with sweep_stop_hz")
    bad = np.isfinite(start) & (start <= 0.0)
    require(
        v,
        bad,
        "sweep_start_hz",
        f"sweep_start_hz ({first_bad(start, bad)} Hz) must be above 0 Hz (the sweep is log-spaced)",
    )
    bad = np.isfinite(start) & np.isfinite(stop) & (start > 0.0) & (stop <= start)
    require(
        v,
        bad,
        "sweep_stop_hz",
        f"sweep_stop_hz ({first_bad(stop, bad)} Hz) must be above sweep_start_hz ({first_bad(start, bad)} Hz)",
    )
    require(
        v,
        start_given & stop_given & ~points_given,
        "sweep_points",
        f"sweep_points must be from 2 to {MAX_SWEEP_POINTS} when sweep_start_hz and sweep_stop_hz are given",
    )
    require(
        v,
        points_given & ~start_given & ~stop_given,
        "sweep_start_hz",
        "sweep_points needs sweep_start_hz and sweep_stop_hz",
    )
    return v


def sweep_frequencies(start: FloatArray, stop: FloatArray, points: np.ndarray) -> FloatArray:
    """Each row's log-spaced points, row after row; rows of one size share one ``geomspace`` call, so a row
    gets the same frequencies alone as in any batch."""
    first = np.concatenate(([0], np.cumsum(points)[:-1]))
    frequency = np.empty(int(points.sum()))
    for size in np.unique(points):
        rows = np.flatnonzero(points == size)
        frequency[first[rows, None] + np.arange(size)] = np.geomspace(start[rows], stop[rows], int(size), axis=1)
    return frequency


def stage_response(
    frequency_hz: np.ndarray, dc_gain: np.ndarray, f1: np.ndarray, stages: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Gain (dB) and added phase lag (degrees) of ``stages`` cascaded single-pole stages; broadcasts."""
    x2 = np.square(frequency_hz / f1)
    gain_db = stages * (20.0 * np.log10(np.abs(dc_gain)) - 10.0 * np.log1p(x2) / np.log(10.0))
    phase_deg = -stages * np.degrees(np.arctan(frequency_hz / f1))
    return gain_db, phase_deg
