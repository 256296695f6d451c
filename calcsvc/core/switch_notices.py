"""What a saturated NPN switch design (``bjt_switch``) warns about and cautions against, per row: weak
saturation, an unguaranteed Vce(sat), a floating base, an unknown pin supply, averaged dissipation, and ratings
exceeded."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from calcsvc.core.outcome import BoolArray, FloatArray, Notice, add_notice

if TYPE_CHECKING:  # ``bjt_switch`` builds on this module; its inputs type is needed for annotations only
    from calcsvc.core.bjt_switch_inputs import BjtSwitchInputs

SATURATION_MARGIN_WARN = 2.0  # hfe_min at least twice the actual forced beta (common practice)


def notices(
    i: BjtSwitchInputs,
    margin: FloatArray,
    beta_actual: FloatArray,
    power: FloatArray,
    driver_over: BoolArray,
    over_voltage: BoolArray,
) -> tuple[list[Notice], list[Notice]]:
    """The design's warnings and cautions."""
    ic = i.collector_current_a
    driver_limit = np.asarray(i.driver_current_max_a, dtype=np.float64)
    warnings: list[Notice] = []
    cautions: list[Notice] = []

    add_notice(
        warnings,
        margin < 1.0,
        "The actual forced beta is at or above hfe_min: at worst-case gain the transistor does not saturate "
        "and will dissipate far more than computed.",
    )
    add_notice(
        warnings,
        (margin >= 1.0) & (margin < SATURATION_MARGIN_WARN),
        "hfe_min is less than twice the actual forced beta: little margin over worst-case gain "
        "(gain also falls at low temperature and high current).",
    )
    add_notice(
        warnings,
        beta_actual > i.vce_sat_forced_beta,
        "Ic/Ib exceeds the ratio at which the part's Vce(sat) is specified: the saturation voltage, and the "
        "current and dissipation computed from it, are not guaranteed; design at the test ratio.",
    )
    add_notice(
        warnings,
        np.isnan(i.rbe_ohm),
        "No base pull-down: while the pin floats (reset, programming) leakage or pickup can turn the "
        "transistor on; add one of about rbe_recommended_ohm.",
    )
    unknown_supply = np.isnan(i.drive_supply_v) & ~np.isnan(driver_limit)
    message = "The pin's supply is not given: its stress current is taken at drive_high_v, an understatement."
    add_notice(warnings, unknown_supply, message)
    add_notice(
        warnings,
        i.duty_cycle < 1.0,
        "transistor_power_w is averaged over the switching period; the power while on is higher "
        "(divide by duty_cycle).",
    )
    add_notice(
        cautions,
        ic > i.ic_max_a,
        "The collector current exceeds the transistor's rating: the transistor can fail.",
    )
    add_notice(
        cautions,
        over_voltage,
        "The supply is too close to the transistor's collector-emitter rating: it can break down and fail.",
    )
    add_notice(
        cautions,
        power > i.power_max_w,
        "The transistor dissipates more than its rating: it will overheat and can fail.",
    )
    add_notice(
        cautions,
        driver_over,
        "The drive pin would source more than its rating: this can damage the microcontroller or logic "
        "output; use a larger base resistor with a higher-gain transistor, or a buffer.",
    )
    return warnings, cautions
