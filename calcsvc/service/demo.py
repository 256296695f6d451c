"""The greenhouse grow-light demo channel, defined once (``greenhouse-channel.json`` beside this module, which
``examples/`` links to): a 12 V adapter, a 3.3 V microcontroller pin, a small NPN, two strings of three red LEDs
at 20 mA, six channels at half duty, and the sensor preamp on a general-purpose op-amp. The review page's form,
the benchmarks, the examples and the tests all start from it."""

from __future__ import annotations

import functools
import json
from pathlib import Path
from typing import Any

from calcsvc.core.channel_spec import CHANNEL_INPUTS
from calcsvc.units import parse_quantity

DEMO_FILE = Path(__file__).with_name("greenhouse-channel.json")


@functools.cache
def _demo() -> dict[str, Any]:
    loaded: dict[str, Any] = json.loads(DEMO_FILE.read_text())
    return loaded


def demo_channel() -> dict[str, Any]:
    """The demo's ``POST /v1/review/channel`` body: part ids, and values as numbers or strings with units."""
    return dict(_demo())


def demo_si() -> dict[str, Any]:
    """The demo's body with every value in SI (strings with units parsed), part references as given."""
    units = {spec.name: spec.unit for spec in CHANNEL_INPUTS.inputs if not spec.choices}
    return {
        name: parse_quantity(value, units[name]) if name in units and isinstance(value, str) else value
        for name, value in _demo().items()
    }
