"""Heat in the bjt-switch calculation (``switch_heat``) against thermal Ohm's law worked by hand (Sedra & Smith,
*Microelectronic Circuits*, the power-transistor section on thermal resistance; from memory), and the design's
results unchanged by it."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calcsvc.core import bjt_switch
from calcsvc.core.outcome import Outcome

# 150 mA from 3.3 V logic at forced beta 10 (the module's hand example): P = 0.2 V × 150 mA + 0.75 V × 15.94 mA.
BASE: dict[str, Any] = {
    **{s.name: math.nan if s.default is None else s.default for s in bjt_switch.SPEC.inputs},
    "hfe_min": 100.0,
    "vbe_sat_v": 0.75,
    "vce_sat_v": 0.2,
    "ic_max_a": 0.5,
    "power_max_w": 0.5,
    "collector_current_a": 0.15,
    "drive_high_v": 3.3,
    "forced_beta": 10.0,
}


def inputs(**overrides: Any) -> bjt_switch.BjtSwitchInputs:
    values = {**BASE, **overrides}
    n = max((len(v) for v in values.values() if isinstance(v, list)), default=1)
    columns = {
        name: np.broadcast_to(np.asarray(v, dtype=str if name == "e_series" else np.float64), (n,)).copy()
        for name, v in values.items()
    }
    return bjt_switch.SPEC.make_inputs(columns)


def check(out: Outcome, name: str) -> Any:
    return next(c for c in out.checks if c.name == name)


def test_a_darlington_at_55_c_by_hand() -> None:
    # Rated 1.0 W at 25 °C without a heat sink, Tj,max 150 °C: Rθja = (150 − 25)/1.0 = 125 K/W. The 2 × 1.1 V
    # saturated pair carries 300 mA: P ≈ 1.1 × 0.3 + 1.7 × Ib. At 55 °C: Tj = 55 + P × 125 and the derated limit
    # (150 − 55)/125 = 0.76 W.
    out = bjt_switch.compute(
        inputs(
            vce_sat_v=1.1, vbe_sat_v=1.7, base_junctions=2.0, hfe_min=1500.0, forced_beta=250.0,
            vce_sat_forced_beta=250.0, collector_current_a=0.3, ic_max_a=0.8, power_max_w=1.0, ambient_c=55.0,
        )
    )  # fmt: skip
    r = out.results
    assert r["transistor_rth_k_per_w"][0] == pytest.approx(125.0)
    assert r["derated_power_limit_w"][0] == pytest.approx(0.76)
    power = r["transistor_power_w"][0]
    assert power == pytest.approx(1.1 * 0.3 + 1.7 * r["base_current_a"][0])
    assert r["junction_c"][0] == pytest.approx(55.0 + power * 125.0)
    junction = check(out, "transistor_junction_temperature")
    assert junction.limit[0] == 130.0 and junction.ok[0]  # 20 K below Tj,max (common practice)
    derated = check(out, "transistor_derated_power")
    assert (derated.value[0], derated.limit[0]) == (pytest.approx(power), pytest.approx(0.76))


def test_at_25_c_in_free_air_the_design_is_unchanged_and_the_limit_is_the_rating() -> None:
    # Rθja from the rating: (150 − 25)/0.5 = 250 K/W; Tj = 25 + 0.0420 W × 250 K/W = 35.5 °C.
    plain = inputs()
    out = bjt_switch.compute(plain)
    design = bjt_switch.design(plain)
    for name, value in design.results.items():
        np.testing.assert_array_equal(out.results[name], value)
    assert [c.name for c in out.checks][: len(design.checks)] == [c.name for c in design.checks]
    assert out.results["derated_power_limit_w"][0] == pytest.approx(0.5)
    assert out.results["junction_c"][0] == pytest.approx(25.0 + out.results["transistor_power_w"][0] * 250.0)
    assert out.results["junction_c"][0] == pytest.approx(35.5, abs=0.05)
    assert out.cautions == []  # nothing is hot at 25 °C


def test_a_heat_sink_adds_to_junction_to_case_and_lifts_the_free_air_cap() -> None:
    # Rθ = 5 K/W junction to case + 20 K/W sink = 25 K/W; at 50 °C the limit is (150 − 50)/25 = 4 W, above the
    # 0.5 W free-air rating, which no longer caps it.
    out = bjt_switch.compute(inputs(rth_jc_k_per_w=5.0, heatsink_k_per_w=20.0, ambient_c=50.0))
    assert out.results["transistor_rth_k_per_w"][0] == pytest.approx(25.0)
    assert out.results["derated_power_limit_w"][0] == pytest.approx(4.0)


def test_a_switch_passing_at_25_c_fails_its_junction_check_in_hot_air() -> None:
    # 0.9 V × 0.3 A + 0.75 V × 30 mA = 0.29 W in a 250 K/W package: 73 K above the air; the junction limit is
    # 130 °C, so the air may reach about 57 °C.
    out = bjt_switch.compute(inputs(collector_current_a=0.3, ic_max_a=1.0, vce_sat_v=0.9, ambient_c=[25.0, 60.0]))
    junction = check(out, "transistor_junction_temperature")
    assert junction.ok.tolist() == [True, False]
    assert any("60 °C" in n.message for n in out.cautions)


def test_a_heat_sink_without_junction_to_case_is_refused() -> None:
    found = bjt_switch.validate(inputs(heatsink_k_per_w=10.0))
    assert [v.field for v in found] == ["rth_jc_k_per_w"]


@settings(max_examples=60, deadline=None, derandomize=True, database=None)
@given(
    current=st.floats(0.01, 0.5),
    rth=st.one_of(st.just(math.nan), st.floats(20.0, 400.0)),
    sink=st.one_of(st.just(math.nan), st.floats(1.0, 50.0)),
    ambients=st.lists(st.floats(-40.0, 140.0), min_size=2, max_size=6),
)
def test_property_a_warmer_ambient_never_cools_the_junction_nor_raises_the_limit(
    current: float, rth: float, sink: float, ambients: list[float]
) -> None:
    ambients = sorted(ambients)
    out = bjt_switch.compute(
        inputs(
            collector_current_a=current, rth_ja_k_per_w=rth, rth_jc_k_per_w=5.0, heatsink_k_per_w=sink,
            ambient_c=ambients,
        )
    )  # fmt: skip
    assert np.all(np.diff(out.results["junction_c"]) >= 0)
    assert np.all(np.diff(out.results["derated_power_limit_w"]) <= 0)
