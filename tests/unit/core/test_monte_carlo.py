"""Monte Carlo forward-voltage models: LEDs of a build from one reel (one forward-voltage bin) or independent."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.stats import irwinhall
from test_channel import NO_FRONT_STAGE, make

from calcsvc.core.channel import review
from calcsvc.core.monte_carlo import (
    DEFAULT_VF_BIN_WIDTH_V,
    forward_voltages,
    monte_carlo,
    validate_monte_carlo,
)
from calcsvc.core.worst_case import worst_case

VF_MIN, VF_MAX = 1.8, 2.4
LEDS, STRINGS = 5, 2
# Only the LEDs vary (supply and resistors exact). Five LEDs of 1.8-2.4 V on 13 V with 0.2 V Vce_sat: the
# headroom rule (10 % of 13 V across the resistor) fails once a string drops more than 13 - 1.3 - 0.2 = 11.5 V,
# i.e. above 2.3 V per LED on average; nominal (2.0 V each) passes with 1.5 V to spare.
THRESHOLD_V = 11.5


def marginal(**overrides: float) -> object:
    return make(
        supply_v=13.0,
        supply_tolerance=0.0,
        resistor_tolerance=0.0,
        leds_in_series=float(LEDS),
        strings=float(STRINGS),
        if_max_a=0.05,
        **NO_FRONT_STAGE,
        **overrides,
    )


def test_draws_stay_in_the_range_and_one_reel_shares_a_bin() -> None:
    for model in ("one_reel", "independent"):
        drawn = forward_voltages(np.random.default_rng(1), VF_MIN, VF_MAX, (20_000, STRINGS, LEDS), model)
        assert drawn.shape == (20_000, STRINGS, LEDS)
        assert drawn.min() >= VF_MIN and drawn.max() <= VF_MAX
        # Both reach close to each end of the range.
        assert drawn.min() < VF_MIN + 0.01 and drawn.max() > VF_MAX - 0.01
    reel = forward_voltages(np.random.default_rng(1), VF_MIN, VF_MAX, (20_000, STRINGS, LEDS), "one_reel", 0.1)
    per_build = reel.max(axis=(1, 2)) - reel.min(axis=(1, 2))
    assert per_build.max() <= 0.1 + 1e-12
    # A bin as wide as the range (or wider) is no binning: every LED anywhere in the range.
    wide = forward_voltages(np.random.default_rng(2), VF_MIN, VF_MAX, (5_000, 1, 1), "one_reel", 5.0)
    assert wide.min() >= VF_MIN and wide.max() <= VF_MAX and wide.std() == pytest.approx(0.6 / math.sqrt(12), rel=0.05)


def test_one_reel_spreads_builds_wider_and_yields_no_more_than_independent_draws() -> None:
    shape = (20_000, STRINGS, LEDS)
    reel = forward_voltages(np.random.default_rng(3), VF_MIN, VF_MAX, shape, "one_reel").sum(axis=-1)
    mixed = forward_voltages(np.random.default_rng(3), VF_MIN, VF_MAX, shape, "independent").sum(axis=-1)
    # Independent: σ = √N·0.6/√12 = 0.387 V per string. One reel: the bin moves all N LEDs together,
    # σ ≈ N·(0.6 − 0.1)/√12 = 0.72 V.
    assert mixed.std() == pytest.approx(math.sqrt(LEDS) * 0.6 / math.sqrt(12), rel=0.03)
    assert reel.std() > 1.8 * mixed.std()

    x = marginal()
    assert review(x).ok[0] and "headroom" in worst_case(x).failing()[0]
    one = monte_carlo(x, samples=20_000, seed=4)
    independent = monte_carlo(x, samples=20_000, seed=4, vf_model="independent")
    assert one.most_failing_check == "headroom"
    assert one.fraction < independent.fraction and one.ci_high < independent.ci_low
    assert (one.vf_model, one.vf_bin_width_v) == ("one_reel", DEFAULT_VF_BIN_WIDTH_V)
    assert (independent.vf_model, independent.vf_bin_width_v) == ("independent", None)


def _pass_independent(leds: int, strings: int) -> float:
    """Every string's sum of N independent uniform LEDs at most the threshold: Irwin-Hall distribution."""
    return float(irwinhall(leds).cdf((THRESHOLD_V - leds * VF_MIN) / (VF_MAX - VF_MIN)) ** strings)


def _pass_one_reel(leds: int, strings: int, width: float) -> float:
    """The bin's low edge L uniform on [min, max − w]; each string N·L plus w times an Irwin-Hall(N) variable;
    the strings independent given L. Integrated numerically over L."""
    span = VF_MAX - VF_MIN - width

    def given_edge(low: float) -> float:
        if width == 0.0:
            return float(leds * low <= THRESHOLD_V)
        return float(irwinhall(leds).cdf((THRESHOLD_V - leds * low) / width) ** strings)

    value, _ = integrate.quad(given_edge, VF_MIN, VF_MAX - width, points=[THRESHOLD_V / leds], limit=200)
    return value / span


@pytest.mark.parametrize("width", [0.0, 0.1, 0.3])
def test_yield_matches_an_independent_numerical_solution(width: float) -> None:
    x = marginal()
    one = monte_carlo(x, samples=20_000, seed=5, vf_bin_width_v=width)
    assert one.ci_low <= _pass_one_reel(LEDS, STRINGS, width) <= one.ci_high
    mixed = monte_carlo(x, samples=20_000, seed=5, vf_model="independent")
    assert mixed.ci_low <= _pass_independent(LEDS, STRINGS) <= mixed.ci_high


def test_one_reel_runs_repeat_with_the_seed() -> None:
    x = marginal()
    a, b, c = (monte_carlo(x, 5_000, seed=s) for s in (7, 7, 8))
    assert a.passed == b.passed and a.failures == b.failures
    np.testing.assert_array_equal(a.most_failing_values, b.most_failing_values)
    assert a.passed != c.passed


@pytest.mark.parametrize(
    ("model", "width"), [("mixed", 0.1), ("one_reel", -0.1), ("one_reel", math.nan), ("one_reel", True)]
)
def test_forward_voltage_model_refusals_name_the_field(model: str, width: float) -> None:
    field = "vf_model" if model == "mixed" else "vf_bin_width_v"
    assert [v.field for v in validate_monte_carlo(marginal(), 100, 0, model, width)] == [field]


def test_the_tightest_check_is_the_one_that_came_closest_to_failing() -> None:
    # Only the LEDs vary (1.8-2.2 V each, so every build passes): the headroom, the voltage across the resistor
    # against 10 % of 13 V, tightens as a string's forward voltage grows. Its least margin over the builds is
    # recomputed here from the kept per-build values, (value - limit) / limit at the smallest.
    inputs = marginal(vf_min_v=1.8, vf_max_v=2.2)
    found = monte_carlo(inputs, 2_000, seed=3, vf_model="independent")
    assert found.most_failing_check is None and found.most_failing_values is None
    assert found.tightest_check == min(found.least_margins, key=lambda name: found.least_margins[name])
    assert found.plotted_check == found.tightest_check and found.plotted_values is not None
    asked = monte_carlo(inputs, 2_000, seed=3, vf_model="independent", plot="headroom")
    assert asked.plotted_check == "headroom" and asked.plotted_values is not None and asked.plotted_limits is not None
    independent = float(np.min((asked.plotted_values - asked.plotted_limits) / asked.plotted_limits))
    assert asked.least_margins["headroom"] == pytest.approx(independent)
    assert 0.0 < independent < (13 - 0.2 - 5 * 1.8 - 1.3) / 1.3  # within the range the LEDs allow
    with pytest.raises(ValueError, match="no check named"):
        monte_carlo(inputs, 100, seed=3, plot="not_a_check")
