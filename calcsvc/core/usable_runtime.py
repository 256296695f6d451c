"""Usable runtime of a battery-fed channel: how long the design keeps meeting its checks as the pack discharges.

A battery's voltage falls as it delivers charge, and a design can stop meeting its checks long before the pack is
empty (a string of three red LEDs needs about 7.4 V with its regulation headroom and goes dark on a six-cell pack
well before end of discharge). The capacity-only figure, ``capacity_ah / I_avg`` (``runtime_h``), ignores that.

Discharge model (a simplification)
    The terminal voltage falls linearly with delivered charge q, from the top of the supply band (fresh) to
    its bottom (end of discharge) at q = ``capacity_ah``:  V(q) = V_fresh − (V_fresh − V_end)·q/C. Real
    cells are not linear: an alkaline cell falls quickly from about 1.6 V to a long slope around 1.2–1.3 V
    and then drops fast below about 1.1 V (from memory), so a design that stops in the slope gets more charge
    than this model gives it and one that stops near the knee less. The drain is the nominal average current
    throughout (the LED current falls with the voltage in fact, which lengthens the runtime a little).

Stop voltage
    The lowest voltage V_stop in the band at which every check that depends on the supply passes at every
    corner of the other toleranced quantities (``tolerance``: the same evaluation as the worst case), found
    by bisection: those checks that fail as the supply falls (headroom, output swing) fail below one
    threshold. ``usable_runtime_h = (C·(V_fresh − V_stop)/(V_fresh − V_end)) / I_avg``: 0 when the design
    already fails them on a fresh pack, ``runtime_h`` when it meets them down to end of discharge.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from calcsvc.core.channel import ChannelInputs, ChannelReview
from calcsvc.core.channel_stages import supply_band
from calcsvc.core.corners import corner_points, corner_set
from calcsvc.core.outcome import BoolArray, FloatArray
from calcsvc.core.tolerance import evaluate_at

_BISECTIONS = 48  # halves the band to well below a microvolt


@dataclass(frozen=True)
class UsableRuntime:
    """Per row; NaN where no capacity is given (not a battery) or the loads draw no current."""

    stop_v: FloatArray  # the supply voltage below which the design stops meeting its checks
    usable_runtime_h: FloatArray


def _passes(inputs: ChannelInputs, nominal: ChannelReview, supply_v: FloatArray) -> BoolArray:
    """Per row: every supply-dependent check passes at ``supply_v`` for every corner of the other quantities."""
    corners = corner_points(inputs, nominal)
    at = dataclasses.replace(corners, supply_v=supply_v.reshape(-1, *(1,) * len(corners.points)))
    ok = np.ones(supply_v.shape, dtype=bool)
    for check in evaluate_at(inputs, nominal, at):
        if "supply" in corner_set(inputs).depends_on[check.name]:
            ok &= check.ok.reshape(check.ok.shape[0], -1).all(axis=1)
    return ok


def usable_runtime(inputs: ChannelInputs, nominal: ChannelReview) -> UsableRuntime:
    """The stop voltage and usable runtime of every row (model: module docstring)."""
    end, fresh = supply_band(inputs)
    battery = ~np.isnan(inputs.capacity_ah)
    if not battery.any():  # nothing discharges
        return UsableRuntime(np.full(end.shape, np.nan), np.full(end.shape, np.nan))
    works_fresh = _passes(inputs, nominal, fresh)
    works_empty = _passes(inputs, nominal, end)
    low, high = end.copy(), fresh.copy()  # the design fails at low (or low is the end) and passes at high
    for _ in range(_BISECTIONS):
        middle = 0.5 * (low + high)
        ok = _passes(inputs, nominal, middle)
        high = np.where(ok, middle, high)
        low = np.where(ok, low, middle)
    stop = np.where(works_empty, end, np.where(works_fresh, high, fresh))
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(fresh > end, (fresh - stop) / (fresh - end), works_fresh.astype(np.float64))
    runtime = nominal.supply.results["runtime_h"]
    return UsableRuntime(np.where(battery, stop, np.nan), np.where(battery, runtime * share, np.nan))
