"""The supply budget called directly: loads described by duty cycle, by on time and period, or refused."""

from __future__ import annotations

import pytest

from calcsvc.data.database import Database
from calcsvc.service.duty import run_duty
from calcsvc.service.errors import InvalidInput, PhysicallyImpossible


def test_on_time_and_period_give_the_duty_cycle(database: Database) -> None:
    body = {"supply_v": 12, "loads": [{"peak_current_a": 0.1, "on_time_s": 0.001, "period_s": 0.004}]}
    answer = run_duty(database, body)
    assert answer["results"]["loads"][0]["duty_cycle"] == 0.25
    assert answer["results"]["average_current_a"] == pytest.approx(0.025)  # 100 mA x 1/4 (arithmetic)
    assert answer["inputs"]["loads"][0] == {
        "name": "",
        "count": 1,
        "fixed": False,
        "peak_current_a": 0.1,
        "duty_cycle": 0.25,
    }


def test_a_load_marked_fixed_keeps_its_duty_in_the_common_duty(database: Database) -> None:
    # 1 A supply: LEDs 2 A peak dimmed; a controller 0.5 A peak at 50 % marked fixed draws 0.25 A on
    # average, leaving 0.75 A for the LEDs: D = 0.75 / 2 = 0.375 (direct summation).
    loads = [{"name": "LEDs", "peak_current_a": 2, "duty_cycle": 0.3},
             {"name": "controller", "peak_current_a": 0.5, "duty_cycle": 0.5, "fixed": True}]  # fmt: skip
    answer = run_duty(database, {"supply_v": 12, "current_max_a": 1, "loads": loads})
    assert answer["results"]["max_common_duty_cycle"] == pytest.approx(0.375)
    assert answer["inputs"]["loads"][1]["fixed"] is True


def test_an_on_time_beyond_the_period_names_the_load(database: Database) -> None:
    body = {"supply_v": 12, "loads": [{"peak_current_a": 0.1, "duty_cycle": 0.5}, {"peak_current_a": 0.1,
            "on_time_s": 2, "period_s": 1}]}  # fmt: skip
    with pytest.raises(PhysicallyImpossible) as refused:
        run_duty(database, body)
    assert set(refused.value.errors or {}) == {"loads.1.on_time_s"}


def test_the_supply_voltage_comes_from_the_body_or_a_supply_part(database: Database) -> None:
    loads = [{"peak_current_a": 0.06, "duty_cycle": 0.5, "count": 6}]
    with pytest.raises(InvalidInput) as refused:
        run_duty(database, {"loads": loads})
    assert set(refused.value.errors or {}) == {"supply_v"}
    answer = run_duty(database, {"supply": "supply-battery-9v-6aa", "loads": loads})
    assert answer["inputs"]["supply_v"] == 9.0 and answer["parts"][0]["part_id"] == "supply-battery-9v-6aa"
