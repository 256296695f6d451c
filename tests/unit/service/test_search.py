"""The searches in the service layer, without a server or a database: in-memory parts through the core."""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

import numpy as np
import pytest

from calcsvc.core import led_string, worst_case
from calcsvc.core.channel_spec import CHANNEL_INPUTS
from calcsvc.core.outcome import DomainError
from calcsvc.data.store import PartView
from calcsvc.service.calculate import complete
from calcsvc.service.demo import demo_si
from calcsvc.service.review import channel_inputs
from calcsvc.service.search.channel import search_channel
from calcsvc.service.search.common import IMPOSSIBLE, PartFilter, choose
from calcsvc.service.search.ranking import Ranking, first_in_order
from calcsvc.service.search.role import search_role

STAMP = datetime(2026, 1, 1, tzinfo=UTC)
LED_ROLE = next(role for role in led_string.SPEC.roles if role.name == "led")


def part(part_id: str, kind: str, status: str = "approved", **parameters: Any) -> PartView:
    return PartView(part_id, kind, "test part", parameters, status, 1, STAMP, "bench", "bench")


def led(part_id: str, vf_typ_v: float, if_max_a: float = 0.03, status: str = "approved") -> PartView:
    return part(
        part_id, "led", status, vf_typ_v=vf_typ_v, vf_min_v=vf_typ_v - 0.2, vf_max_v=vf_typ_v + 0.4, if_max_a=if_max_a
    )


STRING = {"supply_v": 12.0, "supply_tolerance": 0.05, "leds_in_series": 3, "strings": 2, "current_a": 0.02}


def test_first_in_order_is_a_full_sort_cut_short() -> None:
    rng = np.random.default_rng(3)
    keys = [rng.integers(0, 3, 500), rng.integers(0, 5, 500).astype(float), np.arange(500)]
    expected = np.lexsort(list(reversed(keys)))[:17]
    assert first_in_order(np.arange(500), keys, 17).tolist() == expected.tolist()


def test_filter_and_role_rules() -> None:
    parts = [led("led-b", 2.0), led("led-a", 3.0), led("led-draft", 2.0, status="draft")]
    chosen = PartFilter(where={"vf_typ_v": (None, 2.5)})
    kept, excluded = choose(parts, chosen, [LED_ROLE])
    assert [p.part_id for p in kept] == ["led-b"] and excluded == []
    npn = next(role for role in CHANNEL_INPUTS.roles if role.name == "transistor")
    pnp = part("pnp-1", "bjt", polarity="pnp")
    kept, excluded = choose([pnp], PartFilter(), [npn])
    assert kept == [] and excluded[0]["part_id"] == "pnp-1" and "npn" in excluded[0]["reason"]


def test_role_search_ranks_passing_failing_then_impossible() -> None:
    parts = [led("led-red", 2.0), led("led-dim", 2.0, if_max_a=0.021), led("led-uv", 4.2)]
    found = search_role(led_string.SPEC, STRING, LED_ROLE, parts, ranking=Ranking(limit=10))
    entries = [found.entry(int(row)) for row in found.rows]
    assert [e["part_id"] for e in entries] == ["led-red", "led-dim", "led-uv"]
    assert entries[0]["ok"] and not entries[1]["ok"] and "led_current_rating" in entries[1]["failing"]
    # Three LEDs of 4.2 V need more than the 12 V supply: refused by the core, with its reason.
    assert entries[2]["failing"] == [IMPOSSIBLE] and "supply_v" in entries[2]["problem"]
    assert entries[0]["results"]["resistor_ohm"] == 300.0


def channel_values() -> dict[str, Any]:
    """The demo channel from numbers (the seed parts' values), without its parts or Monte Carlo settings."""
    roles = {role.name for role in CHANNEL_INPUTS.roles}
    values = {k: v for k, v in demo_si().items() if k not in roles and k not in ("samples", "seed")}
    values.update(
        supply_v=12.0, supply_tolerance=0.05, current_max_a=2.0, drive_high_v=2.9, drive_low_v=0.4,
        source_current_max_a=0.008, hfe_min=100.0, hfe_typ=200.0, vbe_sat_v=0.85, vce_sat_v=0.2, ic_max_a=0.2,
        power_max_w=0.625, gbw_hz=1e6, open_loop_gain=2e5, slew_rate_v_per_s=5e5, output_headroom_v=1.5,
    )  # fmt: skip
    return values


def test_channel_search_reviews_every_combination() -> None:
    leds = [led("led-red", 2.0), led("led-uv", 4.2)]
    found = search_channel(channel_values(), {"led": leds}, samples=200, seed=1)
    assert len(found.rows) == 2 and found.accepted.tolist() == [True, False]
    first, second = (found.entry(int(row)) for row in found.rows)
    assert first["parts"][0]["part_id"] == "led-red" and first["verdict"] == "pass"
    assert first["yield"] is not None and first["yield"]["samples"] == 200
    assert second["failing"] == [IMPOSSIBLE] and second["yield"] is None


@pytest.mark.parametrize("model", ["one_reel", "independent"])
def test_channel_search_yield_runs_the_requested_forward_voltage_model(model: str) -> None:
    found = search_channel({**channel_values(), "vf_model": model}, {"led": [led("led-red", 2.0)]}, 200, 1)
    assert found.entry(int(found.rows[0]))["yield"]["vf_model"] == model


def test_channel_search_refuses_what_no_candidate_can_fix() -> None:
    # A non-inverting gain below 1 is the request's own mistake, whichever LED is chosen.
    with pytest.raises(DomainError) as refused:
        search_channel({**channel_values(), "gain": 0.5}, {"led": [led("led-red", 2.0)]})
    assert [v.field for v in refused.value.violations] == ["gain"]


# A bipolar and a logic-level MOSFET switch, each with its seed part's values, for one search over both kinds.
NPN = {"polarity": "npn", "hfe_min": 100.0, "hfe_typ": 200.0, "vbe_sat_v": 0.85, "vce_sat_v": 0.2, "ic_max_a": 0.2,
       "power_max_w": 0.625}  # fmt: skip
NMOS = {"channel": "n", "vds_max_v": 30.0, "id_max_a": 3.0, "vgs_1_v": 2.5, "rds_on_1_ohm": 0.1, "vgs_2_v": 4.5,
        "rds_on_2_ohm": 0.06, "vgs_th_max_v": 1.5, "qg_total_c": 3e-9, "power_max_w": 0.8, "tj_max_c": 150.0,
        "rth_ja_k_per_w": 150.0}  # fmt: skip


def test_channel_search_ranks_bipolar_and_mosfet_switches_together() -> None:
    values = {k: v for k, v in channel_values().items() if k not in NPN}
    switches = [part("npn-1", "bjt", **NPN), part("nmos-1", "mosfet", **NMOS)]
    found = search_channel(values, {"transistor": switches, "led": [led("led-red", 2.0)]}, ranking=Ranking(limit=5))
    assert sorted(p.kinds for p in found.passes) == [("bjt", "led"), ("mosfet", "led")]
    entries = {e["parts"][0]["part_id"]: e for e in (found.entry(int(row)) for row in found.rows)}
    assert set(entries) == {"npn-1", "nmos-1"}
    # Each combination as its own single review judges it: the core's worst case on that part's values alone.
    for part_id, parameters in (("npn-1", NPN), ("nmos-1", NMOS)):
        own = {k: v for k, v in parameters.items() if k not in ("polarity", "channel")}
        led_values = {"vf_typ_v": 2.0, "vf_min_v": 1.8, "vf_max_v": 2.4, "if_max_a": 0.03}
        single = worst_case.worst_case(channel_inputs(complete(CHANNEL_INPUTS, {**values, **own, **led_values})))
        margins = {
            w.name: float(w.margin()[0])
            for w, c in zip(single.checks, single.nominal.checks, strict=True)
            if not np.isnan(c.limit[0])  # a check applies where its limit is known
        }
        entry = entries[part_id]
        assert entry["margin"] == pytest.approx(min(margins.values()))
        assert entry["limiting_check"] == min(margins, key=margins.get)
        assert entry["failing"] == [w.name for w in single.checks if not bool(w.check.ok[0])]
    # Each kind's own key numbers: a base resistor for the NPN, a gate resistor for the MOSFET.
    assert "rb_ohm" in entries["npn-1"]["numbers"] and "rg_ohm" not in entries["npn-1"]["numbers"]
    assert "rg_ohm" in entries["nmos-1"]["numbers"] and "rb_ohm" not in entries["nmos-1"]["numbers"]
    # One ranking over both: passing first, then by least margin.
    ranked = [found.entry(int(row)) for row in found.rows]
    order = [(e["verdict"] != "pass", -e["margin"]) for e in ranked]
    assert order == sorted(order)
