"""Every stored part parameter is read by some calculation or documented as informational, with its reason."""

from __future__ import annotations

from calcsvc.core.channel_spec import ALTERNATIVE_ROLES, CHANNEL_INPUTS
from calcsvc.core.registry import EVERY
from calcsvc.data.kinds import KINDS, validate_parameters
from calcsvc.service.parts import ParametersField


def _read_by_a_calculation() -> set[tuple[str, str]]:
    """(kind, parameter) pairs a declared calculation or the channel review takes from a part: the inputs its
    roles provide (the review's alternative roles too: a MOSFET as its transistor), and the values a role requires
    (an npn transistor)."""
    used = set()
    for role in (*(r for spec in (*EVERY.values(), CHANNEL_INPUTS) for r in spec.roles), *ALTERNATIVE_ROLES):
        used |= {(role.kind, parameter) for parameter, _ in role.provides}
        used |= {(role.kind, parameter) for parameter, _ in role.must_have}
    return used


def test_every_parameter_is_used_or_informational() -> None:
    used = _read_by_a_calculation()
    unaccounted = [
        f"{kind}.{p.name}"
        for kind, params in KINDS.items()
        for p in params
        if (kind, p.name) not in used and not p.informational
    ]
    assert unaccounted == [], "read by no calculation and not marked informational (with its reason)"
    # Informational means no calculation reads it: a parameter a role starts to use loses the mark.
    misdocumented = [
        f"{kind}.{p.name}"
        for kind, params in KINDS.items()
        for p in params
        if (kind, p.name) in used and p.informational
    ]
    assert misdocumented == []
    # Roles name only parameters their kind stores.
    assert {(kind, name) for kind, name in used} <= {(kind, p.name) for kind, params in KINDS.items() for p in params}


def test_led_test_current_is_informational_and_shown_as_such() -> None:
    # The forward voltages are used as given (at the design current); if_test_a only records the datasheet's
    # test condition.
    led = {p.name: p for p in KINDS["led"]}
    assert "design current" in led["if_test_a"].informational
    described = ParametersField().metadata["description"]
    assert "if_test_a (informational)" in described and "vf_typ_v," in described


SMALL_MOSFET = {
    "channel": "n",
    "vds_max_v": 30.0,
    "id_max_a": 3.0,
    "vgs_1_v": 2.5,
    "rds_on_1_ohm": 0.1,
    "vgs_2_v": 4.5,
    "rds_on_2_ohm": 0.06,
    "vgs_th_max_v": 1.5,
    "qg_total_c": 3e-9,
    "power_max_w": 0.8,
}


def test_mosfet_on_resistance_points_are_ordered_and_paired() -> None:
    assert validate_parameters("mosfet", SMALL_MOSFET) == {}
    # A higher gate voltage never raises the on-resistance; points rise in gate voltage.
    assert "rds_on_1_ohm" in validate_parameters("mosfet", {**SMALL_MOSFET, "rds_on_2_ohm": 0.2})
    assert "vgs_2_v" in validate_parameters("mosfet", {**SMALL_MOSFET, "vgs_2_v": 2.0})
    # The threshold lies below the lowest stated gate voltage.
    assert "vgs_1_v" in validate_parameters("mosfet", {**SMALL_MOSFET, "vgs_th_max_v": 3.0})
    # A gate voltage without its on-resistance (or the reverse) is refused, naming the missing one.
    without = {k: v for k, v in SMALL_MOSFET.items() if k != "rds_on_2_ohm"}
    assert "together" in validate_parameters("mosfet", without)["rds_on_2_ohm"]
