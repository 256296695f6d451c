"""Whether a view or hook is a coroutine is found once per function, not on every layer of every request."""

from __future__ import annotations

from typing import Any

import pytest
from flask.testing import FlaskClient

from calcsvc.web import app as app_module

BODY = {
    "supply_v": 12.0, "vf_typ_v": 2.1, "vf_min_v": 1.9, "vf_max_v": 2.5, "if_max_a": 0.03,
    "leds_in_series": 3, "strings": 2, "current_a": 0.02,
}  # fmt: skip


def test_a_repeated_calculation_asks_no_function_again(client: FlaskClient, monkeypatch: pytest.MonkeyPatch) -> None:
    asked: list[Any] = []
    real = app_module.iscoroutinefunction

    def counted(func: Any) -> bool:
        asked.append(func)
        return real(func)

    monkeypatch.setattr(app_module, "iscoroutinefunction", counted)
    first = client.post("/v1/calc/led-string", json=BODY)
    asked_first = len(asked)
    second = client.post("/v1/calc/led-string", json=BODY)
    assert first.status_code == second.status_code == 200
    assert first.get_data() == second.get_data()
    assert asked_first > 0 and len(asked) == asked_first
