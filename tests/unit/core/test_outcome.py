"""Tests for the shared result helpers: rules judged at once and notices added together."""

from __future__ import annotations

import numpy as np
import pytest

from calcsvc.core.outcome import Notice, Rules, Violation, add_notices, require_practical


def test_rules_name_each_broken_rule_in_order_with_its_first_bad_row_and_format_no_other_message() -> None:
    supply_v = np.array([12.0, -3.0, 0.0])
    current_a = np.array([0.02, 0.02, 0.02])

    def never(_bad: np.ndarray) -> str:
        raise AssertionError("a message was written for a rule no row breaks")

    rules = Rules()
    rules.require(supply_v <= 0, "supply_v", "supply_v ({} V) must be positive", supply_v)
    rules.require(current_a <= 0, "current_a", never)
    rules.require(supply_v < current_a, "supply_v", "supply_v ({} V) is below current_a ({} A)", supply_v, current_a)
    found = rules.violations()
    assert [(v.field, v.message) for v in found] == [
        ("supply_v", "supply_v (-3 V) must be positive"),
        ("supply_v", "supply_v (-3 V) is below current_a (0.02 A)"),
    ]
    np.testing.assert_array_equal(found[0].rows, [False, True, True])


def test_valid_rows_give_no_violation_and_no_message() -> None:
    rules = Rules()
    rules.finite({"supply_v": np.array([12.0, 5.0]), "current_a": np.array([0.02, 0.01])})
    rules.practical({"supply_v": np.array([12.0, 5.0])}, divisors=("supply_v",))
    assert rules.violations() == []


@pytest.mark.parametrize("mixed", [False, True], ids=["one-shape", "mixed-shapes"])
def test_magnitude_rule_reads_the_same_over_inputs_of_one_shape_or_several(mixed: bool) -> None:
    # Inputs of one shape are judged stacked, others one by one: the refusals must not depend on which.
    resistance = np.array([1e-31, 470.0])
    gain = np.array([1e31, 2.0]) if not mixed else np.array([1e31])
    violations: list[Violation] = []
    require_practical(violations, {"rg_ohm": resistance, "gain": gain}, divisors=("rg_ohm",))
    assert [(v.field, v.message) for v in violations] == [
        (
            "rg_ohm",
            "rg_ohm (1e-31) lies outside the magnitudes this service computes with (1e-30 to 1e+30 in SI units)",
        ),
        ("gain", "gain (1e+31) lies outside the magnitudes this service computes with (at most 1e+30 in SI units)"),
    ]


def test_notices_added_together_keep_their_order_and_only_those_that_apply() -> None:
    hot = np.array([False, True])
    warm = np.array([False, False])
    dark = np.array([True, False])
    found: list[Notice] = [Notice(np.array([True, True]), "standing")]
    add_notices(found, [(hot, "hot"), (warm, "warm"), (dark, "dark")])
    assert [n.message for n in found] == ["standing", "hot", "dark"]
    np.testing.assert_array_equal(found[2].rows, dark)
