"""Single calculations answer byte for byte as recorded: numbers, strings with units, part references (current
and pinned), the query-string forms, and refusals as problem documents. The answers' bytes are the contract a
cached script or spreadsheet reads; a faster path must not change one.

``python tests/integration/test_single_golden.py`` records them again (only when an answer changes on purpose).
"""

from __future__ import annotations

import json
import sys
import tempfile
from pathlib import Path
from typing import Any

from flask.testing import FlaskClient

GOLDEN = Path(__file__).with_name("single_answers.json")
LED = "/v1/calc/led-string"
NUMBERS = {
    "supply_v": 12.0,
    "supply_tolerance": 0.05,
    "vf_typ_v": 2.1,
    "vf_min_v": 1.9,
    "vf_max_v": 2.5,
    "if_max_a": 0.03,
    "leds_in_series": 3,
    "strings": 2,
    "current_a": 0.02,
    "switch_drop_v": 0.2,
}
PARTS = {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "transistor": "npn-small-signal"}
# (method, path, body or query): each answered on a freshly seeded store, in this order.
REQUESTS: list[tuple[str, str, Any]] = [
    ("POST", LED, NUMBERS),
    ("POST", LED, {**PARTS, "leds_in_series": 3, "strings": 2, "current_a": 0.02}),
    ("POST", LED, {**PARTS, "led_revision": 1, "leds_in_series": 3, "current_a": "20 mA", "e_series": "E12"}),
    ("POST", LED, {**NUMBERS, "supply_v": "12 V", "current_a": "15 mA", "vf_typ_v": "2100 mV", "ambient_c": 45}),
    ("POST", LED, {**NUMBERS, "leds_in_series": 6}),  # more drop than supply: refused
    ("POST", LED, {**NUMBERS, "current_a": 0.05}),  # over the LED's rating: computes, fails a check
    ("POST", LED, {**NUMBERS, "current_a": -1}),
    ("POST", LED, {**NUMBERS, "current_a": True}),
    ("POST", LED, {**NUMBERS, "current_a": "20 parsecs"}),
    ("POST", LED, {**NUMBERS, "current_a": None}),
    ("POST", LED, {**NUMBERS, "curent_a": 0.02}),
    ("POST", LED, {key: value for key, value in NUMBERS.items() if key != "vf_typ_v"}),
    ("POST", LED, {**PARTS, "led": "led-not-stored", "current_a": 0.02}),
    ("POST", LED, {**PARTS, "led_revision": 9, "current_a": 0.02}),
    ("POST", LED, {"led_revision": 1, **NUMBERS}),
    ("POST", LED, {**PARTS, "led": "npn-small-signal", "current_a": 0.02}),
    ("POST", LED, [NUMBERS]),
    ("GET", LED, {**PARTS, "leds_in_series": "3", "current_a": "20 mA"}),
    ("GET", LED, {**PARTS, "leds_in_series": "3", "current_a": "20 mA", "pick": "resistor_ohm"}),
    ("GET", LED, {**PARTS, "leds_in_series": "3", "current_a": "0,02", "decimal": "comma", "format": "csv"}),
    ("GET", LED, {**PARTS, "leds_in_series": "3", "current_a": "50 mA", "pick": "resistor_ohm", "sheet": "true"}),
    (
        "POST",
        "/v1/calc/bjt-switch",
        {"transistor": "npn-small-signal", "driver": "driver-mcu-3v3", "collector_current_a": 0.04},
    ),
    (
        "POST",
        "/v1/calc/closed-loop-bandwidth",
        {"gain": 10, "gbw_hz": 1e6, "sweep_start_hz": 10, "sweep_stop_hz": 1e6, "sweep_points": 4},
    ),
    ("POST", "/v1/calc/slew-limit", {"slew_rate_v_per_s": "0.5 V/us", "frequency_hz": "20 kHz", "amplitude_v": 5}),
    (
        "POST",
        "/v1/calc/opamp-noise",
        {"opamp": "opamp-general-1mhz", "gain": 20, "rf_ohm": "100 kohm", "ambient_c": 45},
    ),
    (
        "POST",
        "/v1/calc/mosfet-switch",
        {
            "transistor": "nmos-logic-small",
            "driver": "driver-mcu-3v3",
            "drain_current_a": "700 mA",
            "supply_max_v": "12.6 V",
        },
    ),
]


def answers(client: FlaskClient) -> list[dict[str, Any]]:
    recorded = []
    for method, path, body in REQUESTS:
        if method == "POST":
            answer = client.post(path, json=body)
        else:
            answer = client.get(path, query_string=body)
        recorded.append(
            {"status": answer.status_code, "type": answer.content_type, "body": answer.get_data(as_text=True)}
        )
    return recorded


def test_single_answers_are_byte_identical_to_the_recorded_ones(client: FlaskClient, seeded: Any) -> None:
    golden = json.loads(GOLDEN.read_text())
    for (method, path, body), want, got in zip(REQUESTS, golden, answers(client), strict=True):
        assert got == want, f"{method} {path} {body}"


if __name__ == "__main__":
    from calcsvc import create_app
    from calcsvc.data.database import upgrade
    from calcsvc.data.seed import load_seed

    url = f"sqlite:///{tempfile.mkdtemp()}/golden.sqlite"
    upgrade(url)
    app = create_app({"DATABASE_URL": url})
    with app.extensions["calcsvc.db"].transaction() as session:
        load_seed(session, Path(__file__).resolve().parents[2] / "seed_parts")
    GOLDEN.write_text(json.dumps(answers(app.test_client()), indent=1, ensure_ascii=False) + "\n")
    sys.exit(0)
