"""One load's current over a period, from any of the three ways to describe it (``duty_power`` sums the loads):

- a rectangular pulse train, ``peak_current_a`` for a fraction ``duty_cycle`` of the period, so ``I_avg = I·D``
  and ``I_rms = I·√D`` (definitions of mean and RMS);
- the same with the duty cycle given as ``on_time_s`` over ``period_s``;
- samples of one period of any waveform, linear between samples (trapezoid rule).

Units: SI (A, s).
"""

from __future__ import annotations

from collections.abc import Collection

import numpy as np
import numpy.typing as npt

from calcsvc.core.outcome import DomainError, FloatArray, Violation, first_bad, raise_violations, require


def rectangular_load(peak_current_a: npt.ArrayLike, duty_cycle: npt.ArrayLike) -> tuple[FloatArray, FloatArray]:
    """Average and RMS current (A) of a rectangular pulse train: ``I·D`` and ``I·√D``.

    Inputs are assumed valid (``I ≥ 0``, ``0 ≤ D ≤ 1``); broadcasts.
    """
    peak = np.asarray(peak_current_a, dtype=np.float64)
    duty = np.asarray(duty_cycle, dtype=np.float64)
    return peak * duty, peak * np.sqrt(duty)


def waveform_stats(time_s: npt.ArrayLike, current_a: npt.ArrayLike) -> tuple[float, float, float, float]:
    """Average, RMS, peak current (A) and effective duty cycle (average/peak) of one sampled period.

    The samples span exactly one period, from ``time_s[0]`` to ``time_s[-1]``; the waveform between samples is
    taken as linear (trapezoid rule for the mean of ``i`` and of ``i²``). An all-zero waveform has duty 0.
    Raises :class:`DomainError` (field ``waveform``) unless there are at least 2 samples of equal-length 1-D
    arrays, time strictly increases, every value is finite and no current is negative.
    """

    def fail(message: str) -> DomainError:
        return DomainError([Violation("waveform", message, np.ones(1, dtype=bool))])

    t = np.asarray(time_s, dtype=np.float64)
    i = np.asarray(current_a, dtype=np.float64)
    if t.ndim != 1 or i.ndim != 1 or t.shape != i.shape:
        raise fail("time_s and current_a must be 1-D lists of the same length")
    if t.size < 2:
        raise fail("a waveform needs at least 2 samples to span a period")
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(i))):
        raise fail("every waveform time and current must be a finite number")
    if np.any(np.diff(t) <= 0.0):
        raise fail("waveform times must strictly increase")
    if np.any(i < 0.0):
        raise fail(f"waveform currents must not be negative (got {float(i.min()):g} A): loads draw current")
    period = float(t[-1] - t[0])
    if not period > 0.0:  # underflow of the span despite increasing samples
        raise fail("the waveform's period (last time minus first) must be above 0 s")

    average = float(np.trapezoid(i, t)) / period
    rms = float(np.sqrt(np.trapezoid(i * i, t) / period))
    peak = float(i.max())
    duty = average / peak if peak > 0.0 else 0.0
    return average, rms, peak, duty


def on_time_duty(on_time_s: npt.ArrayLike, period_s: npt.ArrayLike) -> FloatArray:
    """Duty cycle ``on_time / period`` (broadcasts; the result is at least 1-D).

    Raises :class:`DomainError` (fields ``period_s``, ``on_time_s``) unless both are finite, the period is
    above 0 and ``0 ≤ on_time ≤ period``.
    """
    on, period = np.broadcast_arrays(
        np.atleast_1d(np.asarray(on_time_s, dtype=np.float64)),
        np.atleast_1d(np.asarray(period_s, dtype=np.float64)),
    )
    v: list[Violation] = []
    require(v, ~np.isfinite(period), "period_s", "period_s is required and must be a finite number")
    require(v, ~np.isfinite(on), "on_time_s", "on_time_s is required and must be a finite number")
    bad = np.isfinite(period) & (period <= 0.0)
    require(v, bad, "period_s", f"period_s ({first_bad(period, bad)} s) must be above 0 s")
    bad = np.isfinite(on) & (on < 0.0)
    require(v, bad, "on_time_s", f"on_time_s ({first_bad(on, bad)} s) cannot be negative")
    bad = np.isfinite(on) & np.isfinite(period) & (period > 0.0) & (on > period)
    require(
        v,
        bad,
        "on_time_s",
        f"on_time_s ({first_bad(on, bad)} s) cannot exceed period_s ({first_bad(period, bad)} s): "
        "a load cannot be on for longer than the period",
    )
    raise_violations(v)
    return on / period


_TIMED = ("on_time_s", "period_s")


def describe_load(given: Collection[str]) -> tuple[str, str] | None:
    """The field and fault of a load not described by exactly one of: a waveform; peak_current_a with duty_cycle;
    peak_current_a with on_time_s and period_s. None when the load is described once."""
    if "waveform" in given:
        extra = [k for k in ("peak_current_a", "duty_cycle", *_TIMED) if k in given]
        return (extra[0], f"a load with a waveform takes its currents from it; drop {extra[0]}") if extra else None
    if "peak_current_a" not in given:
        return "peak_current_a", "give peak_current_a with a duty cycle, or a waveform"
    timed = any(k in given for k in _TIMED)
    if "duty_cycle" in given and timed:
        return "duty_cycle", "give duty_cycle or on_time_s with period_s, not both"
    if timed and not all(k in given for k in _TIMED):
        return "period_s", "on_time_s and period_s go together"
    if "duty_cycle" not in given and not timed:
        return "duty_cycle", "give duty_cycle, or on_time_s with period_s"
    return None
