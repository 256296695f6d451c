"""The channel review in the service layer, without a server: one validation and one nominal review per request,
the same answer as the endpoint, and refusals named by field."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest
from flask import Flask

from calcsvc.core import (
    bjt_switch,
    channel,
    closed_loop,
    duty_power,
    led_string,
    monte_carlo,
    slew,
    tolerance,
)
from calcsvc.core.channel_front import FRONT_STAGE_FIELDS
from calcsvc.core.outcome import DomainError
from calcsvc.service import review
from calcsvc.service.demo import demo_si
from calcsvc.service.errors import InvalidInput
from calcsvc.web.review_schemas import REVIEW_REQUEST


def _counting(monkeypatch: pytest.MonkeyPatch, calls: dict[str, int], name: str) -> None:
    """Count calls of ``channel.<name>`` however they are reached (tolerance and monte_carlo import it by name)."""
    original: Callable[..., Any] = getattr(channel, name)

    def counted(*args: Any, **kwargs: Any) -> Any:
        calls[name] += 1
        return original(*args, **kwargs)

    for module in (channel, tolerance, monte_carlo):
        if hasattr(module, name):
            monkeypatch.setattr(module, name, counted)


@pytest.fixture
def calls(monkeypatch: pytest.MonkeyPatch) -> dict[str, int]:
    found = {"validate": 0, "review": 0}
    for name in found:
        _counting(monkeypatch, found, name)
    return found


def test_review_validates_once(seeded: Flask, calls: dict[str, int]) -> None:
    # Before: the worst case and the Monte Carlo run each validated and reviewed again (4 validations, 2 reviews).
    document = review.run_review(seeded.extensions["calcsvc.db"], {**demo_si(), "samples": 500})
    assert document["verdict"] == "pass" and document["yield"]["samples"] == 500
    assert calls == {"validate": 1, "review": 1}


def test_each_stage_validates_once_per_review(seeded: Flask, monkeypatch: pytest.MonkeyPatch) -> None:
    """channel.validate checks every stage at the very inputs the review then computes, so no stage's compute
    validates again (before: the LED stage 10 times, the op-amp stages 6 to 8 times per review). The output
    swing is evaluated at other supplies too (the worst-case corners, the sampled values) without validating
    again: a supply too low for the output's headroom there fails the design's checks, it does not refuse it."""
    stages = (led_string, bjt_switch, duty_power, closed_loop, slew)
    counts = dict.fromkeys((stage.NAME for stage in stages), 0)
    for stage in stages:

        def counted(inputs: Any, original: Callable[..., Any] = stage.validate, name: str = stage.NAME) -> Any:
            counts[name] += 1
            return original(inputs)

        monkeypatch.setattr(stage, "validate", counted)
    review.run_review(seeded.extensions["calcsvc.db"], {**demo_si(), "samples": 500})
    assert counts == dict.fromkeys(counts, 1)


def test_histogram_validates_once(seeded: Flask, calls: dict[str, int]) -> None:
    # Pushed to 27 mA per string, the base draws more than the pin's 10 mA at its stress corner in most builds.
    body = {**demo_si(), "current_a": 0.027}
    found = review.distribution(seeded.extensions["calcsvc.db"], {**body, "samples": 500})
    assert found.check == "driver_current" and found.values.shape == (500,)
    assert calls == {"validate": 1, "review": 1}


def test_service_review_is_the_endpoints(seeded: Flask) -> None:
    body = {**demo_si(), "samples": 300}
    # The body as the endpoint loads it (integers stay integers, strings with units become SI numbers).
    document = review.run_review(seeded.extensions["calcsvc.db"], REVIEW_REQUEST.load(body))
    answer = seeded.test_client().post("/v1/review/channel", json=body).get_json()
    assert answer == document


def test_demo_is_the_example_and_reads_in_si() -> None:
    demo = demo_si()
    assert demo["gain"] == 20 and demo["amplitude_v"] == 2.0 and demo["seed"] == 1
    assert demo["current_a"] == pytest.approx(0.02) and demo["signal_hz"] == 1000.0


@pytest.mark.parametrize(
    ("given", "field"),
    [
        ({"duty_cycle": 0.5, "on_time_s": 1e-3, "period_s": 2e-3}, "duty_cycle"),
        ({"on_time_s": 1e-3}, "period_s"),
        ({"on_time_s": 3e-3, "period_s": 2e-3}, "on_time_s"),
    ],
)
def test_duty_refusals_name_the_field(given: dict[str, float], field: str) -> None:
    with pytest.raises(InvalidInput) as refused:
        review.duty_of(given)
    assert refused.value.errors is not None and list(refused.value.errors) == [field]


def test_duty_from_on_time_and_period() -> None:
    assert review.duty_of({"on_time_s": 1e-3, "period_s": 4e-3}) == 0.25
    assert review.duty_of({}) == 1.0


def test_impossible_channel_is_refused_by_the_core_naming_the_field(seeded: Flask, calls: dict[str, int]) -> None:
    body = {**demo_si(), "leds_in_series": 6, "samples": 0}  # 6 × 2.0 V leaves nothing of 12 V
    with pytest.raises(DomainError) as refused:
        review.run_review(seeded.extensions["calcsvc.db"], body)
    assert "supply_v" in {v.field for v in refused.value.violations}
    assert calls == {"validate": 1, "review": 0}


def test_a_battery_part_is_reviewed_over_its_discharge_band(seeded: Flask) -> None:
    # The demo channel on the six-cell alkaline pack (9.6 V fresh, 6.0 V at end of discharge, 2 Ah): the three
    # red LEDs keep their 10 % headroom only down to (3 × 2.5 + 0.25) V / 0.9 = 8.61 V (KVL; common practice),
    # so the channel stops meeting its checks well before the pack is empty. Forward voltages are held constant
    # here (no drift with temperature) so the figures are the hand calculation's; the drift follows below.
    database = seeded.extensions["calcsvc.db"]
    warm = review.run_review(database, {**demo_si(), "supply": "supply-battery-9v-6aa", "samples": 0})
    # With the red LEDs drifting -2 mV/K and about 14 K above the air, a fresh pack pushes the worst string
    # current just past the 30 mA rating: the warm LEDs draw more than the cold design says.
    current = next(c for c in warm["checks"] if c["name"] == "led_current_rating")
    assert 0.030 < current["worst_case"]["value"] < 0.031 and not current["ok"]
    body = {**demo_si(), "supply": "supply-battery-9v-6aa", "samples": 0, "vf_tempco_v_per_k": 0.0}
    document = review.run_review(database, body)
    headroom = next(c for c in document["checks"] if c["name"] == "headroom")
    assert headroom["worst_case"]["limit"] == pytest.approx(0.6)  # 10 % of 6.0 V, not of 7.65 V (9 V − 15 %)
    assert "headroom" in document["failing"]
    supply = document["stages"]["supply"]
    # The demo's preamp, powered from the same pack, fails first: its output swings to 6 V + 2 V peak and reaches
    # only 1.4 V below the top rail (the part's output_high_headroom_v), so it clips below 9.4 V.
    assert supply["stop_v"] == pytest.approx(6.0 + 2.0 + 1.4)
    fraction = (9.6 - 9.4) / (9.6 - 6.0)  # the linear discharge model's share of the capacity
    assert supply["usable_runtime_h"] == pytest.approx(fraction * supply["runtime_h"])
    # Without the preamp the LEDs' headroom sets the stop.
    front = {"opamp", "gain", "signal_hz", "amplitude_v", *FRONT_STAGE_FIELDS}
    alone = review.run_review(database, {k: v for k, v in body.items() if k not in front})
    assert alone["stages"]["supply"]["stop_v"] == pytest.approx(7.75 / 0.9)
    assert any("usable_runtime_h" in note for note in document["warnings"])
    # A tolerance given explicitly wins over the part's band: 9 V ± 10 %.
    document = review.run_review(database, {**body, "supply_tolerance": 0.1})
    headroom = next(c for c in document["checks"] if c["name"] == "headroom")
    assert headroom["worst_case"]["limit"] == pytest.approx(0.1 * 8.1)


def test_yield_names_its_forward_voltage_model(seeded: Flask) -> None:
    """LEDs of a build come from one reel unless the request says otherwise; the answer says which model ran."""
    db = seeded.extensions["calcsvc.db"]
    body = {**demo_si(), "samples": 500}
    found = review.run_review(db, REVIEW_REQUEST.load(body))["yield"]
    assert (found["vf_model"], found["vf_bin_width_v"]) == ("one_reel", monte_carlo.DEFAULT_VF_BIN_WIDTH_V)
    assert review.INDEPENDENT_VF_WARNING not in review.run_review(db, REVIEW_REQUEST.load(body))["warnings"]
    mixed = review.run_review(db, REVIEW_REQUEST.load({**body, "vf_model": "independent"}))
    assert (mixed["yield"]["vf_model"], mixed["yield"]["vf_bin_width_v"]) == ("independent", None)
    assert review.INDEPENDENT_VF_WARNING in mixed["warnings"]  # an optimistic yield says so
