"""The worst-case corners of a reviewed channel: the quantities each switch kind's tolerance analysis varies, their
two settings, the quantities each check depends on, and the values at every corner (model: ``tolerance``).

An NPN channel varies the supply, the LEDs' forward voltage, the LED and base resistors, the transistor's gain and
the ambient; a MOSFET channel the same but with its gate resistor for the base resistor and its on-resistance,
from none to Rds_max (``channel_mosfet``), for the gain. Each kind has six quantities of two settings, 64 corners.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from calcsvc.core import channel_mosfet, channel_thermal
from calcsvc.core.channel import ChannelInputs, ChannelReview
from calcsvc.core.channel_stages import resistor_tolerance, supply_band
from calcsvc.core.outcome import FloatArray

QUANTITIES = ("supply", "vf", "led_resistor", "base_resistor", "hfe", "ambient")
SETTINGS: dict[str, tuple[str, str]] = {
    "supply": ("low", "high"),
    "vf": ("min", "max"),
    "led_resistor": ("low", "high"),
    "base_resistor": ("low", "high"),
    "hfe": ("min", "max"),
    "ambient": ("cold", "hot"),
}
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


@dataclass(frozen=True)
class CornerSet:
    """One switch kind's corners: its quantities (in axis order), their settings (low end first), the quantities
    each check depends on and the settings held at their worst beyond them."""

    quantities: tuple[str, ...]
    settings: dict[str, tuple[str, str]]
    depends_on: dict[str, tuple[str, ...]]
    held: dict[str, dict[str, str]]

    @cached_property
    def corners(self) -> tuple[dict[str, str], ...]:
        """Every corner, in C order over ``axes``."""
        combos = itertools.product(*(self.settings[q] for q in self.quantities))
        return tuple(dict(zip(self.quantities, combo, strict=True)) for combo in combos)

    @property
    def axes(self) -> tuple[int, ...]:
        return tuple(len(self.settings[q]) for q in self.quantities)


BIPOLAR = CornerSet(QUANTITIES, SETTINGS, DEPENDS_ON, HELD)
CORNERS = BIPOLAR.corners
# Checks only an NPN has, or whose quantities differ for a MOSFET (its gate resistor and on-resistance).
_OWN_TO_NPN = ("saturation", "vce_sat_guarantee", "driver_current", "collector_current_rating", "voltage_rating",
             "power_rating", "off_state", "transistor_junction_temperature", "transistor_derated_power")  # fmt: skip

_MOSFET_QUANTITIES = ("supply", "vf", "led_resistor", "gate_resistor", "on_resistance", "ambient")
_CURRENT = (*_LED, "on_resistance")  # the MOSFET's drop lowers every string's current
_SHARED = {name: depends for name, depends in DEPENDS_ON.items() if name not in _OWN_TO_NPN}
MOSFET = CornerSet(
    quantities=_MOSFET_QUANTITIES,
    settings={**{q: SETTINGS[q] for q in _MOSFET_QUANTITIES if q in SETTINGS}, "gate_resistor": ("low", "high"),
              "on_resistance": ("none", "max")},
    depends_on={
        **{name: (_CURRENT if depends == _LED else depends) for name, depends in _SHARED.items()},
        "transistor_junction_temperature": (*_CURRENT, "gate_resistor"),
        "transistor_derated_power": (*_CURRENT, "gate_resistor"),
        "gate_reaches_stated_drive": (),  # at the pin's rated (lowest) high level already
        "edges_within_wanted_time": ("gate_resistor",),
        "pin_peak_current": ("gate_resistor",),
        "drain_current_rating": _CURRENT,
        "drain_voltage_rating": ("supply",),
        "shortest_pulse_covers_edges": ("gate_resistor",),  # the gate's edges slow with a larger resistor
    },
    held={"pin_peak_current": {"pin_high": "at its supply"}},
)  # fmt: skip


def corner_set(inputs: ChannelInputs) -> CornerSet:
    """The corners of the rows' switch kind (one kind per call: ``channel_mosfet.all_mosfet``)."""
    return MOSFET if channel_mosfet.all_mosfet(inputs) else BIPOLAR


def hfe_max(inputs: ChannelInputs) -> FloatArray:
    """The highest gain considered: as far above hfe_typ as hfe_min is below it."""
    return inputs.hfe_typ + (inputs.hfe_typ - inputs.hfe_min)


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
    drive_resistor_ohm: FloatArray  # the base resistor (NPN) or the gate resistor (MOSFET)
    switch_value: FloatArray  # the gain (NPN) or the on-resistance in ohms (MOSFET)
    ambient_c: FloatArray

    def row(self, x: np.ndarray) -> np.ndarray:
        """A per-row array ``(n,)`` as ``(n, 1, …)``, to broadcast against the points."""
        return x.reshape(-1, *(1,) * len(self.points))


def corner_points(inputs: ChannelInputs, nominal: ChannelReview) -> Point:
    """Each quantity's two settings on an axis of its own (``CornerSet.axes``), every string alike."""
    i = inputs
    tol = resistor_tolerance(i)
    kind = corner_set(i)

    def settings(quantity: str, low: FloatArray, high: FloatArray) -> FloatArray:
        shape = [1] * len(kind.quantities)
        shape[kind.quantities.index(quantity)] = 2
        return np.stack([low, high], axis=1).reshape(-1, *shape)

    r_led = nominal.led_string.results["resistor_ohm"]
    if kind is MOSFET:
        r_drive = nominal.switch.results["rg_ohm"]
        rds = channel_mosfet.rds_max_of(i, nominal.switch)
        switch_value = settings("on_resistance", np.zeros_like(rds), rds)
    else:
        r_drive = nominal.switch.results["rb_ohm"]
        switch_value = settings("hfe", i.hfe_min, hfe_max(i))
    return Point(
        points=kind.axes,
        supply_v=settings("supply", *supply_band(i)),
        string_vf_v=settings("vf", i.leds_in_series * i.vf_min_v, i.leds_in_series * i.vf_max_v)[..., None],
        led_resistor_ohm=settings("led_resistor", r_led * (1.0 - tol), r_led * (1.0 + tol))[..., None],
        drive_resistor_ohm=settings(kind.quantities[3], r_drive * (1.0 - tol), r_drive * (1.0 + tol)),
        switch_value=switch_value,
        ambient_c=settings("ambient", *channel_thermal.ambient_range(i)),
    )
