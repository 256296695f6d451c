"""The bill of materials of a reviewed channel: what to buy and fit, per channel and for the whole design.

Each resistor carries its standard value, series, tolerance, its worst-case dissipation and the smallest standard
power rating that fits it (``calcsvc.core.led_string.minimum_rating_w``, the one rule every resistor rating goes
through). The LED resistor dissipates most at high supply, low forward voltage and the resistor at its low end
(``resistor_power_max_w``); the base resistor at the pin's stress corner, P = I²·R with I the pin's stress current
``drive_current_max_a`` through the resistor at its low end (Joule's law). Both are taken as dissipated
continuously: PWM averages the heat only while the firmware keeps switching, and a pin held on is a normal state.
The LED resistor's dissipation is the larger of its worst tolerance corner and the warm string's at the review's
ambient (a warm LED's lower forward voltage leaves more across the resistor). A MOSFET channel lists its gate
resistor (half of each edge's gate-charge energy, Qg·V·f, plus the pull-down's steady current) and its gate
pull-down (as given, else the recommended value; V²/R with the pin held high) instead of a base resistor. A rating holds
only up to the resistor's rated-to temperature: above it the need is divided by the derated fraction at the hottest
ambient the review covers (``calcsvc.core.thermal.resistor_derating``, IEC 60115-1's curve, from memory), so the
rating listed is the one that still fits on the hottest day.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from calcsvc.core import led_string, thermal
from calcsvc.service.envelope import to_json_value


def minimum_rating_w(dissipation_w: float, derated_fraction: float = 1.0) -> float | None:
    """The smallest standard rating that fits a worst-case dissipation where only ``derated_fraction`` of a rating
    may be used; None when none up to the largest does (or the ambient allows no power at all)."""
    need_w = dissipation_w / derated_fraction if derated_fraction > 0 else np.inf
    rating: float | None = to_json_value(float(led_string.minimum_rating_w(np.array([need_w]))[0]))
    return rating


def derated_fraction(values: Mapping[str, Any]) -> float:
    """The fraction of a resistor's rating usable at the hottest ambient the review covers."""
    hottest = values.get("ambient_max_c")
    if hottest is None or hottest != hottest:  # absent or NaN: the review's single ambient
        hottest = values["ambient_c"]
    return float(thermal.resistor_derating(hottest, values["resistor_rated_to_c"], values["resistor_zero_power_c"]))


def _resistor(
    item: str,
    description: str,
    count: int,
    value_ohm: float,
    dissipation_w: float,
    values: Mapping[str, Any],
    tolerance: float,
    fraction: float,
) -> dict[str, Any]:
    return {
        "item": item,
        "kind": "resistor",
        "description": description,
        "count": count,
        "value_ohm": value_ohm,
        "series": values["e_series"],
        "tolerance": tolerance,
        "dissipation_max_w": to_json_value(dissipation_w),
        "rating_min_w": minimum_rating_w(dissipation_w, fraction),
    }


def _part(item: str, description: str, count: int, role: str, parts: list[dict[str, Any]]) -> dict[str, Any]:
    used = next((p for p in parts if p["role"] == role), None)
    return {
        "item": item,
        "kind": role,
        "description": description,
        "count": count,
        "part_id": None if used is None else used["part_id"],
        "revision": None if used is None else used["revision"],
    }


def _switch_items(
    values: Mapping[str, Any], parts: list[dict[str, Any]], switch: Mapping[str, Any], tolerance: float, fraction: float
) -> list[dict[str, Any]]:
    """The switch and the resistors around it: an NPN's base resistor, or a MOSFET's gate resistor and pull-down."""
    if "rg_ohm" not in switch:
        base_dissipation = switch["drive_current_max_a"] ** 2 * switch["rb_ohm"] * (1.0 - tolerance)
        return [
            _resistor(
                "base_resistor",
                "base resistor between the driver pin and the switch transistor",
                1,
                switch["rb_ohm"],
                base_dissipation,
                values,
                tolerance,
                fraction,
            ),
            _part("switch_transistor", "low-side switch transistor", 1, "transistor", parts),
        ]
    rg = switch["rg_ohm"]
    pulldown = values.get("gate_pulldown_ohm", switch["gate_pulldown_recommended_ohm"])
    pin_v = values.get("drive_supply_v", values["drive_high_v"])
    frequency = values.get("pwm_frequency_hz") or 0.0
    # The gate resistor takes half of each edge's gate-charge energy Q·V (charging a capacitance through a
    # resistor loses as much as it stores), so Qg·V·f over a period, plus the pull-down's steady current while on.
    steady_a = pin_v / (rg * (1.0 - tolerance) + pulldown)
    gate_dissipation = values["qg_total_c"] * pin_v * frequency + steady_a**2 * rg
    return [
        _resistor(
            "gate_resistor",
            "gate resistor between the driver pin and the MOSFET's gate",
            1,
            rg,
            gate_dissipation,
            values,
            tolerance,
            fraction,
        ),
        _resistor(
            "gate_pulldown",
            "gate pull-down from gate to source, holding the MOSFET off while the pin floats",
            1,
            pulldown,
            pin_v**2 / pulldown,  # the pin held high: Joule's law
            values,
            tolerance,
            fraction,
        ),
        _part("switch_transistor", "low-side switch MOSFET (N-channel)", 1, "transistor", parts),
    ]


def bill_of_materials(
    values: Mapping[str, Any], parts: list[dict[str, Any]], stages: Mapping[str, Any], tolerance: float
) -> dict[str, Any]:
    """The parts list of a reviewed channel (``stages`` as the review answers them, ``tolerance`` the resistors'
    tolerance as a fraction); a part given by explicit values has a null ``part_id``."""
    led, switch = stages["led_string"], stages["switch"]
    strings, in_series, channels = int(values["strings"]), int(values["leds_in_series"]), int(values["channels"])
    warm = (stages.get("thermal") or {}).get("resistor_power_hot_w")
    led_dissipation = max(led["resistor_power_max_w"], warm if warm is not None else 0.0)
    fraction = derated_fraction(values)
    per_channel = [
        _resistor(
            "led_resistor",
            "series resistor, one per LED string",
            strings,
            led["resistor_ohm"],
            led_dissipation,
            values,
            tolerance,
            fraction,
        ),
        *_switch_items(values, parts, switch, tolerance, fraction),
        _part("led", f"LEDs, {in_series} in series per string", in_series * strings, "led", parts),
    ]
    whole = [{**entry, "count": entry["count"] * channels} for entry in per_channel]
    whole.append(_part("supply", "supply shared by every channel", 1, "supply", parts))
    if stages["front_stage"] is not None:
        whole.append(_part("front_stage_opamp", "op-amp of the sensor front stage", 1, "opamp", parts))
    return {"channels": channels, "per_channel": per_channel, "whole_design": whole}
