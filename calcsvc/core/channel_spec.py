"""The channel review's entry in the registry: the inputs of ``channel.review`` and its Monte Carlo run, with units,
ranges and the part roles that may supply them, and the unit of each check. The HTTP schema, the searches and the
page are derived from it, as the calculations' are from their ``SPEC``."""

from __future__ import annotations

import dataclasses

from calcsvc.core import (
    bjt_drive,
    channel,
    channel_mosfet,
    monte_carlo,
    mosfet_switch,
    opamp_dc_error,
    opamp_noise,
    opamp_stability,
    opamp_windows,
    pwm_timing,
    thermal_inputs,
)
from calcsvc.core.adc import ADC_INPUTS
from calcsvc.core.spec import E_SERIES, Input, InputSet, Role, fraction, positive

_NPN = " (an NPN switch: required for one)"


def _mosfet_input(name: str) -> Input:
    """A MOSFET switch's input as the single calculation declares it, optional here: a row gives one kind's."""
    spec = next(spec for spec in mosfet_switch.SPEC.inputs if spec.name == name)
    return dataclasses.replace(spec, description=f"{spec.description} (a MOSFET switch)", optional=True)


def _count(name: str, description: str, default: int | None = None, maximum: float = 1000) -> Input:
    return Input(name, "dimensionless", description, default, minimum=1, maximum=maximum, integer=True)


CHANNEL_INPUTS = InputSet(
    name=channel.NAME,
    summary="Review a whole LED channel: string resistor, NPN or MOSFET switch, supply budget and front stage, "
    "nominal, worst case and yield",
    version=channel.VERSION,
    inputs=(
        positive("supply_v", "V", "supply voltage"),
        Input(
            "supply_tolerance",
            "dimensionless",
            "supply tolerance as a fraction, for a band of supply_v ± tolerance when supply_min_v and supply_max_v "
            "are absent",
            0.0,
            minimum=0,
            maximum=1,
        ),
        positive("supply_min_v", "V", "lowest supply voltage in service (a battery: end of discharge)", optional=True),
        positive("supply_max_v", "V", "highest supply voltage in service (a battery: fresh)", optional=True),
        positive("current_max_a", "A", "supply current rating"),
        positive("capacity_ah", "A*h", "battery capacity", optional=True),
        Input("drive_high_v", "V", "driver output voltage when on"),
        Input("drive_low_v", "V", "driver output voltage when off", 0.0),
        positive("source_current_max_a", "A", "largest current the driver pin may source", optional=True),
        bjt_drive.DRIVE_SUPPLY_V,
        positive("hfe_min", "dimensionless", "lowest DC current gain" + _NPN, optional=True),
        positive("hfe_typ", "dimensionless", "typical DC current gain" + _NPN, optional=True),
        positive("vbe_sat_v", "V", "base-emitter voltage in saturation" + _NPN, optional=True),
        Input("vce_sat_v", "V", "collector-emitter voltage in saturation" + _NPN, optional=True, minimum=0),
        positive("ic_max_a", "A", "transistor's collector current rating" + _NPN, optional=True),
        positive("power_max_w", "W", "transistor's dissipation rating"),
        *(_mosfet_input(name) for name in channel_mosfet.MOSFET_ONLY),
        bjt_drive.VCE_SAT_FORCED_BETA,
        bjt_drive.BASE_JUNCTIONS,
        bjt_drive.VCEO_MAX_V,
        bjt_drive.RBE_OHM,
        positive("vf_typ_v", "V", "typical LED forward voltage"),
        positive("vf_min_v", "V", "lowest LED forward voltage"),
        positive("vf_max_v", "V", "highest LED forward voltage"),
        positive("if_max_a", "A", "LED continuous current rating"),
        _count("leds_in_series", "LEDs in each string"),
        _count("strings", "parallel strings per channel, each with its own resistor", 1, 10_000),
        positive("current_a", "A", "target current per string"),
        fraction("duty_cycle", "PWM duty cycle (or give on_time_s and period_s)", optional=True),
        Input("on_time_s", "s", "PWM on time per period", optional=True, minimum=0),
        positive("period_s", "s", "PWM period", optional=True),
        _count("channels", "identical channels sharing the supply", 1),
        Input("e_series", "", "standard resistor series", "E24", choices=E_SERIES),
        bjt_drive.FORCED_BETA,
        Input(
            "resistor_tolerance",
            "dimensionless",
            "tolerance of both resistors; absent: the series' own",
            optional=True,
            minimum=0,
            maximum=1,
        ),
        Input(
            "configuration",
            "",
            "front stage: non_inverting or inverting",
            "non_inverting",
            choices=("non_inverting", "inverting"),
        ),
        positive("gain", "V/V", "front stage closed-loop gain magnitude", optional=True),
        positive("gbw_hz", "Hz", "front stage op-amp gain-bandwidth product", optional=True),
        positive("open_loop_gain", "V/V", "front stage op-amp DC open-loop gain", optional=True),
        positive("slew_rate_v_per_s", "V/s", "front stage op-amp slew rate", optional=True),
        Input("output_headroom_v", "V", "front stage output headroom to each rail", optional=True, minimum=0),
        positive("signal_hz", "Hz", "front stage signal frequency", optional=True),
        positive("amplitude_v", "V", "front stage output peak amplitude", optional=True),
        positive("opamp_supply_min_v", "V", "front stage op-amp's lowest rated total supply span", optional=True),
        positive("opamp_supply_max_v", "V", "front stage op-amp's highest rated total supply span", optional=True),
        Input("input_offset_v", "V", "front stage op-amp input offset voltage (magnitude)", optional=True, minimum=0),
        positive("output_offset_max_v", "V", "largest front stage output offset the design allows", optional=True),
        *opamp_windows.HEADROOM_INPUTS,
        opamp_windows.REFERENCE_V,
        opamp_dc_error.RF_OHM,
        opamp_dc_error.PLUS_INPUT_OHM,
        *opamp_dc_error.BIAS_INPUTS,
        opamp_dc_error.OUTPUT_ERROR_MAX_V,
        *ADC_INPUTS,
        *opamp_noise.NOISE_INPUTS,
        *opamp_stability.PART_INPUTS,
        *opamp_stability.LOAD_INPUTS,
        thermal_inputs.AMBIENT_C,
        Input(
            "ambient_min_c",
            "degC",
            "coldest ambient in service (a cold start); absent: ambient_c",
            optional=True,
            minimum=-60,
            maximum=200,
        ),
        Input(
            "ambient_max_c",
            "degC",
            "hottest ambient in service; absent: ambient_c",
            optional=True,
            minimum=-60,
            maximum=200,
        ),
        *thermal_inputs.TRANSISTOR,
        *thermal_inputs.LED,
        *pwm_timing.BIPOLAR_TIMES,
        *pwm_timing.PWM_INPUTS,
        Input(
            "samples",
            "dimensionless",
            "Monte Carlo builds for the yield (0: no yield)",
            monte_carlo.DEFAULT_SAMPLES,
            minimum=0,
            maximum=monte_carlo.MAX_SAMPLES,
            integer=True,
        ),
        Input("seed", "dimensionless", "Monte Carlo seed", 0, minimum=0, maximum=2**32 - 1, integer=True),
        Input(
            "vf_model",
            "",
            "Monte Carlo LED forward voltages: one_reel (every LED of a build from one forward-voltage bin) "
            "or independent (LEDs mixed from many reels)",
            monte_carlo.DEFAULT_VF_MODEL,
            choices=monte_carlo.VF_MODELS,
        ),
        Input(
            "vf_bin_width_v",
            "V",
            "width of a reel's forward-voltage bin, for vf_model one_reel (a typical bin step, from memory)",
            monte_carlo.DEFAULT_VF_BIN_WIDTH_V,
            minimum=0,
            maximum=monte_carlo.MAX_VF_BIN_WIDTH_V,
        ),
    ),
    roles=(
        Role(
            "supply",
            "supply",
            (
                ("supply_v", "supply_v"),
                ("supply_tolerance", "supply_tolerance"),
                ("supply_min_v", "supply_min_v"),
                ("supply_max_v", "supply_max_v"),
                ("current_max_a", "current_max_a"),
                ("capacity_ah", "capacity_ah"),
            ),
        ),
        Role(
            "driver",
            "driver",
            (
                ("voh_v", "drive_high_v"),
                ("vol_v", "drive_low_v"),
                ("source_current_max_a", "source_current_max_a"),
                ("vdd_v", "drive_supply_v"),
            ),
        ),
        Role(
            "transistor",
            "bjt",
            (
                *((p, p) for p in ("hfe_min", "hfe_typ", "vbe_sat_v", "vce_sat_v", "ic_max_a", "power_max_w")),
                *bjt_drive.TRANSISTOR_EXTRAS,
                *thermal_inputs.TRANSISTOR_PARAMETERS,
                *((p, p) for p in ("td_s", "tr_s", "ts_s", "tf_s")),
            ),
            must_have=(("polarity", "npn"),),
        ),
        Role(
            "led",
            "led",
            (
                *((p, p) for p in ("vf_typ_v", "vf_min_v", "vf_max_v", "if_max_a")),
                *thermal_inputs.LED_PARAMETERS,
            ),
        ),
        Role(
            "opamp",
            "opamp",
            (
                ("gbw_hz", "gbw_hz"),
                ("open_loop_gain", "open_loop_gain"),
                ("slew_rate_v_per_s", "slew_rate_v_per_s"),
                ("output_headroom_v", "output_headroom_v"),
                ("supply_min_v", "opamp_supply_min_v"),
                ("supply_max_v", "opamp_supply_max_v"),
                ("input_offset_v", "input_offset_v"),
                *opamp_windows.ROLE.provides,
                *opamp_dc_error.PARAMETERS[1:],
                *opamp_noise.PARAMETERS,
                *opamp_stability.PARAMETERS,
            ),
        ),
    ),
)
# The transistor role's other kind: a review's switch is an NPN or an N-channel MOSFET, by the part named.
# The review mounts a switch on a heat sink (``heatsink_k_per_w``), so it also reads the junction-to-case figure.
MOSFET_TRANSISTOR = Role(
    "transistor",
    "mosfet",
    (*((p, p) for p in mosfet_switch.PART_PARAMETERS), ("rth_jc_k_per_w", "rth_jc_k_per_w")),
    must_have=(("channel", "n"),),
)
ALTERNATIVE_ROLES = (MOSFET_TRANSISTOR,)

# The review's sections (``channel.ChannelReview``), in chain order.
STAGES = ("led_string", "switch", "supply", "front_stage", "thermal")

# The unit of each check's value, for axes and reports.
CHECK_UNITS = {
    "led_current_rating": "A", "headroom": "V", "resistor_rating": "W", "saturation": "", "vce_sat_guarantee": "",
    "driver_current": "A", "collector_current_rating": "A", "voltage_rating": "V", "power_rating": "W",
    "off_state": "V", "supply_average_current": "A", "supply_peak_current": "A", "gain_achievable": "",
    "signal_in_band": "Hz", "slew_rate": "V/s", "output_swing": "V",
    "opamp_supply_min": "V", "opamp_supply_max": "V", "output_offset": "V",
    "led_junction_temperature": "°C", "led_thermal_runaway": "°C",
    "resistor_derated_power": "W", "transistor_junction_temperature": "°C", "transistor_derated_power": "W",
    "input_common_mode_low": "V", "input_common_mode_high": "V", "output_swing_low": "V", "output_swing_high": "V",
    "output_error": "V", "noise_bits": "", "phase_margin": "deg",
    "shortest_pulse_covers_edges": "s", "flicker_low_risk": "Hz",
    "gate_reaches_stated_drive": "V", "edges_within_wanted_time": "s", "pin_peak_current": "A",
    "drain_current_rating": "A", "drain_voltage_rating": "V",
}  # fmt: skip
