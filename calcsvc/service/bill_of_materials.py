"""The bill of materials of a reviewed channel: what to buy and fit, per channel and for the whole design.

Each resistor carries its standard value, series, tolerance, its worst-case dissipation and the smallest standard
power rating that fits it (``calcsvc.core.led_string.minimum_rating_w``, the one rule every resistor rating goes
through). The LED resistor dissipates most at high supply, low forward voltage and the resistor at its low end
(``resistor_power_max_w``); the base resistor at the pin's stress corner, P = I²·R with I the pin's stress current
``drive_current_max_a`` through the resistor at its low end (Joule's law). Both are taken as dissipated
continuously: PWM averages the heat only while the firmware keeps switching, and a pin held on is a normal state.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from calcsvc.core import led_string
from calcsvc.service.envelope import to_json_value


def minimum_rating_w(dissipation_w: float) -> float | None:
    """The smallest standard rating that fits a worst-case dissipation; None when none up to the largest does."""
    rating: float | None = to_json_value(float(led_string.minimum_rating_w(np.array([dissipation_w]))[0]))
    return rating


def _resistor(
    item: str,
    description: str,
    count: int,
    value_ohm: float,
    dissipation_w: float,
    values: Mapping[str, Any],
    tolerance: float,
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
        "rating_min_w": minimum_rating_w(dissipation_w),
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


def bill_of_materials(
    values: Mapping[str, Any], parts: list[dict[str, Any]], stages: Mapping[str, Any], tolerance: float
) -> dict[str, Any]:
    """The parts list of a reviewed channel (``stages`` as the review answers them, ``tolerance`` the resistors'
    tolerance as a fraction); a part given by explicit values has a null ``part_id``."""
    led, switch = stages["led_string"], stages["switch"]
    strings, in_series, channels = int(values["strings"]), int(values["leds_in_series"]), int(values["channels"])
    base_dissipation = switch["drive_current_max_a"] ** 2 * switch["rb_ohm"] * (1.0 - tolerance)
    per_channel = [
        _resistor(
            "led_resistor",
            "series resistor, one per LED string",
            strings,
            led["resistor_ohm"],
            led["resistor_power_max_w"],
            values,
            tolerance,
        ),
        _resistor(
            "base_resistor",
            "base resistor between the driver pin and the switch transistor",
            1,
            switch["rb_ohm"],
            base_dissipation,
            values,
            tolerance,
        ),
        _part("switch_transistor", "low-side switch transistor", 1, "transistor", parts),
        _part("led", f"LEDs, {in_series} in series per string", in_series * strings, "led", parts),
    ]
    whole = [{**entry, "count": entry["count"] * channels} for entry in per_channel]
    whole.append(_part("supply", "supply shared by every channel", 1, "supply", parts))
    if stages["front_stage"] is not None:
        whole.append(_part("front_stage_opamp", "op-amp of the sensor front stage", 1, "opamp", parts))
    return {"channels": channels, "per_channel": per_channel, "whole_design": whole}
