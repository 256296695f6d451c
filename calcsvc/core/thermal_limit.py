"""The largest ambient at which a reviewed channel still passes every check at every tolerance corner.

With the cold end of the ambient range held at ``ambient_min_c`` (absent: ``ambient_c``), the hot end is
searched between that and ``SEARCH_MAX_C``: a design passes at a hot end when every check passes at every
corner (``tolerance``) at it and at every ambient below it down to the cold end. Each round judges a grid of
ambients in one evaluation (the corners' ambient axis holds the whole grid) and narrows to the step where
passing ends. Heat only ever makes this model's checks worse (hotter junctions, lower derated limits, more
LED current as the forward voltage falls), so passing is monotonic in the hot end. All rows are searched at
once.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from calcsvc.core.channel import ChannelInputs, ChannelReview
from calcsvc.core.channel_thermal import ambient_range
from calcsvc.core.corners import corner_points, corner_set
from calcsvc.core.outcome import BoolArray, FloatArray
from calcsvc.core.tolerance import evaluate_at

SEARCH_MAX_C = 200.0  # beyond any part's rated junction: a design passing here is reported at this bound
GRID = 41  # ambients judged at once per round
ROUNDS = 5  # each round narrows the edge to one grid step: 200 K / 40⁵ ≈ 2 µK


def _passing(inputs: ChannelInputs, nominal: ChannelReview, ambient_c: FloatArray) -> BoolArray:
    """Per row and per ambient of ``ambient_c`` (n, k): every check passes at every other corner there."""
    corners = corner_points(inputs, nominal)
    quantities = corner_set(inputs).quantities
    axis = quantities.index("ambient")
    points = tuple(ambient_c.shape[1] if j == axis else size for j, size in enumerate(corners.points))
    shape = [1] * len(quantities)
    shape[axis] = ambient_c.shape[1]
    at = dataclasses.replace(corners, points=points, ambient_c=ambient_c.reshape(-1, *shape))
    ok = np.ones(ambient_c.shape, dtype=bool)
    others = tuple(j + 1 for j in range(len(quantities)) if j != axis)
    for check in evaluate_at(inputs, nominal, at):
        ok &= np.broadcast_to(check.ok, (ambient_c.shape[0], *points)).all(axis=others)
    return ok


def max_ambient(inputs: ChannelInputs, nominal: ChannelReview) -> FloatArray:
    """Per row, the largest ambient (°C) at which the design passes everywhere from the cold end up to it;
    NaN where it fails already at the cold end; ``SEARCH_MAX_C`` where it passes even there."""
    cold, _ = ambient_range(inputs)
    low, high = cold.copy(), np.full(cold.shape, SEARCH_MAX_C)
    steps = np.linspace(0.0, 1.0, GRID)
    works_cold = np.ones(cold.shape, dtype=bool)
    works_top = np.ones(cold.shape, dtype=bool)
    for round_ in range(ROUNDS):
        grid = low[:, None] + (high - low)[:, None] * steps  # grid[:, 0] passes (or is the cold end)
        ok = np.logical_and.accumulate(_passing(inputs, nominal, grid), axis=1)
        if round_ == 0:
            works_cold, works_top = ok[:, 0], ok[:, -1]
        last = np.maximum(np.count_nonzero(ok, axis=1) - 1, 0)
        rows = np.arange(cold.shape[0])
        low, high = grid[rows, last], grid[rows, np.minimum(last + 1, GRID - 1)]
    return np.where(works_top, SEARCH_MAX_C, np.where(works_cold, low, np.nan))
