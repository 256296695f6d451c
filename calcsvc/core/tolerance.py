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
``DEPENDS_ON`` lists what each check depends on.

Toleranced quantities
    supply within its band (``channel_stages.supply_band``: a battery from end of discharge to fresh, else
    ±supply_tolerance); LED forward voltage within [vf_min_v, vf_max_v]; both resistors
    ±resistor_tolerance (NaN: the series' default); transistor gain between hfe_min and
    hfe_max = hfe_typ + (hfe_typ − hfe_min), the same spread above typical as below (datasheets rarely give
    a maximum); the ambient between ``ambient_min_c`` and ``ambient_max_c`` (``channel_thermal``), where each
    string's current is its coupled electro-thermal point, its forward voltage falling as it warms. Drive and
    saturation voltages are taken as the worst-case constants given.

Worst case
    Every check's margin is monotonic in each toleranced quantity, so its extreme over the tolerance box
    lies at one of the 64 corners (supply × Vf × LED resistor × base resistor × hfe × ambient, each at either
    end),
    with every string at the same corner. All rows are evaluated in one pass with each quantity's two
    settings on an axis of its own, so broadcasting computes each check only at the corners of the
    quantities it depends on (``saturation`` at all 64, ``driver_current`` at 2). Per check the corner of
    least margin is reported (ties: the first corner in ``CORNERS`` order, low/min before high/max), with
    the settings of the quantities that check depends on.

The Monte Carlo yield over the same evaluation is in calcsvc.core.monte_carlo.
"""

from __future__ import annotations

import dataclasses
import itertools
import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from calcsvc.core import bjt_drive, channel_thermal, led_string, load_current, opamp_windows, slew
from calcsvc.core.channel import ChannelInputs, ChannelReview, failing_names, review
from calcsvc.core.channel_front import windows_inputs
from calcsvc.core.channel_stages import has_front_stage, resistor_tolerance, slew_inputs, supply_band
from calcsvc.core.outcome import (
    BoolArray,
    Check,
    FloatArray,
    row_count,
    take,
)

IntArray = npt.NDArray[np.intp]

QUANTITIES = ("supply", "vf", "led_resistor", "base_resistor", "hfe", "ambient")
SETTINGS: dict[str, tuple[str, str]] = {
    "supply": ("low", "high"),
    "vf": ("min", "max"),
    "led_resistor": ("low", "high"),
    "base_resistor": ("low", "high"),
    "hfe": ("min", "max"),
    "ambient": ("cold", "hot"),
}
CORNERS: tuple[dict[str, str], ...] = tuple(
    dict(zip(QUANTITIES, combo, strict=True)) for combo in itertools.product(*(SETTINGS[q] for q in QUANTITIES))
)
CORNER_AXES = tuple(len(SETTINGS[q]) for q in QUANTITIES)  # CORNERS in C order over these axes

_LED = ("supply", "vf", "led_resistor", "ambient")
DEPENDS_ON: dict[str, tuple[str, ...]] = {
    "led_current_rating": _LED,
    "headroom": _LED,
    "resistor_rating": _LED,
    "saturation": QUANTITIES,
    "vce_sat_guarantee": (*_LED, "base_resistor"),
    "driver_current": ("base_resistor",),
    "collector_current_rating": _LED,
    "voltage_rating": ("supply",),
    "power_rating": (*_LED, "base_resistor"),
    "off_state": ("base_resistor",),
    "supply_average_current": _LED,
    "supply_peak_current": _LED,
    "gain_achievable": (),
    "signal_in_band": (),
    "slew_rate": (),
    "output_swing": ("supply",),
    "opamp_supply_min": ("supply",),
    "opamp_supply_max": ("supply",),
    "output_offset": (),
    "led_junction_temperature": _LED,
    "led_thermal_runaway": _LED,
    "resistor_derated_power": _LED,
    "transistor_junction_temperature": (*_LED, "base_resistor"),
    "transistor_derated_power": (*_LED, "base_resistor"),
    "input_common_mode_low": (),  # the 0 V rail and a fixed reference
    "input_common_mode_high": ("supply",),
    "output_swing_low": (),
    "output_swing_high": ("supply",),
    "output_error": (),
    "noise_bits": (),
    "phase_margin": (),
    "shortest_pulse_covers_edges": (),  # the part's stated times: no toleranced quantity
    "flicker_low_risk": (),
}
"""The toleranced quantities each check depends on; checks depending on none keep their nominal result."""

# Settings held at their worst for a check, beyond the toleranced ones: the pin stress corner (``bjt_drive``).
HELD: dict[str, dict[str, str]] = {
    "driver_current": {"pin_high": "at its supply", "vbe": "hot"},
    "off_state": {"leakage": "hot"},
}


def hfe_max(inputs: ChannelInputs) -> FloatArray:
    """The highest gain considered: as far above hfe_typ as hfe_min is below it."""
    return inputs.hfe_typ + (inputs.hfe_typ - inputs.hfe_min)


# ---- evaluation with the chosen resistors held fixed -----------------------------------------------------


@dataclass(frozen=True)
class Point:
    """Actual values at the points (corners or samples) of each of n rows. ``points`` are the shape of the
    points; every array broadcasts against ``(n, *points)``, a per-string one against ``(n, *points, s)``
    where s is 1 when every string is alike (corners) or the row's number of strings (samples). An axis of
    length 1 is a quantity that does not vary along it, so work is spent only where values differ."""

    points: tuple[int, ...]
    supply_v: FloatArray
    string_vf_v: FloatArray  # sum of the string's forward voltages, per string
    led_resistor_ohm: FloatArray  # per string
    base_resistor_ohm: FloatArray
    hfe: FloatArray
    ambient_c: FloatArray

    def row(self, x: np.ndarray) -> np.ndarray:
        """A per-row array ``(n,)`` as ``(n, 1, …)``, to broadcast against the points."""
        return x.reshape(-1, *(1,) * len(self.points))


def _by_row(x: np.ndarray) -> np.ndarray:
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
    point = channel_thermal.led_point(
        i,
        lambda x: row(x)[..., None],
        at.supply_v[..., None],
        at.string_vf_v,
        at.led_resistor_ohm,
        at.ambient_c[..., None],
    )
    v_r = at.supply_v[..., None] - point.string_vf_v - row(i.vce_sat_v)[..., None]
    current = point.current_a
    # Each of the s evaluated strings stands for strings/s real ones.
    ic = row(i.strings / at.string_vf_v.shape[-1]) * _per_string(current, np.sum)
    i_rbe = np.where(np.isnan(i.rbe_ohm), 0.0, i.vbe_sat_v / i.rbe_ohm)
    ib = row(i.drive_high_v - i.vbe_sat_v) / at.base_resistor_ohm - row(i_rbe)
    high = bjt_drive.pin_high(i.drive_high_v, i.drive_supply_v)
    pin = bjt_drive.pin_stress_current(row(high), row(i.vbe_sat_v), row(i.base_junctions), at.base_resistor_ohm)
    off_base = bjt_drive.off_base_voltage(
        row(i.drive_low_v), row(i.source_current_max_a), at.base_resistor_ohm, row(i.rbe_ohm)
    )
    beta = ic / ib
    duty = row(i.duty_cycle)
    power = (row(i.vce_sat_v) * ic + row(i.vbe_sat_v) * ib) * duty + channel_thermal.switching_loss(
        i, at.supply_v, ic, row
    )
    channel_average, _ = load_current.rectangular_load(ic, duty)
    supply_average = row(i.channels) * channel_average
    supply_peak = row(i.channels) * ic

    worst_current = _per_string(current, np.max)
    headroom = _per_string(v_r, np.min)
    headroom_limit = led_string.HEADROOM_FRACTION * at.supply_v
    resistor_power = _per_string(current**2 * at.led_resistor_ohm, np.max)
    resistor_need = led_string.DERATING_FACTOR * resistor_power
    max_rating = led_string.POWER_RATINGS_W[-1]
    rating = {
        "if_max_a": channel_thermal.led_current_limit(i, row, at.ambient_c),
        "source": row(i.source_current_max_a),
        "ic_max": row(i.ic_max_a),
        "power_max": row(i.power_max_w),
        "supply": row(i.current_max_a),
        "vce_sat_beta": row(i.vce_sat_forced_beta),
        "voltage": row(bjt_drive.voltage_limit(i.vceo_max_v)),
        "turn_on": row(bjt_drive.turn_on_hot(i.base_junctions)),
    }
    varying: dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]] = {  # value, limit, ok
        "led_current_rating": (worst_current, rating["if_max_a"], worst_current <= rating["if_max_a"]),
        "headroom": (headroom, headroom_limit, headroom >= headroom_limit),
        "resistor_rating": (resistor_need, max_rating, resistor_need <= max_rating),
        "saturation": (beta, at.hfe, beta < at.hfe),
        "vce_sat_guarantee": (beta, rating["vce_sat_beta"], beta <= rating["vce_sat_beta"]),
        "driver_current": (pin, rating["source"], ~(pin > rating["source"])),
        "collector_current_rating": (ic, rating["ic_max"], ic <= rating["ic_max"]),
        "voltage_rating": (at.supply_v, rating["voltage"], ~(at.supply_v > rating["voltage"])),
        "off_state": (off_base, rating["turn_on"], off_base <= rating["turn_on"]),
        "power_rating": (power, rating["power_max"], power <= rating["power_max"]),
        "supply_average_current": (supply_average, rating["supply"], ~(supply_average > rating["supply"])),
        "supply_peak_current": (supply_peak, rating["supply"], ~(supply_peak > rating["supply"])),
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
        value, limit, ok = varying[c.name] if DEPENDS_ON[c.name] else (row(c.value), row(c.limit), row(c.ok))
        value, limit, ok = np.broadcast_arrays(np.asarray(value, dtype=np.float64), limit, ok)
        checks.append(Check(c.name, ok, value, limit, c.sense, c.detail))
    return checks


RAIL_CHECKS = ("output_swing", "opamp_supply_min", "opamp_supply_max", "input_common_mode_high", "output_swing_high")
"""The front stage's checks that depend on its rails, the channel's supply."""


def _rail_checks(
    inputs: ChannelInputs, nominal: ChannelReview, supply_v: FloatArray
) -> dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """The front stage's ``RAIL_CHECKS`` with ``supply_v`` (n, …) as its rail span (slew and windows
    calculations), each as (value, limit, ok) in the shape of ``supply_v``."""
    levels = _by_row(supply_v)
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


# ---- worst case ------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class WorstCheck:
    """One check at its worst corner, per row. ``check`` holds the value and limit there; ``check.ok`` is
    True where the check passes at every corner. ``corner_index`` indexes ``CORNERS``."""

    check: Check
    corner_index: IntArray
    depends_on: tuple[str, ...]

    @property
    def name(self) -> str:
        return self.check.name

    def margin(self) -> FloatArray:
        return self.check.margin()

    def corner(self, row: int) -> dict[str, str]:
        """The settings, at the worst corner of ``row``, of the quantities this check depends on."""
        settings = CORNERS[int(self.corner_index[row])]
        return {q: settings[q] for q in self.depends_on} | HELD.get(self.name, {})


@dataclass(frozen=True)
class WorstCase:
    nominal: ChannelReview  # the design whose resistors were chosen and held fixed
    checks: list[WorstCheck]  # in the review's check order
    ok: BoolArray  # every check passes at every corner

    def check(self, name: str) -> WorstCheck:
        return next(c for c in self.checks if c.name == name)

    def failing(self) -> list[list[str]]:
        """Names of the checks failing at some corner, per row."""
        return failing_names([c.check for c in self.checks])


def corner_points(inputs: ChannelInputs, nominal: ChannelReview) -> Point:
    """Each quantity's two settings on an axis of its own (``CORNER_AXES``), every string alike."""
    i = inputs
    tol = resistor_tolerance(i)

    def settings(quantity: str, low: FloatArray, high: FloatArray) -> FloatArray:
        shape = [1] * len(QUANTITIES)
        shape[QUANTITIES.index(quantity)] = 2
        return np.stack([low, high], axis=1).reshape(-1, *shape)

    r_led = nominal.led_string.results["resistor_ohm"]
    r_base = nominal.switch.results["rb_ohm"]
    return Point(
        points=CORNER_AXES,
        supply_v=settings("supply", *supply_band(i)),
        string_vf_v=settings("vf", i.leds_in_series * i.vf_min_v, i.leds_in_series * i.vf_max_v)[..., None],
        led_resistor_ohm=settings("led_resistor", r_led * (1.0 - tol), r_led * (1.0 + tol))[..., None],
        base_resistor_ohm=settings("base_resistor", r_base * (1.0 - tol), r_base * (1.0 + tol)),
        hfe=settings("hfe", i.hfe_min, hfe_max(i)),
        ambient_c=settings("ambient", *channel_thermal.ambient_range(i)),
    )


def _worst(check: Check) -> WorstCheck:
    """Reduce a check over its corner axes to its corner of least margin."""
    flat = Check(check.name, _by_row(check.ok), _by_row(check.value), _by_row(check.limit), check.sense, check.detail)
    margin = flat.margin()
    # 0/0 (value on a zero limit) is on the edge; without a limit rank by the value itself.
    key = np.where(np.isnan(margin), 0.0, margin)
    applies = ~np.isnan(flat.limit)
    if not applies.all():
        key = np.where(applies, key, -flat.value if check.sense == "max" else flat.value)
    # The first least corner in C order over the check's axes is the first in CORNERS order.
    index = np.argmin(key, axis=1)
    pick = index[:, None]
    worst = Check(
        check.name,
        flat.ok.all(axis=1),
        np.take_along_axis(flat.value, pick, axis=1)[:, 0],
        np.take_along_axis(flat.limit, pick, axis=1)[:, 0],
        check.sense,
        check.detail,
    )
    corner = np.ravel_multi_index(np.unravel_index(index, check.value.shape[1:]), CORNER_AXES)
    return WorstCheck(worst, corner, DEPENDS_ON[check.name])


def worst_case(inputs: ChannelInputs, nominal: ChannelReview | None = None) -> WorstCase:
    """Every check at its worst tolerance corner, for every row (model: module docstring).

    ``nominal``: the review of ``inputs`` when the caller has made it already. Without it the inputs are
    reviewed here, which raises DomainError when any row violates ``channel.validate``.
    """
    nominal = review(inputs) if nominal is None else nominal
    checks = [_worst(c) for c in evaluate_at(inputs, nominal, corner_points(inputs, nominal))]
    ok = np.ones(row_count(inputs), dtype=bool)
    for c in checks:
        ok &= c.check.ok
    return WorstCase(nominal=nominal, checks=checks, ok=ok)
