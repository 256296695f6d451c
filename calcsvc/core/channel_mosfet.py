"""A MOSFET as the channel review's switch: which rows have one, its stage's inputs from the channel's, the bound
on its drop that the LED strings are designed around, and its dissipation.

The drop
    A MOSFET has no fixed saturation voltage: it drops Id·Rds(on), and Rds(on) depends on the gate voltage and
    the junction temperature, while Id depends on the drop. The review bounds it instead of iterating:
    Rds_max = Rds(on) at the pin's lowest high level (``drive_high_v``, less the gate pull-down's share), at
    25 °C, raised to the hottest junction a passing design may have, Tj,max − 20 K (``on_resistance.hot``).
    The switch is a resistance in the strings' common return, so with every string alike each string sees
    strings × Rds in series. The string resistor is sized for the target current through that drop
    (strings × current_a × Rds_max, ``design_drop``); the headroom is judged with Rds_max and the current of
    each corner (the drop is then worst-case Id × Rds_max); the checks that fail as the current rises (LED and
    drain current ratings, heat, the supply) are judged with no drop at all, since a part states only its
    largest on-resistance and may conduct far better (the ``on_resistance`` corner quantity runs from 0 to
    Rds_max).

Dissipation (thermal Ohm's law with the on-resistance rising with its heat, ``on_resistance.junction``)
    P = Id²·Rds(Tj)·D + switching loss, with Rds at the gate voltage the pin gives and Tj the junction that
    this very dissipation makes; infinite where the heat runs away (the thermal checks then fail).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from calcsvc.core import mosfet_switch, on_resistance, thermal
from calcsvc.core.mosfet_inputs import MosfetSwitchInputs
from calcsvc.core.outcome import BoolArray, FloatArray, Outcome, take

if TYPE_CHECKING:  # ``channel`` builds on this module; the inputs type is needed for annotations only
    from calcsvc.core.channel_inputs import ChannelInputs

# Inputs only a MOSFET has, and those only a bipolar transistor has (without defaults): a row gives one set.
MOSFET_ONLY = (
    *(name for name in mosfet_switch.PART_PARAMETERS if name not in ("power_max_w", "tj_max_c", "rth_ja_k_per_w")),
    "gate_pulldown_ohm",
    "switching_time_s",
)
BIPOLAR_ONLY = ("hfe_min", "hfe_typ", "vbe_sat_v", "vce_sat_v", "ic_max_a", "forced_beta", "vceo_max_v", "rbe_ohm")
BIPOLAR_REQUIRED = ("hfe_min", "hfe_typ", "vbe_sat_v", "vce_sat_v", "ic_max_a")

# The single calculation's checks the review's thermal stage judges instead, at every corner.
HEAT_CHECKS = ("dissipation_at_ambient", "junction_temperature")


def is_mosfet(i: ChannelInputs) -> BoolArray:
    """Rows whose switch is a MOSFET: any input only a MOSFET has is given."""
    found = np.zeros(i.supply_v.shape, dtype=bool)
    for name in MOSFET_ONLY:
        found |= ~np.isnan(getattr(i, name))
    return found


def all_mosfet(i: ChannelInputs) -> bool:
    """Whether every row's switch is a MOSFET (else none is); the review takes rows of one switch kind per call,
    so that its corners and Monte Carlo stay vectorised (callers split a mixed batch by kind)."""
    mosfet = is_mosfet(i)
    if mosfet.any() and not mosfet.all():
        raise ValueError("the rows mix switch kinds: review the MOSFET rows and the bipolar rows apart")
    return bool(mosfet.all()) and mosfet.size > 0


def switch_inputs(i: ChannelInputs, drain_current_a: FloatArray) -> MosfetSwitchInputs:
    """The single calculation's inputs for the channel's MOSFET carrying ``drain_current_a``."""
    return MosfetSwitchInputs(
        vds_max_v=i.vds_max_v,
        id_max_a=i.id_max_a,
        vgs_1_v=i.vgs_1_v,
        rds_on_1_ohm=i.rds_on_1_ohm,
        vgs_2_v=i.vgs_2_v,
        rds_on_2_ohm=i.rds_on_2_ohm,
        vgs_3_v=i.vgs_3_v,
        rds_on_3_ohm=i.rds_on_3_ohm,
        vgs_th_max_v=i.vgs_th_max_v,
        qg_total_c=i.qg_total_c,
        power_max_w=i.power_max_w,
        tj_max_c=i.tj_max_c,
        # The review's Rθ to air (through a heat sink where one is given), as its thermal stage takes it.
        rth_ja_k_per_w=thermal.transistor_rth(
            i.tj_max_c, i.power_max_w, i.rth_ja_k_per_w, i.rth_jc_k_per_w, i.heatsink_k_per_w
        )[0],
        drain_current_a=drain_current_a,
        supply_max_v=i.supply_v,  # nominal; the worst case takes the supply's high corner
        drive_high_v=i.drive_high_v,
        drive_low_v=i.drive_low_v,
        driver_current_max_a=i.source_current_max_a,
        drive_supply_v=i.drive_supply_v,
        switching_time_s=i.switching_time_s,
        gate_pulldown_ohm=i.gate_pulldown_ohm,
        e_series=i.e_series,
        resistor_tolerance=i.resistor_tolerance,
        duty_cycle=i.duty_cycle,
        ambient_c=i.ambient_c,
        pwm_frequency_hz=i.pwm_frequency_hz,
        pwm_resolution_bits=i.pwm_resolution_bits,
        modulation_depth=i.modulation_depth,
        camera_frame_rate_hz=i.camera_frame_rate_hz,
    )


def rds_max(i: ChannelInputs, rows: BoolArray) -> FloatArray:
    """Rds_max (module docstring) on ``rows``, which must have passed the MOSFET's validation; NaN elsewhere."""
    return gate_and_rds_max(i, rows)[1]


def gate_and_rds_max(i: ChannelInputs, rows: BoolArray) -> tuple[FloatArray, FloatArray]:
    """The gate voltage the pin gives and Rds_max on ``rows`` (validated as for ``rds_max``); NaN elsewhere.
    Rds_max is NaN too where that gate voltage is below the lowest one the part states its on-resistance at."""
    gate_v, found = np.full(i.supply_v.shape, np.nan), np.full(i.supply_v.shape, np.nan)
    if rows.any():
        within = take(i, rows)
        switch = mosfet_switch.compute(switch_inputs(within, within.strings), validated=True)
        gate_v[rows], found[rows] = switch.results["gate_v"], rds_max_of(within, switch)
    return gate_v, found


def rds_max_of(i: ChannelInputs, switch: Outcome) -> FloatArray:
    """Rds_max from the switch section, whose on-resistance is at the gate voltage the pin gives, 25 °C."""
    return on_resistance.hot(switch.results["rds_on_ohm"], i.tj_max_c - thermal.JUNCTION_MARGIN_K)


def design_drop(i: ChannelInputs, rds_max_ohm: FloatArray) -> FloatArray:
    """The drop the string resistor is sized around: the target current of every string through Rds_max."""
    return i.strings * i.current_a * rds_max_ohm


def section(i: ChannelInputs, drain_current_a: FloatArray) -> Outcome:
    """The switch section of a MOSFET channel: the single calculation at the worst-case drain current, without
    its heat checks (``HEAT_CHECKS``), which the review's thermal stage judges at every corner."""
    found = mosfet_switch.compute(switch_inputs(i, drain_current_a), validated=True)
    checks = [c for c in found.checks if c.name not in HEAT_CHECKS]
    return Outcome(results=found.results, checks=checks, warnings=found.warnings, cautions=found.cautions)


def dissipation(
    current_a: np.ndarray,
    rds_25_ohm: np.ndarray,
    duty: np.ndarray,
    ambient_c: np.ndarray,
    rth_k_per_w: np.ndarray,
    switching_w: np.ndarray,
) -> np.ndarray:
    """Average dissipation I²·Rds(Tj)·D + switching at the self-heated junction (module docstring); broadcasts.
    Infinite where the heat runs away: no temperature balances it, so every corner near it is worse than any
    finite one."""
    junction = on_resistance.junction(ambient_c, rth_k_per_w, current_a, duty, rds_25_ohm, switching_w)
    power = current_a**2 * on_resistance.hot(rds_25_ohm, junction) * duty + switching_w
    return np.where(np.isnan(junction) & ~np.isnan(rds_25_ohm), np.inf, power)
