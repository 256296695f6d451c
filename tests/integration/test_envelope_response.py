"""The envelope is written without a second marshmallow pass: it must already be what the published response
schema would dump, for every calculation (numbers, flags and a sweep)."""

from __future__ import annotations

from typing import Any

import pytest
from flask.testing import FlaskClient

from calcsvc.core.registry import CALCULATIONS
from calcsvc.web.calc_schemas import response_schema

BODIES = {
    "led-string": {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "leds_in_series": 3, "current_a": "20 mA"},
    "bjt-switch": {"transistor": "npn-small-signal", "driver": "driver-mcu-3v3", "collector_current_a": 0.04},
    "closed-loop-bandwidth": {"gain": 10, "gbw_hz": 1e6, "sweep_start_hz": 10, "sweep_stop_hz": 1e6, "sweep_points": 4},
    "slew-limit": {"slew_rate_v_per_s": "0.5 V/us", "frequency_hz": "20 kHz", "amplitude_v": 5},
    "opamp-windows": {"opamp": "opamp-general-1mhz", "gain": 20, "supply_v": 12, "reference_v": 6, "amplitude_v": 2},
    "opamp-dc-error": {
        "opamp": "opamp-general-1mhz",
        "gain": 20,
        "rf_ohm": "100 kohm",
        "adc_bits": 12,
        "adc_full_scale_v": 10,
    },
    "opamp-noise": {"opamp": "opamp-general-1mhz", "gain": 20, "rf_ohm": "100 kohm", "ambient_c": 45},
    "opamp-stability": {"opamp": "opamp-general-1mhz", "gain": 1, "load_capacitance_f": "100 nF"},
    "mosfet-switch": {
        "transistor": "nmos-logic-small",
        "driver": "driver-mcu-3v3",
        "drain_current_a": "700 mA",
        "supply_max_v": "12.6 V",
        "pwm_frequency_hz": "2 kHz",
        "pwm_resolution_bits": 4,
    },
}


@pytest.mark.parametrize("name", sorted(CALCULATIONS))
def test_the_envelope_is_what_the_response_schema_dumps(client: FlaskClient, seeded: Any, name: str) -> None:
    calc = CALCULATIONS[name]
    for answer in (
        client.post(f"/v1/calc/{name}", json=BODIES[name]),
        client.get(f"/v1/calc/{name}", query_string=BODIES[name]),
    ):
        assert answer.status_code == 200, answer.get_json()
        envelope = answer.get_json()
        assert response_schema(calc.name, calc.results)().dump(envelope) == envelope
