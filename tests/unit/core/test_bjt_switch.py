"""Tests for the NPN low-side switch base-resistor calculation."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from calcsvc.core import eseries
from calcsvc.core.bjt_switch import BjtSwitchInputs, compute, validate
from calcsvc.core.outcome import DomainError, Outcome
from calcsvc.core.thermal_inputs import AMBIENT_C, TRANSISTOR

# Thermal voltage kT/q at 300 K from the exact SI 2019 values of k and q.
VT_300K = 1.380649e-23 * 300.0 / 1.602176634e-19  # ≈ 25.85 mV

# Hand example: 150 mA load, forced beta 10 (common practice for hard saturation), 3.3 V logic drive,
# Vbe_sat 0.75 V and Vce_sat 0.2 V (from memory, typical small-signal class), hfe_min 100 (from memory).
DEFAULTS: dict[str, Any] = {
    "hfe_min": 100.0,
    "vbe_sat_v": 0.75,
    "vce_sat_v": 0.2,
    "ic_max_a": 0.5,
    "power_max_w": 0.5,
    "collector_current_a": 0.15,
    "drive_high_v": 3.3,
    "drive_low_v": 0.0,
    "forced_beta": 10.0,
    "vce_sat_forced_beta": 10.0,
    "base_junctions": 1.0,
    "vceo_max_v": math.nan,
    "supply_max_v": math.nan,
    "e_series": "E24",
    "resistor_tolerance": math.nan,
    "rbe_ohm": math.nan,
    "driver_current_max_a": math.nan,
    "drive_supply_v": math.nan,
    "duty_cycle": 1.0,
    **{spec.name: math.nan if spec.default is None else spec.default for spec in (AMBIENT_C, *TRANSISTOR)},
    # Switching times of a small-signal part (invented, class-typical); no PWM unless a test gives one.
    "td_s": 4e-8,
    "tr_s": 4e-8,
    "ts_s": 2.5e-7,
    "tf_s": 8e-8,
    "pwm_frequency_hz": math.nan,
    "pwm_resolution_bits": 8.0,
    "modulation_depth": 1.0,
    "camera_frame_rate_hz": math.nan,
}


def make(**overrides: Any) -> BjtSwitchInputs:
    """Inputs from DEFAULTS; each value a scalar (one row) or a list (several rows)."""
    values = {**DEFAULTS, **overrides}
    n = max((len(v) for v in values.values() if isinstance(v, list)), default=1)
    arrays: dict[str, np.ndarray] = {}
    for name, value in values.items():
        dtype = str if name == "e_series" else np.float64
        arrays[name] = np.broadcast_to(np.asarray(value, dtype=dtype), (n,)).copy()
    return BjtSwitchInputs(**arrays)


def checks(out: Outcome) -> dict[str, Any]:
    return {c.name: c for c in out.checks}


def messages(notices: list[Any]) -> str:
    return " | ".join(n.message for n in notices)


# ---- independent numerical model: Ebers–Moll -------------------------------------------------------------


@dataclasses.dataclass(frozen=True)
class EbersMoll:
    """NPN transport model (Ebers & Moll, "Large-signal behavior of junction transistors", Proc. IRE 1954;
    see also Sedra & Smith, "Microelectronic Circuits", 7th ed., the BJT chapter's large-signal model, from
    memory), without series resistances or Early effect."""

    i_s: float
    beta_f: float
    beta_r: float = 1.0  # reverse gain of order 1 (from memory)

    def currents(self, vbe: float, vbc: float) -> tuple[float, float]:
        """(Ic, Ib) for junction voltages vbe, vbc."""
        ef, er = math.expm1(vbe / VT_300K), math.expm1(vbc / VT_300K)
        ic = self.i_s * (ef - er) - self.i_s / self.beta_r * er
        ib = self.i_s / self.beta_f * ef + self.i_s / self.beta_r * er
        return ic, ib


def solve_switch(model: EbersMoll, v_high: float, rb: float, rbe: float, v_cc: float, rc: float) -> dict[str, float]:
    """Solve the circuit V_high–Rb–base (Rbe base to emitter), emitter grounded, Rc from V_cc to collector.

    Nested brentq: for a base voltage, the collector node (Vcc − Vc)/Rc = Ic(Vb, Vb − Vc) has one root
    (the left side falls and Ic rises with Vc); the base node current balance then falls monotonically
    in Vb.
    """

    def collector_voltage(vb: float) -> float:
        def node(vc: float) -> float:
            return (v_cc - vc) / rc - model.currents(vb, vb - vc)[0]

        return brentq(node, min(vb, 0.0) - 1.0, v_cc, xtol=1e-14, rtol=1e-14)

    def base_node(vb: float) -> float:
        vc = collector_voltage(vb)
        return (v_high - vb) / rb - vb / rbe - model.currents(vb, vb - vc)[1]

    vb = brentq(base_node, 0.0, v_high, xtol=1e-14, rtol=1e-14)
    vc = collector_voltage(vb)
    ic, ib = model.currents(vb, vb - vc)
    return {"vbe": vb, "vce": vc, "vbc": vb - vc, "ic": ic, "ib": ib}


def fitted_model(hfe_min: float, vbe: float, ib: float) -> EbersMoll:
    """Is chosen so the forward-active base current is ``ib`` at ``vbe``, with βF = hfe_min."""
    return EbersMoll(i_s=hfe_min * ib / math.expm1(vbe / VT_300K), beta_f=hfe_min)


V_CC = 12.0


def load_resistor(ic: float, vce_sat: float) -> float:
    """Collector load that draws ``ic`` from V_CC with the transistor saturated (Ohm's law)."""
    return (V_CC - vce_sat) / ic


# ---- worked example --------------------------------------------------------------------------------------


def test_hand_example() -> None:
    # By hand: Ib = 150 mA / 10 = 15 mA; Rb = (3.3 − 0.75) V / 15 mA = 170 Ω → E24 (from memory) 160 Ω;
    # drive = 2.55 V / 160 Ω = 15.94 mA; β_actual = 150 / 15.94 = 9.41; margin = 100 / 9.41 = 10.6;
    # P = 0.2 V × 150 mA + 0.75 V × 15.94 mA = 42.0 mW.
    out = compute(make())
    r = out.results
    assert r["base_current_required_a"][0] == pytest.approx(0.015, rel=1e-12)
    assert r["rb_exact_ohm"][0] == pytest.approx(170.0, rel=1e-12)
    assert r["rb_ohm"][0] == 160.0
    assert r["drive_current_a"][0] == pytest.approx(2.55 / 160.0, rel=1e-12)
    assert r["base_current_a"][0] == pytest.approx(2.55 / 160.0, rel=1e-12)
    assert r["forced_beta_actual"][0] == pytest.approx(0.15 * 160.0 / 2.55, rel=1e-12)
    assert r["saturation_margin"][0] == pytest.approx(100.0 * 2.55 / (0.15 * 160.0), rel=1e-12)
    assert r["transistor_power_w"][0] == pytest.approx(0.2 * 0.15 + 0.75 * 2.55 / 160.0, rel=1e-12)
    assert all(bool(c.ok[0]) for c in out.checks)
    assert "No base pull-down" in messages(out.warnings) and len(out.warnings) == 1 and out.cautions == []


def test_exact_value_with_float_noise_keeps_the_standard_value() -> None:
    # Vh chosen so Rb_exact = 160 Ω up to float noise (2.4 V / 15 mA): must give 160 Ω, not 150 Ω.
    out = compute(make(drive_high_v=[0.75 + 2.4, 0.75 + 2.4 * (1 - 1e-12)]))
    assert out.results["rb_ohm"].tolist() == [160.0, 160.0]


def test_base_emitter_pulldown_steals_drive() -> None:
    # By hand with Rbe = 1 kΩ: it takes 0.75 V / 1 kΩ = 0.75 mA; Rb_exact = 2.55 V / 15.75 mA = 161.9 Ω
    # → E24 160 Ω; base current = 2.55/160 − 0.75/1000 = 15.19 mA (Kirchhoff's current law at the base).
    out = compute(make(rbe_ohm=1000.0))
    r = out.results
    assert r["rb_exact_ohm"][0] == pytest.approx(2.55 / 0.01575, rel=1e-12)
    assert r["rb_ohm"][0] == 160.0
    assert r["drive_current_a"][0] == pytest.approx(2.55 / 160.0, rel=1e-12)
    assert r["base_current_a"][0] == pytest.approx(2.55 / 160.0 - 0.75 / 1000.0, rel=1e-12)
    assert r["forced_beta_actual"][0] == pytest.approx(0.15 / (2.55 / 160.0 - 0.00075), rel=1e-12)
    assert r["forced_beta_actual"][0] <= 10.0


# ---- Ebers–Moll cross-checks -----------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("overrides", "rbe"),
    [
        ({}, math.inf),
        ({"rbe_ohm": 1000.0}, 1000.0),
        ({"collector_current_a": 0.02, "drive_high_v": 5.0, "e_series": "E12"}, math.inf),
        ({"collector_current_a": 0.5, "hfe_min": 50.0, "vbe_sat_v": 0.9, "e_series": "E6"}, math.inf),
        ({"collector_current_a": 0.1, "forced_beta": 20.0, "rbe_ohm": 4700.0, "e_series": "E96"}, 4700.0),
    ],
)
def test_chosen_rb_saturates_the_ebers_moll_transistor(overrides: dict[str, Any], rbe: float) -> None:
    # Independent numerical solution with scipy of the Ebers–Moll transport model (Ebers & Moll 1954;
    # Sedra & Smith, 7th ed., from memory), βF = hfe_min (worst case), βR = 1 (from memory), Is fitted so
    # Vbe = vbe_sat at the required base current; load Rc = (12 V − Vce_sat)/Ic.
    inputs = make(**overrides)
    out = compute(inputs)
    ic_design = float(inputs.collector_current_a[0])
    hfe_min = float(inputs.hfe_min[0])
    model = fitted_model(hfe_min, float(inputs.vbe_sat_v[0]), out.results["base_current_required_a"][0])
    rc = load_resistor(ic_design, float(inputs.vce_sat_v[0]))
    sol = solve_switch(model, float(inputs.drive_high_v[0]), out.results["rb_ohm"][0], rbe, V_CC, rc)
    assert sol["ic"] / sol["ib"] < hfe_min  # forced beta below the worst-case gain: saturated
    assert sol["vce"] < 0.3  # saturation region (textbook Vce_sat of a few tenths of a volt)
    assert sol["vbc"] > 0  # collector-base junction forward biased
    # The core's base current agrees with the device model (Vbe within tens of mV of vbe_sat).
    assert out.results["base_current_a"][0] == pytest.approx(sol["ib"], rel=0.05)
    assert ic_design == pytest.approx(sol["ic"], rel=0.03)


def test_under_driven_switch_fails_saturation_and_ebers_moll_agrees() -> None:
    # Forced beta 150 ≥ hfe_min 100: Rb_exact = 2.55 V / 1 mA = 2550 Ω → E24 2.4 kΩ; β_actual ≈ 141.
    inputs = make(forced_beta=150.0)
    out = compute(inputs)
    check = checks(out)["saturation"]
    assert not check.ok[0] and check.value[0] == pytest.approx(0.15 * 2400 / 2.55) and check.limit[0] == 100.0
    assert out.results["saturation_margin"][0] < 1
    assert "does not saturate" in messages(out.warnings)
    # Ebers–Moll (same device as the hand example: Is fitted at 15 mA, 0.75 V): Ic ≈ βF·Ib ≈ 106 mA, so
    # the load drops only about 8.4 V and Vce sits several volts above saturation.
    model = fitted_model(100.0, 0.75, 0.015)
    sol = solve_switch(model, 3.3, out.results["rb_ohm"][0], math.inf, V_CC, load_resistor(0.15, 0.2))
    assert sol["vce"] > 1.0
    assert sol["vbc"] < 0  # forward-active, not saturated
    assert sol["ic"] / sol["ib"] == pytest.approx(100.0, rel=0.01)  # limited by βF


# ---- violations ------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("overrides", "field"),
    [
        ({"hfe_min": math.nan}, "hfe_min"),
        ({"duty_cycle": math.inf}, "duty_cycle"),
        ({"rbe_ohm": math.inf}, "rbe_ohm"),
        ({"driver_current_max_a": math.inf}, "driver_current_max_a"),
        ({"hfe_min": 0.0}, "hfe_min"),
        ({"vbe_sat_v": 0.0}, "vbe_sat_v"),
        ({"vce_sat_v": -0.1}, "vce_sat_v"),
        ({"ic_max_a": 0.0}, "ic_max_a"),
        ({"power_max_w": -1.0}, "power_max_w"),
        ({"collector_current_a": 0.0}, "collector_current_a"),
        ({"collector_current_a": 1e-303}, "collector_current_a"),  # Rb beyond any standard value
        ({"forced_beta": 0.0}, "forced_beta"),
        ({"forced_beta": 0.5}, "forced_beta"),
        ({"rbe_ohm": 0.0}, "rbe_ohm"),
        ({"driver_current_max_a": 0.0}, "driver_current_max_a"),
        ({"duty_cycle": 1.5}, "duty_cycle"),
        ({"duty_cycle": -0.1}, "duty_cycle"),
        ({"drive_high_v": 0.7}, "drive_high_v"),
        ({"drive_high_v": 0.75}, "drive_high_v"),
        ({"drive_low_v": 3.3}, "drive_low_v"),
        ({"e_series": "E3"}, "e_series"),
    ],
)
def test_violations(overrides: dict[str, Any], field: str) -> None:
    inputs = make(**overrides)
    found = validate(inputs)  # never raises
    assert field in [v.field for v in found]
    with pytest.raises(DomainError) as err:
        compute(inputs)
    assert field in [v.field for v in err.value.violations]


def test_drive_high_message_has_the_numbers() -> None:
    (violation,) = validate(make(drive_high_v=[3.3, 0.6]))
    assert violation.field == "drive_high_v"
    assert "0.6 V" in violation.message and "0.75 V" in violation.message
    assert violation.rows.tolist() == [False, True]


def test_unknown_series_message_lists_valid_names() -> None:
    (violation,) = validate(make(e_series="E5"))
    assert "'E5'" in violation.message and "E6, E12, E24, E48, E96, E192" in violation.message


def test_optional_inputs_not_given_are_fine() -> None:
    assert validate(make(rbe_ohm=math.nan, driver_current_max_a=math.nan, drive_low_v=-5.0)) == []


# ---- checks, warnings, cautions --------------------------------------------------------------------------


def test_driver_current_check_and_caution() -> None:
    out = compute(make(driver_current_max_a=[math.nan, 0.02, 0.01]))
    check = checks(out)["driver_current"]
    assert check.ok.tolist() == [True, True, False]  # 15.9 mA vs unknown, 20 mA, 10 mA
    assert np.isnan(check.limit[0])
    (caution,) = out.cautions
    assert caution.rows.tolist() == [False, False, True] and "microcontroller" in caution.message


def test_collector_and_power_over_rating() -> None:
    # 150 mA against a 100 mA rating; 42 mW (hand example) against a 30 mW rating.
    out = compute(make(ic_max_a=[0.5, 0.1, 0.5], power_max_w=[0.5, 0.5, 0.03]))
    c = checks(out)
    assert c["collector_current_rating"].ok.tolist() == [True, False, True]
    assert c["power_rating"].ok.tolist() == [True, True, False]
    text = messages(out.cautions)
    assert "collector current exceeds" in text and "overheat" in text


def test_off_state_check() -> None:
    # Hot turn-on threshold per junction: 0.6 V at 25 °C (common practice) less 2 mV/K over 100 K (from memory)
    # = 0.4 V. A pin whose VOL is stated at the 1 µA it sinks when off sits at VOL itself; the base adds 1 µA
    # (hot leakage) × 160 Ω.
    out = compute(make(drive_low_v=[0.0, 0.39, 0.5], driver_current_max_a=1e-6))
    check = checks(out)["off_state"]
    assert check.ok.tolist() == [True, True, False]
    assert check.limit == pytest.approx([0.4, 0.4, 0.4])
    assert check.value == pytest.approx([160e-6, 0.39 + 160e-6, 0.5 + 160e-6])
    # Without a rating VOL is taken as stated at 1 mA (common practice, from memory): 0.5 V × 1 µA / 1 mA.
    out = compute(make(drive_low_v=0.5))
    assert checks(out)["off_state"].value == pytest.approx(0.5e-3 + 160e-6)


def test_off_state_reads_the_low_level_at_the_off_state_current() -> None:
    # A 5 V pin stating VOL 0.6 V at its 20 mA rating sinks only ~1 µA when the switch is off: a resistive pin
    # (common practice) sits at 0.6 V × 1 µA / 20 mA = 30 µV; the base adds 1 µA × Rb. The old rule (VOL ≤ 0.4 V)
    # failed this pin with every transistor. A Darlington's threshold is two junctions: 0.8 V.
    out = compute(make(drive_high_v=4.3, drive_low_v=0.6, driver_current_max_a=0.02, base_junctions=[1.0, 2.0]))
    check = checks(out)["off_state"]
    rb = out.results["rb_ohm"]
    assert check.ok.tolist() == [True, True]
    assert check.value == pytest.approx(0.6 * 1e-6 / 0.02 + 1e-6 * rb, rel=1e-12)
    assert check.limit == pytest.approx([0.4, 0.8])


def test_pull_down_holds_a_floating_base_and_is_recommended() -> None:
    # Floating pin: only the pull-down holds the base, V = 1 µA × Rbe; 1 MΩ lets it reach 1 V > 0.4 V.
    # Recommended: E24 at or below min(10 × Rb, 0.4 V / (2 × 1 µA)) = min(1600, 200 k) Ω = 1.6 kΩ (common practice).
    out = compute(make(rbe_ohm=[1e6, 1000.0, math.nan]))
    check = checks(out)["off_state"]
    assert check.ok.tolist() == [False, True, True]
    assert check.value[0] == pytest.approx(1.0, rel=1e-12)
    # Pin low with 1 kΩ: divider Rbe/(Rb+Rbe) on 1 µA × Rb (Kirchhoff), below the floating 1 µA × 1 kΩ.
    assert check.value[1] == pytest.approx(1e-3, rel=1e-12)
    assert out.results["rbe_recommended_ohm"][2] == 1600.0
    (pull_down,) = [n for n in out.warnings if "No base pull-down" in n.message]
    assert pull_down.rows.tolist() == [False, False, True]


def test_voltage_rating_against_the_highest_supply() -> None:
    # 48 V + 5 % = 50.4 V off-state Vce against a 40 V part: fails (1.2 × derating: 33.3 V, common practice).
    out = compute(make(vceo_max_v=40.0, supply_max_v=[50.4, 30.0, math.nan]))
    check = checks(out)["voltage_rating"]
    assert check.ok.tolist() == [False, True, True]
    assert check.limit[:2] == pytest.approx([40 / 1.2, 40 / 1.2]) and np.isnan(check.limit[2])
    assert "break down" in messages(out.cautions)


def test_pin_current_is_checked_at_its_stress_corner() -> None:
    # Pin high at its 3.3 V supply (lightly loaded), Vbe hot: 0.75 − 0.2 = 0.55 V (2 mV/K over 100 K, from memory),
    # Rb at E24's −5 %: (3.3 − 0.55) / (160 × 0.95) = 18.09 mA, above a 17 mA pin that the nominal 15.94 mA passes.
    out = compute(make(drive_high_v=2.9, drive_supply_v=3.3, driver_current_max_a=0.017, collector_current_a=0.13))
    rb = out.results["rb_ohm"][0]
    assert out.results["drive_current_a"][0] < 0.017
    check = checks(out)["driver_current"]
    assert check.value[0] == pytest.approx((3.3 - 0.55) / (rb * 0.95), rel=1e-12)
    assert not check.ok[0]


def test_default_ratio_follows_the_part() -> None:
    # Not given: the Vce(sat) test ratio over (1 + 5 %) for a high E24 resistor, kept an overdrive of 2 below
    # hfe_min (common practice): small-signal min(10/1.05, 100/2) = 9.52; Darlington min(250/1.05, 1500/2) = 238.1;
    # low-gain power part min(10/1.05, 12/2) = 6; with exact resistors the test ratio itself.
    out = compute(
        make(
            forced_beta=math.nan,
            hfe_min=[100.0, 1500.0, 12.0, 100.0],
            vce_sat_forced_beta=[10.0, 250.0, 10.0, 10.0],
            resistor_tolerance=[math.nan, math.nan, math.nan, 0.0],
        )
    )
    assert out.results["forced_beta_design"] == pytest.approx([10 / 1.05, 250 / 1.05, 6.0, 10.0], rel=1e-12)


DARLINGTON_150MA: dict[str, Any] = {
    "forced_beta": math.nan,
    "hfe_min": 1500.0,
    "vce_sat_forced_beta": 250.0,
    "vbe_sat_v": 1.7,
    "vce_sat_v": 1.1,
    "base_junctions": 2.0,
    "drive_high_v": 2.8,
    "drive_supply_v": 3.3,
    "driver_current_max_a": 0.008,
}


def test_darlington_from_a_3v3_pin_with_defaults() -> None:
    # 150 mA at the part's ratio 250/1.05: Ib = 0.63 mA; Rb = (2.8 − 1.7) V / 0.63 mA = 1746 Ω → E24 1.6 kΩ;
    # pin 1.1 V / 1.6 kΩ = 0.6875 mA; stress corner (3.3 − (1.7 − 2 × 0.2)) / (1.6 kΩ × 0.95) = 1.32 mA ≤ 8 mA.
    out = compute(make(**DARLINGTON_150MA))
    r = out.results
    assert r["rb_ohm"][0] == 1600.0
    assert r["drive_current_a"][0] == pytest.approx(1.1 / 1600, rel=1e-12)
    assert r["drive_current_max_a"][0] == pytest.approx(2.0 / 1520, rel=1e-12)
    assert all(bool(c.ok[0]) for c in out.checks)


def test_forced_beta_above_the_vce_sat_test_ratio_fails() -> None:
    # Forced beta 50 on a part whose Vce(sat) holds at Ic/Ib = 10: saturated (hfe_min 100), Vce(sat) not guaranteed.
    out = compute(make(forced_beta=[10.0, 50.0]))
    c = checks(out)
    assert c["saturation"].ok.tolist() == [True, True]
    assert c["vce_sat_guarantee"].ok.tolist() == [True, False]
    assert "not guaranteed" in messages(out.warnings)


def test_duty_cycle_averages_power_and_warns() -> None:
    out = compute(make(duty_cycle=[1.0, 0.25], rbe_ohm=1600.0))
    p = out.results["transistor_power_w"]
    assert p[1] == pytest.approx(0.25 * p[0], rel=1e-12)
    (warning,) = out.warnings
    assert warning.rows.tolist() == [False, True] and "averaged" in warning.message


def test_little_saturation_margin_warns() -> None:
    # hfe_min 15 against β_actual 9.41: margin 1.6 < 2 (common practice) but still saturating.
    out = compute(make(hfe_min=15.0))
    assert checks(out)["saturation"].ok[0]
    assert 1 < out.results["saturation_margin"][0] < 2
    assert "little margin" in messages(out.warnings)


# ---- properties ------------------------------------------------------------------------------------------


@st.composite
def valid_inputs(draw: st.DrawFn) -> BjtSwitchInputs:
    n = draw(st.integers(min_value=1, max_value=6))
    cols: dict[str, list[Any]] = {name: [] for name in DEFAULTS}
    for _ in range(n):
        vbe = draw(st.floats(min_value=0.5, max_value=1.2))
        vh = vbe + draw(st.floats(min_value=0.05, max_value=20.0))
        ic = draw(st.floats(min_value=1e-4, max_value=5.0))
        fb = draw(st.floats(min_value=1.0, max_value=50.0))
        cols["hfe_min"].append(draw(st.floats(min_value=5.0, max_value=800.0)))
        cols["vbe_sat_v"].append(vbe)
        cols["vce_sat_v"].append(draw(st.floats(min_value=0.0, max_value=1.0)))
        cols["ic_max_a"].append(draw(st.floats(min_value=1e-3, max_value=10.0)))
        cols["power_max_w"].append(draw(st.floats(min_value=1e-3, max_value=50.0)))
        cols["collector_current_a"].append(ic)
        cols["drive_high_v"].append(vh)
        cols["drive_low_v"].append(vh - draw(st.floats(min_value=0.01, max_value=25.0)))
        cols["forced_beta"].append(draw(st.one_of(st.just(math.nan), st.just(fb))))
        cols["resistor_tolerance"].append(draw(st.one_of(st.just(math.nan), st.floats(0.0, 0.2))))
        cols["vce_sat_forced_beta"].append(draw(st.floats(min_value=1.0, max_value=500.0)))
        cols["base_junctions"].append(draw(st.sampled_from([1.0, 2.0])))
        cols["vceo_max_v"].append(draw(st.one_of(st.just(math.nan), st.floats(1.0, 1000.0))))
        cols["supply_max_v"].append(draw(st.one_of(st.just(math.nan), st.floats(1.0, 1000.0))))
        cols["drive_supply_v"].append(vh + draw(st.one_of(st.just(math.nan), st.floats(0.0, 2.0))))
        cols["e_series"].append(draw(st.sampled_from(list(eseries.SERIES))))
        # Pull-down current up to 10× the required base current: realistic, and keeps cancellation mild.
        rbe_min = vbe / (10 * ic / fb)
        cols["rbe_ohm"].append(draw(st.one_of(st.just(math.nan), st.floats(rbe_min, rbe_min * 1e4))))
        cols["driver_current_max_a"].append(draw(st.one_of(st.just(math.nan), st.floats(1e-4, 1.0))))
        cols["duty_cycle"].append(draw(st.floats(min_value=0.0, max_value=1.0)))
        cols["ambient_c"].append(draw(st.floats(min_value=-40.0, max_value=125.0)))
        cols["tj_max_c"].append(draw(st.floats(min_value=126.0, max_value=200.0)))
        sink = draw(st.booleans())
        cols["rth_ja_k_per_w"].append(draw(st.one_of(st.just(math.nan), st.floats(1.0, 500.0))))
        cols["rth_jc_k_per_w"].append(draw(st.floats(0.5, 50.0)) if sink else math.nan)
        cols["heatsink_k_per_w"].append(draw(st.floats(0.5, 50.0)) if sink else math.nan)
        cols["pwm_frequency_hz"].append(draw(st.one_of(st.just(math.nan), st.floats(10.0, 1e5))))
    return make(**{name: values for name, values in cols.items() if values})


@settings(max_examples=200, deadline=None, derandomize=True)
@given(inputs=valid_inputs())
def test_property_results_are_sound(inputs: BjtSwitchInputs) -> None:
    assert validate(inputs) == []
    out = compute(inputs)
    r = out.results
    # No NaN for valid input, except where a result does not apply: PWM results without a PWM (and the
    # switching loss without the supply), the camera's alias without a camera.
    no_pwm = np.isnan(inputs.pwm_frequency_hz)
    not_applying = {
        "shortest_on_time_s": no_pwm,
        "duty_step": no_pwm,
        "flicker_low_risk_limit": no_pwm,
        "flicker_no_effect_limit": no_pwm,
        "switching_loss_w": ~no_pwm & np.isnan(inputs.supply_max_v),
        "camera_alias_hz": np.isnan(inputs.pwm_frequency_hz) | np.isnan(inputs.camera_frame_rate_hz),
    }
    for name, value in r.items():
        applies = ~not_applying.get(name, np.zeros(value.shape, dtype=bool))
        assert np.all(np.isfinite(value[applies])), name
        assert np.all(np.isnan(value[~applies])), name
    # Rb is a standard value at or below the exact one (1e-9 noise allowance).
    assert np.all(r["rb_ohm"] <= r["rb_exact_ohm"] * (1 + 1e-9))
    for k, name in enumerate(inputs.e_series):
        assert eseries.is_standard(r["rb_ohm"][k], str(name))
    # Saturation kept: the actual forced beta never exceeds the requested one. The 1e-9 picking allowance
    # is amplified by (Ib_req + I_rbe)/Ib_req where the pull-down takes part of the drive.
    i_rbe = np.where(np.isnan(inputs.rbe_ohm), 0.0, inputs.vbe_sat_v / inputs.rbe_ohm)
    amplification = 1 + i_rbe / r["base_current_required_a"]
    assert np.all(r["forced_beta_actual"] <= r["forced_beta_design"] * (1 + 1e-9 * amplification))
    given = ~np.isnan(inputs.forced_beta)
    np.testing.assert_array_equal(r["forced_beta_design"][given], inputs.forced_beta[given])
    assert np.all(r["forced_beta_design"][~given] <= inputs.vce_sat_forced_beta[~given])
    # The pin's stress corner never sources less than the nominal drive.
    assert np.all(r["drive_current_max_a"] >= r["drive_current_a"] * (1 - 1e-12))
    assert np.all(r["base_current_a"] > 0)
    assert np.all(r["transistor_power_w"] >= 0)
    # Kirchhoff's current law at the base.
    np.testing.assert_allclose(r["drive_current_a"] - i_rbe, r["base_current_a"], rtol=1e-12)
    # Check bookkeeping: each check's ok agrees with its value, limit and sense.
    for check in out.checks:
        known = ~np.isnan(check.limit)
        assert np.all(check.ok[~known])
        if check.name == "saturation":
            np.testing.assert_array_equal(check.ok, check.value < check.limit)
        elif check.sense == "max":
            np.testing.assert_array_equal(check.ok[known], check.value[known] <= check.limit[known])


def solve_darlington(
    q1: EbersMoll, q2: EbersMoll, v_high: float, rb: float, v_cc: float, rc: float
) -> dict[str, float]:
    """Solve V_high–Rb–base of Q1, Q1's emitter into Q2's base, Q2's emitter grounded, both collectors on Rc.

    Nested brentq (each residual monotonic in its unknown): the middle node balances Q1's emitter current
    against Q2's base current; the collector node balances the load against Ic1 + Ic2; the base node the drive
    against Ib1.
    """

    def middle(vb: float, vc: float) -> float:
        def node(vm: float) -> float:
            ic1, ib1 = q1.currents(vb - vm, vb - vc)
            return ic1 + ib1 - q2.currents(vm, vm - vc)[1]

        return brentq(node, -1.0, vb + 1.0, xtol=1e-13)

    def terminals(vb: float, vc: float) -> tuple[float, float, float, float]:
        vm = middle(vb, vc)
        ic1, ib1 = q1.currents(vb - vm, vb - vc)
        return vm, ic1 + q2.currents(vm, vm - vc)[0], ib1, vc

    def collector(vb: float) -> float:
        return brentq(lambda vc: (v_cc - vc) / rc - terminals(vb, vc)[1], -1.0, v_cc, xtol=1e-12)

    vb = brentq(lambda b: (v_high - b) / rb - terminals(b, collector(b))[2], 0.0, v_high, xtol=1e-12)
    vm, ic, ib, vc = terminals(vb, collector(vb))
    return {"vce": vc, "vbc2": vm - vc, "ic": ic, "ib": ib}


def test_darlington_default_ratio_saturates_the_ebers_moll_pair() -> None:
    # Independent numerical solution with scipy of two Ebers–Moll transistors (Ebers & Moll 1954) in the
    # Darlington connection (Sedra & Smith, "Microelectronic Circuits", 7th ed., the Darlington configuration, from
    # memory): each βF =
    # √hfe_min so the pair's gain ≈ βF1·βF2 = hfe_min (worst case), each Is fitted so each junction holds half of
    # vbe_sat at the design currents. Load Rc = (12 V − Vce_sat)/Ic.
    inputs = make(**DARLINGTON_150MA)
    out = compute(inputs)
    beta = math.sqrt(1500.0)
    ib1 = out.results["base_current_required_a"][0]
    q1 = fitted_model(beta, 0.85, ib1)
    q2 = fitted_model(beta, 0.85, beta * ib1)
    rc = load_resistor(0.15, 1.1)
    sol = solve_darlington(q1, q2, 2.8, out.results["rb_ohm"][0], V_CC, rc)
    assert sol["ic"] == pytest.approx(0.15, rel=0.03)  # the load current flows: the pair is switched on
    assert sol["ic"] / sol["ib"] < 1500.0
    assert sol["vce"] < 1.1  # within the part's stated Vce(sat)
    # The core's base current agrees with the device model within 10 % (Vbe within 0.1 V of vbe_sat).
    assert out.results["base_current_a"][0] == pytest.approx(sol["ib"], rel=0.1)
    # Textbook Darlington behaviour: the output transistor never saturates (Vce = Vbe2 + Vce1 > Vbe2), so 25
    # times the drive (Ic/Ib = 10, the small-signal rule) lowers Vce by little and never below Vbe2.
    hard = solve_darlington(q1, q2, 2.8, (2.8 - 1.7) / 0.015, V_CC, rc)
    assert hard["vbc2"] < 0 and sol["vbc2"] < 0
    assert sol["vce"] - hard["vce"] < 0.1 and hard["vce"] > 0.7


# ---- PWM timing ---------------------------------------------------------------------------------------------

DARLINGTON_TIMES = {"td_s": 2e-7, "tr_s": 5e-7, "ts_s": 3e-6, "tf_s": 1.5e-6}  # invented, class-typical


def test_a_fast_pwm_fails_a_slow_darlington_on_the_on_time_check_with_its_numbers() -> None:
    # 2 kHz with 8 bits: the shortest pulse is 1/(2000·256) = 1.95 µs; ten times the Darlington's
    # (0.2 + 0.5) µs on plus (3 + 1.5) µs off is 52 µs (common practice: a tenth of the pulse for the edges).
    out = compute(make(pwm_frequency_hz=2000.0, pwm_resolution_bits=8.0, **DARLINGTON_TIMES))
    c = checks(out)["shortest_pulse_covers_edges"]
    assert not c.ok[0]
    assert c.value[0] == pytest.approx(10 * (0.7e-6 + 4.5e-6))
    assert c.limit[0] == pytest.approx(1 / (2000 * 256))
    # The small-signal part's (0.04 + 0.04) µs on and (0.25 + 0.08) µs off fit 64 steps at 2 kHz (7.8 µs).
    assert checks(compute(make(pwm_frequency_hz=2000.0, pwm_resolution_bits=6.0)))["shortest_pulse_covers_edges"].ok[0]


def test_switching_loss_enters_the_transistor_power() -> None:
    # V·I·(tr + tf)·f/6 (Mohan, Undeland & Robbins, Power Electronics): 12 V, 0.15 A, (40 + 80) ns, 2 kHz.
    static = compute(make(supply_max_v=12.0))
    pwm = compute(make(supply_max_v=12.0, pwm_frequency_hz=2000.0))
    loss = 12.0 * 0.15 * 120e-9 * 2000.0 / 6
    assert pwm.results["switching_loss_w"][0] == pytest.approx(loss)
    assert pwm.results["transistor_power_w"][0] == pytest.approx(static.results["transistor_power_w"][0] + loss)
    # Without the supply the loss is unknown: left out, with a warning.
    unknown = compute(make(pwm_frequency_hz=2000.0))
    assert math.isnan(unknown.results["switching_loss_w"][0])
    assert any("switching loss is unknown" in w.message for w in unknown.warnings)
