"""Flicker against the boundary of IEEE Std 1789-2015's recommended practices (thresholds from memory) and the
camera's banding alias."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calcsvc.core import flicker

# IEEE Std 1789-2015, recommended practices (from memory): low risk Mod% ≤ 0.025·f below 90 Hz, ≤ 0.08·f from
# 90 to 1250 Hz, any above; no observable effect Mod% ≤ 0.01·f below 90 Hz, ≤ 0.0333·f up to 3000 Hz, any above.
LOW_RISK = [(50.0, 1.25), (90.0, 7.2), (500.0, 40.0), (1000.0, 80.0), (1250.0, 100.0), (2000.0, 100.0)]
NO_EFFECT = [(50.0, 0.5), (100.0, 3.33), (1000.0, 33.3), (3000.0, 99.9), (3001.0, 100.0)]


@pytest.mark.parametrize(("frequency", "percent"), LOW_RISK)
def test_low_risk_boundary(frequency: float, percent: float) -> None:
    assert float(flicker.low_risk_limit(frequency)) == pytest.approx(percent / 100.0)


@pytest.mark.parametrize(("frequency", "percent"), NO_EFFECT)
def test_no_effect_boundary(frequency: float, percent: float) -> None:
    assert float(flicker.no_effect_limit(frequency)) == pytest.approx(percent / 100.0)


def test_full_depth_pwm_is_low_risk_only_from_1250_hz() -> None:
    # A PWM switching the light fully off modulates 100 %: below 1250 Hz it leaves the low-risk region.
    f = np.array([500.0, 1000.0, 1249.0, 1250.0, 2000.0])
    assert (1.0 <= flicker.low_risk_limit(f)).tolist() == [False, False, False, True, True]


# The same boundary read the other way: the lowest low-risk frequency for a modulation (percent → Hz).
LOWEST_FREQUENCY = [(0.0, 0.0), (1.25, 50.0), (2.25, 90.0), (5.0, 90.0), (7.2, 90.0), (40.0, 500.0), (100.0, 1250.0)]


@pytest.mark.parametrize(("percent", "frequency"), LOWEST_FREQUENCY)
def test_lowest_low_risk_frequency_of_a_modulation(percent: float, frequency: float) -> None:
    assert float(flicker.low_risk_frequency(percent / 100.0)) == pytest.approx(frequency)


@settings(max_examples=300, deadline=None, derandomize=True)
@given(st.floats(0.0, 1.0), st.floats(1.0, 10_000.0))
def test_the_lowest_frequency_is_the_boundary_of_the_region(depth: float, frequency: float) -> None:
    # A frequency at or above the lowest one is low risk for this depth, and one below it is not.
    lowest = float(flicker.low_risk_frequency(depth))
    assert (frequency >= lowest) == (depth <= float(flicker.low_risk_limit(frequency)) * (1 + 1e-12))


def test_camera_alias_and_crawling_bands() -> None:
    # 2010 Hz against 30 frames/s: the nearest multiple is 67·30 = 2010, the bands stand still (alias 0).
    assert float(flicker.camera_alias(2010.0, 30.0)) == 0.0
    # 2011 Hz: 1 Hz off a multiple, the bands crawl through the image about once a second.
    assert float(flicker.camera_alias(2011.0, 30.0)) == pytest.approx(1.0)
    assert bool(flicker.bands_crawl(2011.0, 30.0))
    # 2025 Hz: half the frame rate off a multiple, the bands alternate from frame to frame instead.
    assert float(flicker.camera_alias(2025.0, 30.0)) == pytest.approx(15.0)
    assert not bool(flicker.bands_crawl(2025.0, 30.0))
    assert not bool(flicker.bands_crawl(2010.0, 30.0))
    assert not bool(flicker.bands_crawl(2011.0, np.nan))
