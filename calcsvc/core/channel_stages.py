"""What each stage of the channel review (``channel``) is given: the stage calculations' inputs built from a
channel's flat inputs, the collector currents the LED stage hands to the switch, and which rows have a front
stage."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from calcsvc.core import (
    bjt_switch,
    channel_mosfet,
    channel_thermal,
    closed_loop,
    duty_power,
    eseries,
    led_string,
    slew,
    thermal_inputs,
)
from calcsvc.core.outcome import BoolArray, FloatArray, Outcome

if TYPE_CHECKING:  # ``channel`` builds on this module; the inputs type is needed for annotations only
    from calcsvc.core.channel_inputs import ChannelInputs


# The LED stage's heat inputs, named as the channel's (its thermal stage judges them at every corner).
LED_HEAT_FIELDS = tuple(spec.name for spec in (thermal_inputs.AMBIENT_C, *thermal_inputs.LED))
SWITCH_HEAT_FIELDS = tuple(spec.name for spec in (thermal_inputs.AMBIENT_C, *thermal_inputs.TRANSISTOR))


def resistor_tolerance(inputs: ChannelInputs) -> FloatArray:
    """The tolerance of both resistors per row: as given, or the series' default."""
    return eseries.tolerance_rows(inputs.resistor_tolerance, inputs.e_series)


def led_inputs(i: ChannelInputs, rds_max_ohm: FloatArray | None = None) -> led_string.LedStringInputs:
    """The LED stage's inputs; the switch drop is a bipolar row's vce_sat_v, a MOSFET row's drop at its target
    current through ``rds_max_ohm`` (``channel_mosfet``; absent: computed here, the rows already validated)."""
    mosfet = channel_mosfet.is_mosfet(i)
    if mosfet.any():
        rds = channel_mosfet.rds_max(i, mosfet) if rds_max_ohm is None else rds_max_ohm
        drop = np.where(mosfet, channel_mosfet.design_drop(i, rds), i.vce_sat_v)
    else:
        drop = i.vce_sat_v
    return led_string.LedStringInputs(
        supply_v=i.supply_v,
        supply_tolerance=i.supply_tolerance,
        vf_typ_v=i.vf_typ_v,
        vf_min_v=i.vf_min_v,
        vf_max_v=i.vf_max_v,
        if_max_a=i.if_max_a,
        leds_in_series=i.leds_in_series,
        strings=i.strings,
        current_a=i.current_a,
        switch_drop_v=drop,
        e_series=i.e_series,
        resistor_tolerance=i.resistor_tolerance,
        **{name: getattr(i, name) for name in LED_HEAT_FIELDS},
    )


def switch_inputs(i: ChannelInputs, collector_current_a: FloatArray) -> bjt_switch.BjtSwitchInputs:
    return bjt_switch.BjtSwitchInputs(
        hfe_min=i.hfe_min,
        vbe_sat_v=i.vbe_sat_v,
        vce_sat_v=i.vce_sat_v,
        ic_max_a=i.ic_max_a,
        power_max_w=i.power_max_w,
        collector_current_a=collector_current_a,
        drive_high_v=i.drive_high_v,
        drive_low_v=i.drive_low_v,
        forced_beta=i.forced_beta,
        vce_sat_forced_beta=i.vce_sat_forced_beta,
        base_junctions=i.base_junctions,
        vceo_max_v=i.vceo_max_v,
        supply_max_v=i.supply_v,  # nominal; the worst case takes the supply's high corner
        e_series=i.e_series,
        resistor_tolerance=i.resistor_tolerance,
        rbe_ohm=i.rbe_ohm,
        driver_current_max_a=i.source_current_max_a,
        drive_supply_v=i.drive_supply_v,
        duty_cycle=i.duty_cycle,
        **{name: getattr(i, name) for name in SWITCH_HEAT_FIELDS},
        td_s=i.td_s,
        tr_s=i.tr_s,
        ts_s=i.ts_s,
        tf_s=i.tf_s,
        pwm_frequency_hz=i.pwm_frequency_hz,
        pwm_resolution_bits=i.pwm_resolution_bits,
        modulation_depth=i.modulation_depth,
        camera_frame_rate_hz=i.camera_frame_rate_hz,
    )


def supply_inputs(i: ChannelInputs, collector_current_a: FloatArray) -> duty_power.DutyPowerInputs:
    n = i.supply_v.shape[0]
    nan = np.full(n, np.nan)
    return duty_power.DutyPowerInputs(
        supply_v=i.supply_v,
        current_max_a=i.current_max_a,
        capacity_ah=i.capacity_ah,
        load_row=np.arange(n, dtype=np.int64),
        peak_current_a=collector_current_a,
        duty_cycle=i.duty_cycle,
        average_current_a=nan,
        rms_current_a=nan,
        count=i.channels,
        fixed=np.zeros(n, dtype=bool),  # every channel is dimmed by its PWM
    )


def closed_loop_inputs(i: ChannelInputs) -> closed_loop.ClosedLoopInputs:
    n = i.supply_v.shape[0]
    nan = np.full(n, np.nan)
    return closed_loop.ClosedLoopInputs(
        inverting=np.asarray(i.inverting, dtype=bool),
        gain=i.gain,
        rf_ohm=nan,
        rg_ohm=nan,
        gbw_hz=i.gbw_hz,
        open_loop_gain=i.open_loop_gain,
        stages=np.ones(n),
        signal_hz=i.signal_hz,
        sweep_start_hz=nan,
        sweep_stop_hz=nan,
        sweep_points=nan,
        input_offset_v=i.input_offset_v,
        output_offset_max_v=i.output_offset_max_v,
    )


def slew_inputs(i: ChannelInputs, supply_v: FloatArray) -> slew.SlewInputs:
    """The front stage's output for a sine at ``signal_hz``; ``supply_v`` is its rail span (the op-amp is powered
    from the channel's supply), checked against the op-amp's supply range."""
    return slew.SlewInputs(
        slew_rate_v_per_s=i.slew_rate_v_per_s,
        output_headroom_v=i.output_headroom_v,
        frequency_hz=i.signal_hz,
        amplitude_v=i.amplitude_v,
        triangle=np.zeros(supply_v.shape, dtype=bool),
        supply_v=supply_v,
        step_v=np.full(supply_v.shape, np.nan),
        opamp_supply_min_v=i.opamp_supply_min_v,
        opamp_supply_max_v=i.opamp_supply_max_v,
    )


def supply_band(i: ChannelInputs) -> tuple[FloatArray, FloatArray]:
    """The lowest and highest supply voltage in service: the band given (a battery: end of discharge and
    fresh), else ``supply_v`` ± ``supply_tolerance``."""
    given = ~np.isnan(i.supply_min_v) & ~np.isnan(i.supply_max_v)
    low = np.where(given, i.supply_min_v, i.supply_v * (1.0 - i.supply_tolerance))
    high = np.where(given, i.supply_max_v, i.supply_v * (1.0 + i.supply_tolerance))
    return low, high


def collector_currents(i: ChannelInputs, led: Outcome) -> tuple[FloatArray, FloatArray]:
    """The switch carries every string: nominal Ic from the nominal string current, Ic_max from the highest
    (the base is sized for it: ``channel``'s docstring): top of the supply band, lowest Vf, low resistor, and
    the hottest ambient, where each string's forward voltage has fallen at its coupled electro-thermal point.
    Never below the same corner at the 25 °C the forward voltages are stated at: an enclosure kept colder than
    that still gets a base sized for the datasheet's worst case (and Ic_max ≥ the nominal Ic). A MOSFET's drop
    is taken as none here (``channel_mosfet``: the current-high side)."""
    _, high = supply_band(i)
    low_resistor = led.results["resistor_ohm"] * (1.0 - resistor_tolerance(i))
    _, hottest = channel_thermal.ambient_range(i)
    point = channel_thermal.led_point(i, lambda x: x, high, i.leds_in_series * i.vf_min_v, low_resistor, hottest)
    return led.results["total_current_a"], i.strings * np.maximum(point.current_a, led.results["current_max_a"])


def has_front_stage(inputs: ChannelInputs) -> BoolArray:
    return ~np.isnan(inputs.gbw_hz)
