"""Supply current and power budget of duty-cycled loads (LEDs, motors, radios) on one supply.

Model
-----
Each load draws a periodic current. A rectangular load is ``peak_current_a`` for a fraction ``duty_cycle`` of
the period and 0 otherwise, so ``I_avg = I·D`` and ``I_rms = I·√D`` (definitions of mean and RMS). A load with
any other waveform carries its own average and RMS, computed from samples of one period by
``load_current.waveform_stats``. A supply row sums its loads, each ``count`` times:

- average current and power: ``Σ count·I_avg`` and ``V·Σ count·I_avg``
- peak current, as if every load were on at once: ``Σ count·I_peak`` (the worst case; loads that never
  overlap draw less)
- utilization ``I_avg/current_max_a``; runtime ``capacity_ah / I_avg`` (hours)
- the largest duty cycle ``D`` the dimmed loads could share, the fixed loads keeping their own:
  ``Σ_dimmed count·I_peak·D + Σ_fixed count·I_avg ≤ current_max_a``, within [0, 1] (0: the fixed loads alone
  exceed the rating). Fixed are the loads that are always on (duty 1), those marked ``fixed`` (a controller,
  a fan) and sampled waveforms (their shape is what they draw); only the rest are dimmed by a common PWM.

Assumptions: a constant supply voltage (no droop, no converter efficiency), loads independent of each other,
an ideal battery whose capacity does not depend on the drain rate. Units: SI (V, A, W), capacity in Ah,
runtime in hours.

Batches: ``supply_v``, ``current_max_a`` and ``capacity_ah`` have one entry per supply row (shape ``(n,)``);
the load fields are flattened across all rows (shape ``(m,)``) and ``load_row`` says which row each load
belongs to. (``outcome.take`` selects rows of same-length fields only, so it does not apply to these inputs.)
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from calcsvc.core.load_current import describe_load, rectangular_load
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
from calcsvc.core.spec import BudgetSpec, Input, Items, Result, Role, Samples, fraction, positive

NAME = "duty-cycle-power"
VERSION = "2"

# Rounding slack when checking a waveform's own average ≤ rms ≤ peak.
_STATS_RTOL = 1e-9


@dataclass(frozen=True)
class DutyPowerInputs:
    """Supply rows (shape ``(n,)``) and loads flattened across rows (shape ``(m,)``).

    Per supply row: ``supply_v``; ``current_max_a`` (the supply's continuous rating) and ``capacity_ah``
    (battery capacity) are NaN when unknown.

    Per load: ``load_row`` (index of its supply row), ``peak_current_a``, ``count`` (identical units, whole
    number ≥ 1) and either ``duty_cycle`` (rectangular load; ``average_current_a`` and ``rms_current_a`` NaN)
    or ``average_current_a`` and ``rms_current_a`` (sampled waveform, see ``load_current.waveform_stats``;
    ``duty_cycle`` NaN); ``fixed`` (bool) marks a load that keeps its own duty instead of sharing a common one.
    """

    supply_v: FloatArray
    current_max_a: FloatArray
    capacity_ah: FloatArray
    load_row: npt.NDArray[np.int64]
    peak_current_a: FloatArray
    duty_cycle: FloatArray
    average_current_a: FloatArray
    rms_current_a: FloatArray
    count: FloatArray
    fixed: BoolArray


_LOAD_FIELDS = ("load_row", "peak_current_a", "duty_cycle", "average_current_a", "rms_current_a", "count")
_ROW_FIELDS = ("supply_v", "current_max_a", "capacity_ah")


def _first_load(bad: BoolArray) -> str:
    return str(int(np.flatnonzero(bad)[0])) if bad.any() else ""


def validate(inputs: DutyPowerInputs) -> list[Violation]:
    """Every physical precondition; never raises. A bad load marks the row it belongs to."""
    v: list[Violation] = []
    n = np.shape(inputs.supply_v)[0]
    all_rows = np.ones(n, dtype=bool)

    row_shapes = {np.shape(getattr(inputs, name)) for name in _ROW_FIELDS}
    load_shapes = {np.shape(getattr(inputs, name)) for name in _LOAD_FIELDS}
    if len(row_shapes) != 1 or len(load_shapes) != 1 or len(next(iter(load_shapes))) != 1:
        require(
            v,
            all_rows,
            "loads",
            "supply fields must share one length and load fields another (one entry per load)",
        )
        return v

    load_row = np.asarray(inputs.load_row, dtype=np.float64)
    valid_row = np.isfinite(load_row) & (load_row == np.round(load_row)) & (load_row >= 0) & (load_row < n)
    row_index = np.where(valid_row, load_row, 0).astype(np.intp)

    def rows_of(bad_load: BoolArray) -> BoolArray:
        """Supply rows owning the bad loads; every row when a bad load has no valid row."""
        if np.any(bad_load & ~valid_row):
            return all_rows.copy()
        mask = np.zeros(n, dtype=bool)
        mask[row_index[bad_load]] = True
        return mask

    bad = ~valid_row
    if bad.any():
        # A load without a valid row cannot be attributed to one, so every row is marked.
        require(
            v,
            all_rows,
            "load_row",
            f"load_row ({first_bad(load_row, bad)}) of load {_first_load(bad)} must be the index of a supply "
            f"row (0 to {n - 1})",
        )

    # Supply rows.
    sv = inputs.supply_v
    require(v, ~np.isfinite(sv), "supply_v", "supply_v is required and must be a finite number")
    bad = np.isfinite(sv) & (sv <= 0.0)
    require(v, bad, "supply_v", f"supply_v ({first_bad(sv, bad)} V) must be above 0 V")
    for name, unit in (("current_max_a", "A"), ("capacity_ah", "Ah")):
        values = getattr(inputs, name)
        bad = np.isinf(values)
        require(v, bad, name, f"{name} ({first_bad(values, bad)}) must be a finite number when given")
        bad = np.isfinite(values) & (values <= 0.0)
        require(v, bad, name, f"{name} ({first_bad(values, bad)} {unit}) must be above 0 {unit} when given")

    loads_per_row = np.bincount(row_index[valid_row], minlength=n)
    require(v, loads_per_row == 0, "loads", "every supply row needs at least one load")

    # Loads.
    peak, duty = inputs.peak_current_a, inputs.duty_cycle
    avg, rms, count = inputs.average_current_a, inputs.rms_current_a, inputs.count

    bad = ~np.isfinite(peak)
    require(
        v,
        rows_of(bad),
        "peak_current_a",
        f"peak_current_a of load {_first_load(bad)} is required and must be a finite number",
    )
    bad = np.isfinite(peak) & (peak < 0.0)
    require(
        v,
        rows_of(bad),
        "peak_current_a",
        f"peak_current_a ({first_bad(peak, bad)} A) of load {_first_load(bad)} cannot be negative",
    )
    bad = ~np.isfinite(count)
    require(v, rows_of(bad), "count", f"count of load {_first_load(bad)} is required and must be a finite number")
    bad = np.isfinite(count) & ((count != np.round(count)) | (count < 1))
    require(
        v,
        rows_of(bad),
        "count",
        f"count ({first_bad(count, bad)}) of load {_first_load(bad)} must be a whole number of at least 1",
    )

    for name in ("duty_cycle", "average_current_a", "rms_current_a"):
        values = getattr(inputs, name)
        bad = np.isinf(values)
        require(
            v,
            rows_of(bad),
            name,
            f"{name} ({first_bad(values, bad)}) of load {_first_load(bad)} must be a finite number when given",
        )

    duty_given = ~np.isnan(duty)
    avg_given, rms_given = ~np.isnan(avg), ~np.isnan(rms)
    bad = duty_given & (avg_given | rms_given)
    require(
        v,
        rows_of(bad),
        "duty_cycle",
        f"load {_first_load(bad)}: give either duty_cycle (rectangular load) or average_current_a and "
        "rms_current_a (sampled waveform), not both",
    )
    bad = ~duty_given & ~(avg_given & rms_given)
    require(
        v,
        rows_of(bad),
        "duty_cycle",
        f"load {_first_load(bad)} needs duty_cycle (rectangular load) or both average_current_a and "
        "rms_current_a (sampled waveform)",
    )
    bad = np.isfinite(duty) & ((duty < 0.0) | (duty > 1.0))
    require(
        v,
        rows_of(bad),
        "duty_cycle",
        f"duty_cycle ({first_bad(duty, bad)}) of load {_first_load(bad)} must be between 0 and 1 "
        "(the fraction of each period the load is on)",
    )

    for name, values in (("average_current_a", avg), ("rms_current_a", rms)):
        bad = np.isfinite(values) & (values < 0.0)
        require(
            v,
            rows_of(bad),
            name,
            f"{name} ({first_bad(values, bad)} A) of load {_first_load(bad)} cannot be negative",
        )
    # A non-negative waveform always has mean ≤ RMS ≤ peak; anything else is not one waveform.
    slack = 1.0 + _STATS_RTOL
    bad = np.isfinite(avg) & np.isfinite(rms) & (avg >= 0.0) & (avg > rms * slack)
    require(
        v,
        rows_of(bad),
        "average_current_a",
        f"average_current_a ({first_bad(avg, bad)} A) of load {_first_load(bad)} cannot exceed its "
        f"rms_current_a ({first_bad(rms, bad)} A)",
    )
    bad = np.isfinite(rms) & np.isfinite(peak) & (rms >= 0.0) & (peak >= 0.0) & (rms > peak * slack)
    require(
        v,
        rows_of(bad),
        "rms_current_a",
        f"rms_current_a ({first_bad(rms, bad)} A) of load {_first_load(bad)} cannot exceed its "
        f"peak_current_a ({first_bad(peak, bad)} A)",
    )
    require_practical(v, {name: getattr(inputs, name) for name in _ROW_FIELDS}, ("current_max_a",))
    require_practical(v, {name: getattr(inputs, name) for name in _LOAD_FIELDS[1:]}, rows_of=rows_of)
    return v


def compute(inputs: DutyPowerInputs, validated: bool = False) -> Outcome:
    """Per-load and per-row currents, powers, runtime and supply checks (model: module docstring).

    Per-load results (shape ``(m,)``) are for one unit of the load; per-row results (shape ``(n,)``) include
    ``count``.
    """
    if not validated:  # the caller has just validated these very inputs
        raise_violations(validate(inputs))

    n = inputs.supply_v.shape[0]
    row = np.asarray(inputs.load_row).astype(np.intp)
    rectangular = ~np.isnan(inputs.duty_cycle)
    rect_avg, rect_rms = rectangular_load(inputs.peak_current_a, np.where(rectangular, inputs.duty_cycle, 0.0))
    load_avg = np.where(rectangular, rect_avg, inputs.average_current_a)
    load_rms = np.where(rectangular, rect_rms, inputs.rms_current_a)
    load_v = inputs.supply_v[row]
    count = inputs.count

    average_current = np.bincount(row, weights=load_avg * count, minlength=n)
    peak_current = np.bincount(row, weights=inputs.peak_current_a * count, minlength=n)
    fixed = np.asarray(inputs.fixed, dtype=bool) | ~rectangular | (inputs.duty_cycle == 1.0)
    fixed_average = np.bincount(row, weights=np.where(fixed, load_avg * count, 0.0), minlength=n)
    dimmed_peak = np.bincount(row, weights=np.where(fixed, 0.0, inputs.peak_current_a * count), minlength=n)
    rating = inputs.current_max_a
    rating_known = ~np.isnan(rating)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        utilization = average_current / rating
        # No drain (or so little that the quotient overflows), no finite runtime: give "does not apply" (NaN)
        # and say so in a warning.
        runtime = inputs.capacity_ah / average_current
        spare = rating - fixed_average
        common_duty = np.where(dimmed_peak > 0.0, np.clip(spare / dimmed_peak, 0.0, 1.0), spare >= 0.0)
    runtime[np.isinf(runtime)] = np.nan
    common_duty = np.where(rating_known, common_duty, np.nan)

    results: dict[str, np.ndarray] = {
        "load_average_current_a": load_avg,
        "load_rms_current_a": load_rms,
        "load_average_power_w": load_v * load_avg,
        "load_peak_power_w": load_v * inputs.peak_current_a,
        "average_current_a": average_current,
        "average_power_w": inputs.supply_v * average_current,
        "peak_current_a": peak_current,
        "supply_utilization": utilization,
        "runtime_h": runtime,
        "max_common_duty_cycle": common_duty,
    }

    checks = [
        Check(
            "supply_average_current",
            ~(average_current > rating),
            average_current,
            rating,
            "max",
            "average current of all loads must not exceed current_max_a; does not apply when the rating is unknown",
        ),
        Check(
            "supply_peak_current",
            ~(peak_current > rating),
            peak_current,
            rating,
            "max",
            "peak current with every load on at once must not exceed current_max_a; a supply with enough "
            "bulk capacitance may tolerate short peaks above its rating, so a failure here calls for "
            "checking the supply's pulse capability rather than always for a larger supply; does not apply "
            "when the rating is unknown",
        ),
    ]

    warnings: list[Notice] = []
    capacity_known = ~np.isnan(inputs.capacity_ah)
    mask = capacity_known & ~np.isnan(runtime)
    add_notice(
        warnings,
        mask,
        "real battery capacity falls at high drain; treat runtime_h as an upper bound",
    )
    mask = capacity_known & np.isnan(runtime)
    add_notice(
        warnings,
        mask,
        "the loads draw no average current (or vanishingly little), so runtime_h does not apply "
        "(it would be unbounded)",
    )

    cautions: list[Notice] = []
    mask = average_current > rating
    add_notice(
        cautions,
        mask,
        "average current exceeds current_max_a: the supply will overheat or shut down; a battery "
        "pack that is overloaded or shorted can overheat and catch fire. Reduce the load or use a "
        "supply rated for it",
    )
    mask = peak_current > rating
    add_notice(
        cautions,
        mask,
        "peak current with every load on at once exceeds current_max_a: the supply may "
        "current-limit, droop or reset during the peaks and run hot; stagger the loads or confirm "
        "the supply's pulse rating and bulk capacitance",
    )
    return Outcome(results=results, checks=checks, warnings=warnings, cautions=cautions)


# ---- declaration --------------------------------------------------------------------------------------------

RESULTS = (
    Result(
        "loads",
        "",
        "per load, for one unit: average_current_a, rms_current_a, average_power_w, peak_power_w",
        "records",
    ),
    Result("average_current_a", "A", "average supply current of all loads"),
    Result("average_power_w", "W", "average supply power"),
    Result("peak_current_a", "A", "supply current with every load on at once"),
    Result("supply_utilization", "", "average current / supply rating"),
    Result("runtime_h", "h", "battery capacity / average current (capacity alone; see the review for usable runtime)"),
    Result(
        "max_common_duty_cycle",
        "",
        "largest duty cycle the dimmed loads could share within the supply rating, the fixed loads (duty 1, "
        "marked fixed, or a waveform) drawing their own; 0 when the fixed loads alone exceed it",
    ),
)

MAX_WAVEFORM_SAMPLES = 100_000
SPEC = BudgetSpec(
    name=NAME,
    summary="Average and peak supply current and power of duty-cycled loads, with runtime and duty headroom",
    version=VERSION,
    inputs=(
        positive("supply_v", "V", "supply voltage"),
        positive("current_max_a", "A", "supply current rating", optional=True),
        positive("capacity_ah", "A*h", "battery capacity", optional=True),
    ),
    roles=(
        Role(
            "supply",
            "supply",
            (("supply_v", "supply_v"), ("current_max_a", "current_max_a"), ("capacity_ah", "capacity_ah")),
        ),
    ),
    items=Items(
        "loads",
        "the loads on the supply, each a rectangular pulse train or a sampled waveform",
        (
            Input("name", "", "what the load is", "", max_length=100),
            Input("peak_current_a", "A", "current while on (rectangular load)", optional=True, minimum=0),
            fraction("duty_cycle", "fraction of time on", optional=True),
            Input("on_time_s", "s", "on time per period (instead of duty_cycle)", optional=True, minimum=0),
            positive("period_s", "s", "PWM period (with on_time_s)", optional=True),
            Input("count", "dimensionless", "identical units", 1, minimum=1, maximum=100_000, integer=True),
            Input("fixed", "", "keeps its own duty, not dimmed by a common PWM (a controller)", False, flag=True),
        ),
        Samples(
            "waveform",
            "samples over exactly one period",
            (Input("time_s", "s", "sample times"), Input("current_a", "A", "currents at those times")),
            2,
            MAX_WAVEFORM_SAMPLES,
        ),
        1,
        1000,
        describe_load,
    ),
    results=RESULTS,
)
