"""The largest ambient at which a reviewed channel still passes every check at every tolerance corner.

With the cold end of the ambient range held at ``ambient_min_c`` (absent: ``ambient_c``), the hot end is
bisected between that and ``SEARCH_MAX_C``: a design passes at a hot end when every check passes at every
corner (``tolerance``). Heat only ever makes this model's checks worse (hotter junctions, lower derated
limits, more LED current as the forward voltage falls), so passing is monotonic in the hot end and the
bisection finds the edge. All rows are bisected at once.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from calcsvc.core.channel import ChannelInputs, ChannelReview
from calcsvc.core.channel_thermal import ambient_range
from calcsvc.core.outcome import BoolArray, FloatArray
from calcsvc.core.tolerance import QUANTITIES, corner_points, evaluate_at

SEARCH_MAX_C = 200.0  # beyond any part's rated junction: a design passing here is reported at this bound
_BISECTIONS = 40  # halves the span to well below a millikelvin


def _passes(inputs: ChannelInputs, nominal: ChannelReview, hot_c: FloatArray) -> BoolArray:
    """Per row: every check passes at every corner with the hot end of the ambient range at ``hot_c``."""
    corners = corner_points(inputs, nominal)
    cold, _ = ambient_range(inputs)
    shape = [1] * len(QUANTITIES)
    shape[QUANTITIES.index("ambient")] = 2
    ambient = np.stack([np.minimum(cold, hot_c), hot_c], axis=1).reshape(-1, *shape)
    ok = np.ones(hot_c.shape, dtype=bool)
    for check in evaluate_at(inputs, nominal, dataclasses.replace(corners, ambient_c=ambient)):
        ok &= check.ok.reshape(check.ok.shape[0], -1).all(axis=1)
    return ok


def max_ambient(inputs: ChannelInputs, nominal: ChannelReview) -> FloatArray:
    """Per row, the largest ambient (°C) at which the design passes everywhere from the cold end up to it;
    NaN where it fails already at the cold end; ``SEARCH_MAX_C`` where it passes even there."""
    cold, _ = ambient_range(inputs)
    top = np.full(cold.shape, SEARCH_MAX_C)
    works_cold = _passes(inputs, nominal, cold)
    works_top = _passes(inputs, nominal, top)
    low, high = cold.copy(), top.copy()  # passes at low, fails at high
    for _ in range(_BISECTIONS):
        middle = 0.5 * (low + high)
        ok = _passes(inputs, nominal, middle)
        low = np.where(ok, middle, low)
        high = np.where(ok, high, middle)
    return np.where(works_top, SEARCH_MAX_C, np.where(works_cold, low, np.nan))
