"""The channel review's per-row inputs (``channel``), one array per flat JSON input name."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calcsvc.core.outcome import BoolArray, FloatArray


@dataclass(frozen=True)
class ChannelInputs:
    """Per-row inputs, arrays of shape ``(n,)``; field names are the flat JSON input names.

    NaN marks an optional value as not given: ``supply_min_v`` and ``supply_max_v`` (together: the band is
    ``supply_v`` ± ``supply_tolerance``), ``capacity_ah``, ``source_current_max_a`` (pin rating unknown:
    ``driver_current`` does not apply), ``resistor_tolerance`` (the series' default, for both resistors),
    and the front stage (NaN ``gbw_hz``: no front stage on that row; then every other front-stage field must
    be NaN too). With a front stage, ``gain`` (magnitude, V/V) and ``slew_rate_v_per_s`` are required and
    ``open_loop_gain``, ``output_headroom_v``, ``signal_hz``, ``amplitude_v`` (peak), the op-amp's supply
    range ``opamp_supply_min_v``/``opamp_supply_max_v``, ``input_offset_v`` and the allowed
    ``output_offset_max_v`` stay optional, as do the windows, DC error, noise and stability inputs
    (``channel_front.FRONT_STAGE_FIELDS``); ``phase_margin_min_deg`` always holds a value (its default).
    The switch is an NPN (``hfe_min`` … given) or a MOSFET (``rds_on_1_ohm`` … given, ``channel_mosfet``), one
    kind per row; the other kind's fields are NaN there.
    ``leds_in_series``, ``strings`` and ``channels`` hold whole numbers as floats; ``e_series`` is a numpy str
    array, ``inverting`` a bool array.
    """

    supply_v: FloatArray
    supply_tolerance: FloatArray
    supply_min_v: FloatArray
    supply_max_v: FloatArray
    current_max_a: FloatArray
    capacity_ah: FloatArray
    drive_high_v: FloatArray
    drive_low_v: FloatArray
    source_current_max_a: FloatArray
    hfe_min: FloatArray
    hfe_typ: FloatArray
    vbe_sat_v: FloatArray
    vce_sat_v: FloatArray
    ic_max_a: FloatArray
    power_max_w: FloatArray
    vf_typ_v: FloatArray
    vf_min_v: FloatArray
    vf_max_v: FloatArray
    if_max_a: FloatArray
    leds_in_series: FloatArray
    strings: FloatArray
    current_a: FloatArray
    duty_cycle: FloatArray
    channels: FloatArray
    e_series: np.ndarray
    forced_beta: FloatArray  # NaN: from the part
    vce_sat_forced_beta: FloatArray
    base_junctions: FloatArray
    vceo_max_v: FloatArray  # NaN: not checked
    rbe_ohm: FloatArray  # NaN: no base pull-down
    drive_supply_v: FloatArray  # NaN: not given
    resistor_tolerance: FloatArray
    inverting: BoolArray
    gain: FloatArray
    gbw_hz: FloatArray
    open_loop_gain: FloatArray
    slew_rate_v_per_s: FloatArray
    output_headroom_v: FloatArray
    signal_hz: FloatArray
    amplitude_v: FloatArray
    opamp_supply_min_v: FloatArray
    opamp_supply_max_v: FloatArray
    input_offset_v: FloatArray
    output_offset_max_v: FloatArray
    input_low_headroom_v: FloatArray
    input_high_headroom_v: FloatArray
    output_low_headroom_v: FloatArray
    output_high_headroom_v: FloatArray
    reference_v: FloatArray
    rf_ohm: FloatArray
    plus_input_ohm: FloatArray
    input_bias_current_a: FloatArray
    input_offset_current_a: FloatArray
    output_error_max_v: FloatArray
    adc_full_scale_v: FloatArray
    adc_bits: FloatArray
    voltage_noise_v_per_rthz: FloatArray
    current_noise_a_per_rthz: FloatArray
    second_pole_hz: FloatArray
    output_resistance_ohm: FloatArray
    load_capacitance_f: FloatArray
    isolation_ohm: FloatArray
    phase_margin_min_deg: FloatArray
    # Heat (``channel_thermal``); NaN marks an optional value as not given.
    ambient_c: FloatArray
    ambient_min_c: FloatArray  # NaN: ambient_c
    ambient_max_c: FloatArray  # NaN: ambient_c
    tj_max_c: FloatArray
    rth_ja_k_per_w: FloatArray  # NaN: from the power rating at 25 °C
    rth_jc_k_per_w: FloatArray  # with heatsink_k_per_w: a heat sink
    heatsink_k_per_w: FloatArray  # NaN: none
    led_tj_max_c: FloatArray
    led_rth_jb_k_per_w: FloatArray
    led_rth_ba_k_per_w: FloatArray
    vf_tempco_v_per_k: FloatArray
    if_derating_knee_c: FloatArray  # NaN: no current derating curve
    resistor_rated_to_c: FloatArray
    resistor_zero_power_c: FloatArray
    # The switch's stated times and the PWM (``switch_pwm``); NaN pwm_frequency_hz: no PWM stage.
    td_s: FloatArray
    tr_s: FloatArray
    ts_s: FloatArray
    tf_s: FloatArray
    pwm_frequency_hz: FloatArray
    pwm_resolution_bits: FloatArray
    modulation_depth: FloatArray
    camera_frame_rate_hz: FloatArray  # NaN: no camera
    # A MOSFET as the switch (``channel_mosfet``): NaN on a bipolar row, which gives hfe_min … instead.
    vds_max_v: FloatArray
    id_max_a: FloatArray
    vgs_1_v: FloatArray
    rds_on_1_ohm: FloatArray
    vgs_2_v: FloatArray  # NaN: not stated
    rds_on_2_ohm: FloatArray
    vgs_3_v: FloatArray
    rds_on_3_ohm: FloatArray
    vgs_th_max_v: FloatArray
    qg_total_c: FloatArray
    gate_pulldown_ohm: FloatArray  # NaN: none fitted
    switching_time_s: FloatArray  # NaN: from the PWM
