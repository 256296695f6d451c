"""Tolerance analysis of a reviewed LED channel: worst case over tolerance corners.

The resistors are chosen once, at nominal values, by ``channel.review``; a built channel then has actual
values within the tolerances, and every check is re-evaluated with the chosen resistors held fixed:

    string current  I  = max(Vs − ΣVf(Tj) − Vce_sat, 0) / R_led  (dark below its drop; Tj: channel_thermal)
    collector       Ic = Σ over strings of I                     (the switch saturated)
    base current    Ib = (V_drive − Vbe_sat) / Rb − Vbe_sat/Rbe  (Rbe: the pull-down, where given, nominal)
    saturation      Ic/Ib < hfe                                  (the actual gain, not hfe_min)
    pin current     (V_dd − Vbe_hot) / Rb                        (the pin's stress corner, ``bjt_drive``)
    transistor      P  = (Vce_sat·Ic + Vbe_sat·Ib)·D;  supply: channels·Ic peak, channels·Ic·D average

and the LED-stage rules per string: I ≤ if_max, derated at the ambient (``led_current_rating``),
Vs − ΣVf − Vce_sat ≥ 10 % of Vs (``headroom``), 2·I²·R_led within the largest standard rating
(``resistor_rating``); the front stage's ``output_swing`` with Vs as its rail span, Vs against the op-amp's
supply range (``opamp_supply_min`` at the low supply, ``opamp_supply_max`` at the high one), and the
single-supply windows' upper ends (``input_common_mode_high``, ``output_swing_high``) below the rail Vs; the
thermal checks of ``channel_thermal``. Checks that depend on no toleranced value keep their nominal result.
``corners.CornerSet.depends_on`` lists what each check depends on, per switch kind.

Toleranced quantities
    supply within its band (``channel_stages.supply_band``: a battery from end of discharge to fresh, else
    ±supply_tolerance); LED forward voltage within [vf_min_v, vf_max_v]; both resistors
    ±resistor_tolerance (NaN: the series' default); transistor gain between hfe_min and
    hfe_max = hfe_typ + (hfe_typ − hfe_min), the same spread above typical as below (datasheets rarely give
    a maximum); the ambient between ``ambient_min_c`` and ``ambient_max_c`` (``channel_thermal``), where each
    string's current is its coupled electro-thermal point, its forward voltage falling as it warms. Drive and
    saturation voltages are taken as the worst-case constants given.
    A MOSFET switch (``channel_mosfet``, ``mosfet_corners``) has no gain: its on-resistance varies instead, from
    none to Rds_max, and the strings see strings × Rds in their return (with the strings alike, exactly the common
    drop Id·Rds; a Monte Carlo build's strings differ a little, and each then sees strings × Rds times its own
    current, a second-order approximation of the shared drop); its gate resistor stands for the base resistor.

Worst case
    Every check's margin is monotonic in each toleranced quantity, so its extreme over the tolerance box
    lies at one of the 64 corners (supply × Vf × LED resistor × base resistor × hfe × ambient, each at either
    end),
    with every string at the same corner. All rows are evaluated in one pass with each quantity's two
    settings on an axis of its own, so broadcasting computes each check only at the corners of the
    quantities it depends on (``saturation`` at all 64, ``driver_current`` at 2). Per check the corner of
    least margin is reported by ``worst_case`` (ties: the first corner in order, low/min before high/max),
    with the settings of the quantities that check depends on.

The Monte Carlo yield over the same evaluation is in calcsvc.core.monte_carlo.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable

import numpy as np

from calcsvc.core import bjt_drive, channel_thermal, led_string, load_current, mosfet_corners, opamp_windows, slew
from calcsvc.core.channel import ChannelInputs, ChannelReview
from calcsvc.core.channel_front import windows_inputs
from calcsvc.core.channel_stages import has_front_stage, slew_inputs
from calcsvc.core.channel_thermal import CheckArrays
from calcsvc.core.corners import MOSFET, Point, corner_set
from calcsvc.core.outcome import Check, FloatArray, take

# ---- evaluation with the chosen resistors held fixed -----------------------------------------------------


def by_row(x: np.ndarray) -> np.ndarray:
    """``(n, …)`` as ``(n, k)``: every point of a row on one axis (also when there are no rows)."""
    return x.reshape(x.shape[0], math.prod(x.shape[1:]))


def _per_string(x: np.ndarray, reduce: Callable[..., np.ndarray]) -> np.ndarray:
    """Reduce over the strings (the last axis); a single evaluated string needs no reduction."""
    return x[..., 0] if x.shape[-1] == 1 else reduce(x, axis=-1)


def evaluate_at(inputs: ChannelInputs, nominal: ChannelReview, at: Point) -> list[Check]:
    """Every check of ``nominal`` at the given points, in the review's order. A check's arrays broadcast
    against ``(n, *at.points)`` and have length 1 on the axes of points it does not vary over."""
    i = inputs
    row = at.row
    kind = corner_set(i)
    mosfet = kind is MOSFET
    # A MOSFET's on-resistance is in every string's return: with the strings alike each sees strings × Rds.
    switch_ohm = (row(i.strings)[..., None] * at.switch_value[..., None]) if mosfet else 0.0
    point = channel_thermal.led_point(
        i,
        lambda x: row(x)[..., None],
        at.supply_v[..., None],
        at.string_vf_v,
        at.led_resistor_ohm,
        at.ambient_c[..., None],
        switch_ohm,
    )
    current = point.current_a
    # Each of the s evaluated strings stands for strings/s real ones.
    ic = row(i.strings / at.string_vf_v.shape[-1]) * _per_string(current, np.sum)
    if mosfet:
        v_r = at.supply_v[..., None] - point.string_vf_v - (ic * at.switch_value)[..., None]
        switch, power = mosfet_corners.checks(i, nominal.switch, at, ic)
    else:
        v_r = at.supply_v[..., None] - point.string_vf_v - row(i.vce_sat_v)[..., None]
        switch, power = _bipolar(i, at, ic)
    duty = row(i.duty_cycle)
    channel_average, _ = load_current.rectangular_load(ic, duty)
    supply_average = row(i.channels) * channel_average
    supply_peak = row(i.channels) * ic

    worst_current = _per_string(current, np.max)
    headroom = _per_string(v_r, np.min)
    headroom_limit = led_string.HEADROOM_FRACTION * at.supply_v
    resistor_power = _per_string(current**2 * at.led_resistor_ohm, np.max)
    resistor_need = led_string.DERATING_FACTOR * resistor_power
    max_rating = led_string.POWER_RATINGS_W[-1]
    if_max = channel_thermal.led_current_limit(i, row, at.ambient_c)
    supply_rating = row(i.current_max_a)
    varying: dict[str, CheckArrays] = {
        "led_current_rating": (worst_current, if_max, worst_current <= if_max),
        "headroom": (headroom, headroom_limit, headroom >= headroom_limit),
        "resistor_rating": (resistor_need, max_rating, resistor_need <= max_rating),
        **switch,
        "supply_average_current": (supply_average, supply_rating, ~(supply_average > supply_rating)),
        "supply_peak_current": (supply_peak, supply_rating, ~(supply_peak > supply_rating)),
        **_rail_checks(inputs, nominal, at.supply_v),
        **channel_thermal.checks(
            i,
            row,
            at.ambient_c,
            np.maximum(
                _per_string(channel_thermal.hottest_led(point), np.max),
                _per_string(
                    channel_thermal.hottest_inside_c(
                        i,
                        lambda x: row(x)[..., None],
                        at.supply_v[..., None],
                        at.led_resistor_ohm,
                        at.ambient_c[..., None],
                        switch_ohm,
                    ),
                    np.max,
                ),
            ),
            _per_string(point.heating_at_max_c, np.max),
            resistor_power,
            row(channel_thermal.resistor_rating(nominal.led_string)),
            power,
        ),
    }
    checks = []
    for c in nominal.checks:
        value, limit, ok = varying[c.name] if kind.depends_on[c.name] else (row(c.value), row(c.limit), row(c.ok))
        value, limit, ok = np.broadcast_arrays(np.asarray(value, dtype=np.float64), limit, ok)
        checks.append(Check(c.name, ok, value, limit, c.sense, c.detail))
    return checks


def _bipolar(i: ChannelInputs, at: Point, ic: np.ndarray) -> tuple[dict[str, CheckArrays], np.ndarray]:
    """An NPN switch's checks at the points (model: module docstring), and its average dissipation there."""
    row = at.row
    i_rbe = np.where(np.isnan(i.rbe_ohm), 0.0, i.vbe_sat_v / i.rbe_ohm)
    ib = row(i.drive_high_v - i.vbe_sat_v) / at.drive_resistor_ohm - row(i_rbe)
    high = bjt_drive.pin_high(i.drive_high_v, i.drive_supply_v)
    pin = bjt_drive.pin_stress_current(row(high), row(i.vbe_sat_v), row(i.base_junctions), at.drive_resistor_ohm)
    off_base = bjt_drive.off_base_voltage(
        row(i.drive_low_v), row(i.source_current_max_a), at.drive_resistor_ohm, row(i.rbe_ohm)
    )
    beta = ic / ib
    duty = row(i.duty_cycle)
    power = (row(i.vce_sat_v) * ic + row(i.vbe_sat_v) * ib) * duty + channel_thermal.switching_loss(
        i, at.supply_v, ic, row
    )
    rating = {
        "source": row(i.source_current_max_a),
        "ic_max": row(i.ic_max_a),
        "power_max": row(i.power_max_w),
        "vce_sat_beta": row(i.vce_sat_forced_beta),
        "voltage": row(bjt_drive.voltage_limit(i.vceo_max_v)),
        "turn_on": row(bjt_drive.turn_on_hot(i.base_junctions)),
    }
    return {
        "saturation": (beta, at.switch_value, beta < at.switch_value),
        "vce_sat_guarantee": (beta, rating["vce_sat_beta"], beta <= rating["vce_sat_beta"]),
        "driver_current": (pin, rating["source"], ~(pin > rating["source"])),
        "collector_current_rating": (ic, rating["ic_max"], ic <= rating["ic_max"]),
        "voltage_rating": (at.supply_v, rating["voltage"], ~(at.supply_v > rating["voltage"])),
        "off_state": (off_base, rating["turn_on"], off_base <= rating["turn_on"]),
        "power_rating": (power, rating["power_max"], power <= rating["power_max"]),
    }, power


RAIL_CHECKS = ("output_swing", "opamp_supply_min", "opamp_supply_max", "input_common_mode_high", "output_swing_high")
"""The front stage's checks that depend on its rails, the channel's supply."""


def _rail_checks(
    inputs: ChannelInputs, nominal: ChannelReview, supply_v: FloatArray
) -> dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """The front stage's ``RAIL_CHECKS`` with ``supply_v`` (n, …) as its rail span (slew and windows
    calculations), each as (value, limit, ok) in the shape of ``supply_v``."""
    levels = by_row(supply_v)
    front = has_front_stage(inputs)
    k = levels.shape[1]
    at_levels: list[Check] = []
    if front.any():
        each = np.repeat(np.arange(front.sum()), k)
        rails = levels[front].ravel()
        within = take(inputs, front)
        stage = take(slew_inputs(within, inputs.supply_v[front]), each)
        # Both validated at nominal. At a low corner the rails may leave no room for the headroom, or a fixed
        # reference may sit above the rail: the design fails its checks there, it is not refused.
        at_levels += slew.compute(dataclasses.replace(stage, supply_v=rails), validated=True).checks
        windows = take(windows_inputs(within, inputs.supply_v[front]), each)
        at_levels += opamp_windows.compute(dataclasses.replace(windows, supply_v=rails), validated=True).checks
    found = {}
    for name in RAIL_CHECKS:
        value = np.broadcast_to(nominal.check(name).value[:, None], levels.shape).copy()
        limit = np.full(levels.shape, np.nan)
        ok = np.ones(levels.shape, dtype=bool)
        if at_levels:
            check = next(c for c in at_levels if c.name == name)
            value[front] = check.value.reshape(-1, k)
            limit[front] = check.limit.reshape(-1, k)
            ok[front] = check.ok.reshape(-1, k)
        found[name] = (value.reshape(supply_v.shape), limit.reshape(supply_v.shape), ok.reshape(supply_v.shape))
    return found
