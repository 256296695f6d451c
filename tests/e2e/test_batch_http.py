"""A full-size batch over real HTTP: 100,000 LED-string rows complete and match the single-row endpoint."""

from __future__ import annotations

from typing import Any

import numpy as np

from calcsvc.client import Client

pytest_plugins = ("live_server",)
ROWS = 100_000


def test_hundred_thousand_rows_match_single_requests(live_url: str, seeded: Any) -> None:
    rng = np.random.default_rng(11)
    supply = rng.uniform(8.0, 24.0, ROWS)
    current = rng.uniform(0.004, 0.025, ROWS)
    rows = [
        {"led": "led-red-5mm", "leds_in_series": 3, "supply_v": float(v), "current_a": float(i)}
        for v, i in zip(supply, current, strict=True)
    ]
    with Client(live_url, timeout=120) as client:
        answer = client.batch("led-string", rows)
        assert answer["count"] == answer["ok_count"] == ROWS
        for index in rng.choice(ROWS, 25, replace=False).tolist():
            single = client.led_string(**rows[index])
            assert answer["rows"][index]["row"] == index
            assert answer["rows"][index]["results"] == single["results"]
