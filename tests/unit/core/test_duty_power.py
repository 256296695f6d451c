"""Tests for the duty-cycle power budget."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad

from calcsvc.core.duty_power import DutyPowerInputs, compute, validate
from calcsvc.core.load_current import on_time_duty, rectangular_load, waveform_stats
from calcsvc.core.outcome import DomainError

NAN = np.nan


def make(
    loads: list[dict[str, float]],
    *,
    supply_v: float | list[float] = 5.0,
    current_max_a: float | list[float] = NAN,
    capacity_ah: float | list[float] = NAN,
) -> DutyPowerInputs:
    """Supply rows and loads; each load dict has ``peak`` and ``duty`` or ``avg`` and ``rms``, optional
    ``count``, ``row`` and ``fixed``."""

    n = len(np.atleast_1d(supply_v))

    def rows(x: float | list[float]) -> np.ndarray:
        return np.broadcast_to(np.asarray(x, dtype=np.float64), (n,)).copy()

    def col(key: str, default: float) -> np.ndarray:
        return np.array([load.get(key, default) for load in loads], dtype=np.float64)

    return DutyPowerInputs(
        supply_v=rows(supply_v),
        current_max_a=rows(current_max_a),
        capacity_ah=rows(capacity_ah),
        load_row=np.array([int(load.get("row", 0)) for load in loads], dtype=np.int64),
        peak_current_a=col("peak", NAN),
        duty_cycle=col("duty", NAN),
        average_current_a=col("avg", NAN),
        rms_current_a=col("rms", NAN),
        count=col("count", 1.0),
        fixed=np.array([bool(load.get("fixed", False)) for load in loads], dtype=bool),
    )


def pulse(t: np.ndarray, peak: float, duty: float, period: float) -> np.ndarray:
    """A rectangular pulse train: ``peak`` during the first ``duty`` of each period."""
    return np.where((t % period) < duty * period, peak, 0.0)


# --- numeric integration of pulse trains ---


@pytest.mark.parametrize(("peak", "duty"), [(0.35, 0.2), (1.2, 0.5), (0.02, 0.9)])
def test_average_power_equals_trapezoid_of_sampled_pulse_train(peak, duty):
    v, period, periods = 12.0, 1e-3, 5
    out = compute(make([{"peak": peak, "duty": duty}], supply_v=v)).results
    # Independent numerical solution: np.trapezoid on a finely sampled pulse train over whole periods.
    t = np.linspace(0.0, periods * period, 1_000_001)
    p = v * pulse(t, peak, duty, period)
    assert out["average_power_w"][0] == pytest.approx(np.trapezoid(p, t) / t[-1], rel=1e-4)
    assert out["load_average_power_w"][0] == pytest.approx(v * peak * duty, rel=1e-12)


@pytest.mark.parametrize(("peak", "duty"), [(0.35, 0.2), (1.2, 0.5), (0.02, 0.9)])
def test_average_and_rms_equal_scipy_quad_of_piecewise_pulse(peak, duty):
    v, period = 3.3, 2e-3

    def current(t: float) -> float:
        return peak if (t % period) < duty * period else 0.0

    # Independent numerical solution: scipy.integrate.quad of the piecewise waveform, edges as breakpoints.
    avg = quad(current, 0.0, period, points=[duty * period])[0] / period
    rms = np.sqrt(quad(lambda t: current(t) ** 2, 0.0, period, points=[duty * period])[0] / period)
    out = compute(make([{"peak": peak, "duty": duty}], supply_v=v)).results
    assert out["load_average_current_a"][0] == pytest.approx(avg, rel=1e-9)
    assert out["load_average_power_w"][0] == pytest.approx(v * avg, rel=1e-9)
    # Definition of RMS: sqrt of the mean of i², which for a pulse is I·√D.
    assert out["load_rms_current_a"][0] == pytest.approx(rms, rel=1e-9)
    assert out["load_rms_current_a"][0] == pytest.approx(peak * np.sqrt(duty), rel=1e-12)


def test_rectangular_load_closed_form():
    # Definitions of mean and RMS of a rectangular pulse: I·D and I·√D.
    avg, rms = rectangular_load([2.0, 0.5], [0.25, 1.0])
    np.testing.assert_allclose(avg, [0.5, 0.5])
    np.testing.assert_allclose(rms, [1.0, 0.5])


def test_waveform_stats_of_rectangular_pulse_matches_closed_form():
    peak, duty, period = 0.8, 0.3, 1e-3
    t = np.linspace(0.0, period, 200_001)
    avg, rms, pk, d = waveform_stats(t, pulse(t, peak, duty, period))
    # Closed form (definitions of mean and RMS); the sampled edge costs at most one sample step.
    assert avg == pytest.approx(peak * duty, rel=1e-4)
    assert rms == pytest.approx(peak * np.sqrt(duty), rel=1e-4)
    assert pk == peak
    assert d == pytest.approx(duty, rel=1e-4)


def test_waveform_stats_of_half_wave_rectified_sine():
    # Closed forms by integration: mean Ip/π and RMS Ip/2 of a half-wave rectified sine, checked here with
    # scipy.integrate.quad as an independent numerical solution.
    ip, period = 2.0, 1.0
    t = np.linspace(0.0, period, 100_001)
    i = np.maximum(ip * np.sin(2 * np.pi * t / period), 0.0)
    avg, rms, pk, d = waveform_stats(t, i)
    assert avg == pytest.approx(ip / np.pi, rel=1e-6)
    assert rms == pytest.approx(ip / 2, rel=1e-6)
    quad_avg = quad(lambda x: max(ip * np.sin(2 * np.pi * x), 0.0), 0, 1, points=[0.5])[0]
    assert avg == pytest.approx(quad_avg, rel=1e-6)
    assert pk == pytest.approx(ip, rel=1e-9)
    assert d == pytest.approx(1 / np.pi, rel=1e-6)
    # Its stats feed compute as a waveform load.
    out = compute(make([{"peak": pk, "avg": avg, "rms": rms}], supply_v=10.0)).results
    assert out["average_power_w"][0] == pytest.approx(10.0 * ip / np.pi, rel=1e-6)
    assert out["load_rms_current_a"][0] == rms


@pytest.mark.parametrize(
    ("t", "i"),
    [
        ([0.0], [1.0]),
        ([0.0, 1.0, 1.0], [1.0, 1.0, 0.0]),
        ([0.0, 2.0, 1.0], [1.0, 1.0, 0.0]),
        ([0.0, 1.0], [1.0, -0.1]),
        ([0.0, np.nan], [1.0, 1.0]),
        ([0.0, 1.0], [1.0, np.inf]),
        ([0.0, 1.0, 2.0], [1.0, 1.0]),
    ],
)
def test_waveform_stats_rejects_bad_samples(t, i):
    with pytest.raises(DomainError) as err:
        waveform_stats(t, i)
    assert [v.field for v in err.value.violations] == ["waveform"]


def test_on_time_duty():
    assert on_time_duty(2e-3, 10e-3)[0] == pytest.approx(0.2)
    np.testing.assert_allclose(on_time_duty([0.0, 5.0, 10.0], 10.0), [0.0, 0.5, 1.0])
    with pytest.raises(DomainError) as err:
        on_time_duty(12e-3, 10e-3)
    assert err.value.violations[0].field == "on_time_s"
    assert "12" in err.value.violations[0].message
    with pytest.raises(DomainError) as err:
        on_time_duty(1e-3, 0.0)
    assert err.value.violations[0].field == "period_s"


# --- hand examples ---


def test_runtime_hand_example():
    # Hand calculation (definition of the ampere-hour): 2 Ah / (2 × 0.2 A × 0.25 + 0.1 A) = 2 Ah / 0.2 A
    # = 10 h.
    out = compute(
        make(
            [{"peak": 0.2, "duty": 0.25, "count": 2}, {"peak": 0.1, "duty": 1.0}],
            supply_v=3.7,
            capacity_ah=2.0,
        )
    )
    r = out.results
    assert r["average_current_a"][0] == pytest.approx(0.2)
    assert r["average_power_w"][0] == pytest.approx(0.74)
    assert r["runtime_h"][0] == pytest.approx(10.0)
    assert np.isnan(r["supply_utilization"][0])
    assert np.isnan(r["max_common_duty_cycle"][0])
    assert any("upper bound" in n.message for n in out.warnings)
    assert all(c.ok[0] for c in out.checks)  # no rating: checks do not apply


def test_max_common_duty_cycle_hand_example():
    # Hand calculation: peaks 2 × 0.5 A + 1 A = 2 A all on; a 1.5 A supply allows D = 1.5/2 = 0.75.
    out = compute(
        make(
            [{"peak": 0.5, "duty": 0.5, "count": 2}, {"peak": 1.0, "duty": 0.3}],
            current_max_a=1.5,
        )
    )
    r = out.results
    assert r["peak_current_a"][0] == pytest.approx(2.0)
    assert r["max_common_duty_cycle"][0] == pytest.approx(0.75)
    assert r["average_current_a"][0] == pytest.approx(0.8)
    assert r["supply_utilization"][0] == pytest.approx(0.8 / 1.5)
    check = {c.name: c for c in out.checks}
    assert check["supply_average_current"].ok[0]
    assert not check["supply_peak_current"].ok[0]
    assert [n.message.split(":")[0] for n in out.cautions] == [
        "peak current with every load on at once exceeds current_max_a"
    ]
    # A supply bigger than every peak together: capped at 1.
    out = compute(make([{"peak": 0.5, "duty": 0.5}], current_max_a=3.0))
    assert out.results["max_common_duty_cycle"][0] == 1.0
    assert out.cautions == []


def _average_at_common_duty(loads: list[dict[str, float]], duty: float) -> float:
    """Direct summation: the dimmed loads at ``duty``, the always-on and fixed ones at their own duty."""
    total = 0.0
    for load in loads:
        own = load["duty"] == 1.0 or load.get("fixed", False)
        total += load.get("count", 1) * load["peak"] * (load["duty"] if own else duty)
    return total


def test_common_duty_leaves_always_on_and_fixed_loads_at_their_own_duty():
    # 1 A supply; LEDs 2 A peak dimmed; a controller drawing 0.5 A always (duty 1): only the LEDs share
    # the duty, so D = (1 − 0.5) / 2 = 0.25. Checked by direct summation of the average at that duty.
    loads = [{"peak": 2.0, "duty": 0.3}, {"peak": 0.5, "duty": 1.0}]
    duty = compute(make(loads, current_max_a=1.0)).results["max_common_duty_cycle"][0]
    assert duty == pytest.approx(0.25)
    assert _average_at_common_duty(loads, duty) == pytest.approx(1.0)
    assert _average_at_common_duty(loads, 0.4) == pytest.approx(1.3)  # the old answer overloads the supply
    # A load marked fixed keeps its own duty too (a fan pulsing at 50 %, not dimmed with the LEDs).
    loads = [{"peak": 2.0, "duty": 0.3}, {"peak": 0.4, "duty": 0.5, "fixed": True, "count": 2}]
    duty = compute(make(loads, current_max_a=1.0)).results["max_common_duty_cycle"][0]
    assert duty == pytest.approx(0.3)
    assert _average_at_common_duty(loads, duty) == pytest.approx(1.0)
    # Fixed loads alone over the rating: no common duty fits.
    out = compute(make([{"peak": 1.0, "duty": 0.5}, {"peak": 1.5, "duty": 1.0}], current_max_a=1.0))
    assert out.results["max_common_duty_cycle"][0] == 0.0


def test_average_over_rating_caution():
    out = compute(make([{"peak": 2.0, "duty": 0.9}], current_max_a=1.0, capacity_ah=1.0))
    assert not {c.name: c for c in out.checks}["supply_average_current"].ok[0]
    text = " ".join(n.message for n in out.cautions)
    assert "overheat" in text and "fire" in text


def test_batch_rows_sum_their_own_loads():
    inputs = make(
        [
            {"peak": 1.0, "duty": 0.5, "row": 1},
            {"peak": 0.2, "duty": 1.0, "row": 0, "count": 3},
            {"peak": 0.4, "avg": 0.1, "rms": 0.2, "row": 1},
        ],
        supply_v=[5.0, 12.0],
        current_max_a=[1.0, NAN],
    )
    r = compute(inputs).results
    np.testing.assert_allclose(r["average_current_a"], [0.6, 0.6])
    np.testing.assert_allclose(r["average_power_w"], [3.0, 7.2])
    np.testing.assert_allclose(r["peak_current_a"], [0.6, 1.4])
    np.testing.assert_allclose(r["load_peak_power_w"], [12.0, 1.0, 4.8])
    assert r["max_common_duty_cycle"][0] == 1.0 and np.isnan(r["max_common_duty_cycle"][1])


# --- violations ---


@pytest.mark.parametrize(
    ("loads", "kwargs", "field"),
    [
        ([{"peak": 1.0, "duty": 1.3}], {}, "duty_cycle"),
        ([{"peak": 1.0, "duty": -0.1}], {}, "duty_cycle"),
        ([{"peak": 1.0}], {}, "duty_cycle"),
        ([{"peak": 1.0, "duty": 0.5, "avg": 0.5, "rms": 0.7}], {}, "duty_cycle"),
        ([{"peak": -1.0, "duty": 0.5}], {}, "peak_current_a"),
        ([{"duty": 0.5}], {}, "peak_current_a"),
        ([{"peak": 1.0, "duty": 0.5, "count": 0}], {}, "count"),
        ([{"peak": 1.0, "duty": 0.5, "count": 1.5}], {}, "count"),
        ([{"peak": 1.0, "duty": 0.5}], {"supply_v": 0.0}, "supply_v"),
        ([{"peak": 1.0, "duty": 0.5}], {"current_max_a": 0.0}, "current_max_a"),
        ([{"peak": 1.0, "duty": 0.5}], {"capacity_ah": -1.0}, "capacity_ah"),
        ([{"peak": 1.0, "duty": 0.5}], {"capacity_ah": np.inf}, "capacity_ah"),
        ([{"peak": 1.0, "duty": 0.5}], {"supply_v": [5.0, 5.0]}, "loads"),
        ([{"peak": 1.0, "duty": 0.5, "row": 3}], {}, "load_row"),
        ([{"peak": 1.0, "avg": 0.8, "rms": 0.5}], {}, "average_current_a"),
        ([{"peak": 1.0, "avg": 0.5, "rms": 1.5}], {}, "rms_current_a"),
        ([{"peak": 1.0, "avg": -0.5, "rms": 0.5}], {}, "average_current_a"),
    ],
)
def test_violations(loads, kwargs, field):
    inputs = make(loads, **kwargs)
    assert field in {v.field for v in validate(inputs)}
    with pytest.raises(DomainError):
        compute(inputs)


def test_violation_marks_the_owning_row_and_quotes_the_value():
    inputs = make(
        [{"peak": 1.0, "duty": 0.5, "row": 0}, {"peak": 1.0, "duty": 1.3, "row": 1}],
        supply_v=[5.0, 5.0],
    )
    (violation,) = validate(inputs)
    assert violation.field == "duty_cycle"
    assert violation.rows.tolist() == [False, True]
    assert "1.3" in violation.message


def test_mismatched_load_lengths_are_a_violation_not_a_crash():
    inputs = dataclasses.replace(make([{"peak": 1.0, "duty": 0.5}]), count=np.array([1.0, 1.0]))
    assert [v.field for v in validate(inputs)] == ["loads"]


# --- properties ---

currents = st.floats(min_value=1e-6, max_value=100.0)
duties = st.floats(min_value=0.0, max_value=1.0)


@settings(max_examples=60, deadline=None, derandomize=True)
@given(v=st.floats(min_value=0.1, max_value=1000.0), peak=currents, duty=duties, count=st.integers(1, 50))
def test_duty_power_linear_in_duty(v, peak, duty, count):
    # Average power of a rectangular load is V·I·D: linear in D (definition of the mean).
    def power(d: float) -> float:
        return compute(make([{"peak": peak, "duty": d, "count": count}], supply_v=v)).results["average_power_w"][0]

    full = power(1.0)
    assert power(duty) == pytest.approx(duty * full, rel=1e-12, abs=1e-300)
    assert power(duty / 2) == pytest.approx(power(duty) / 2, rel=1e-12, abs=1e-300)


load_strategy = st.fixed_dictionaries(
    {"peak": currents, "duty": st.floats(min_value=1e-3, max_value=1.0), "count": st.integers(1, 20)}
)


@settings(max_examples=60, deadline=None, derandomize=True)
@given(
    loads=st.lists(load_strategy, min_size=1, max_size=6),
    v=st.floats(min_value=0.1, max_value=1000.0),
    rating=st.floats(min_value=1e-3, max_value=1e3),
    capacity=st.floats(min_value=1e-3, max_value=1e3),
)
def test_no_nan_and_non_negative_for_valid_finite_inputs(loads, v, rating, capacity):
    out = compute(make(loads, supply_v=v, current_max_a=rating, capacity_ah=capacity))
    for name, value in out.results.items():
        assert np.all(np.isfinite(value)), name
        assert np.all(value >= 0.0), name
    r = out.results
    assert r["average_current_a"][0] <= r["peak_current_a"][0] * (1 + 1e-12)
    # Only the dimmed loads share the duty; it is 0 exactly when the always-on loads alone exceed the rating.
    fixed_a = sum(load["peak"] * load["count"] for load in loads if load["duty"] == 1.0)
    assert 0.0 <= r["max_common_duty_cycle"][0] <= 1.0
    assert (r["max_common_duty_cycle"][0] == 0.0) == (fixed_a > rating)
    assert np.all(r["load_average_current_a"] <= r["load_rms_current_a"] * (1 + 1e-12))
