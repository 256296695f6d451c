"""The calculations the API offers: their inputs with units, the part roles that may supply them, and
how a table of input columns becomes the core's inputs. Single requests, query-string requests and batches
all read this one table."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from calcsvc.core import bjt_switch, closed_loop, led_string, slew
from calcsvc.core.eseries import SERIES
from calcsvc.core.outcome import Outcome, Violation

Columns = dict[str, np.ndarray]
E_SERIES = tuple(SERIES)


@dataclass(frozen=True)
class Input:
    name: str
    unit: str  # pint spelling of the SI unit; "" for a choice
    description: str
    default: float | str | None = None
    optional: bool = False  # may stay absent (NaN to the core)
    minimum: float | None = None
    exclusive_minimum: bool = False
    maximum: float | None = None
    integer: bool = False
    choices: tuple[str, ...] = ()

    @property
    def required(self) -> bool:
        return self.default is None and not self.optional


@dataclass(frozen=True)
class Role:
    """A part that may supply some inputs: ``provides`` maps part parameters to input names."""

    name: str
    kind: str
    provides: tuple[tuple[str, str], ...]
    must_have: tuple[tuple[str, str], ...] = ()  # (parameter, value) the part must carry, e.g. polarity npn


@dataclass(frozen=True)
class Form:
    """The inputs of an endpoint and the part roles that may supply them."""

    name: str
    summary: str
    version: str
    inputs: tuple[Input, ...]
    roles: tuple[Role, ...]


@dataclass(frozen=True)
class Calculation(Form):
    results: tuple[tuple[str, str], ...]  # (name, description with unit)
    make_inputs: Callable[[Columns], Any]
    validate: Callable[[Any], list[Violation]]
    compute: Callable[[Any], Outcome]
    query_only_scalars: bool = True
    notes: tuple[str, ...] = field(default=())

    def input(self, name: str) -> Input:
        return next(i for i in self.inputs if i.name == name)


def positive(name: str, unit: str, description: str, **kwargs: Any) -> Input:
    return Input(name, unit, description, minimum=0, exclusive_minimum=True, **kwargs)


def fraction(name: str, description: str, **kwargs: Any) -> Input:
    return Input(name, "dimensionless", description, minimum=0, maximum=1, **kwargs)


def _closed_loop_inputs(c: Columns) -> closed_loop.ClosedLoopInputs:
    return closed_loop.ClosedLoopInputs(
        inverting=c["configuration"] == "inverting",
        gain=c["gain"],
        rf_ohm=c["rf_ohm"],
        rg_ohm=c["rg_ohm"],
        gbw_hz=c["gbw_hz"],
        open_loop_gain=c["open_loop_gain"],
        stages=c["stages"],
        signal_hz=c["signal_hz"],
        sweep_start_hz=c["sweep_start_hz"],
        sweep_stop_hz=c["sweep_stop_hz"],
        sweep_points=c["sweep_points"],
    )


def _fields(cls: type, c: Columns) -> Any:
    return cls(**{name: c[name] for name in cls.__dataclass_fields__})


CLOSED_LOOP = Calculation(
    name=closed_loop.NAME,
    summary="Closed-loop gain, bandwidth, rise time and response of a single-pole op-amp gain stage",
    version=closed_loop.VERSION,
    inputs=(
        Input(
            "configuration", "", "non_inverting or inverting", "non_inverting", choices=("non_inverting", "inverting")
        ),
        positive("gain", "dimensionless", "closed-loop gain magnitude (or give rf_ohm and rg_ohm)", optional=True),
        positive("rf_ohm", "ohm", "feedback resistor", optional=True),
        positive("rg_ohm", "ohm", "gain-setting resistor to ground (or input resistor when inverting)", optional=True),
        positive("gbw_hz", "Hz", "op-amp gain-bandwidth product"),
        positive("open_loop_gain", "dimensionless", "DC open-loop gain; absent: ideal at DC", optional=True),
        Input("stages", "dimensionless", "identical cascaded stages", 1, minimum=1, maximum=20, integer=True),
        positive("signal_hz", "Hz", "signal frequency to evaluate", optional=True),
        positive("sweep_start_hz", "Hz", "first frequency of a log sweep", optional=True),
        positive("sweep_stop_hz", "Hz", "last frequency of a log sweep", optional=True),
        Input(
            "sweep_points", "dimensionless", "points in the sweep", optional=True, minimum=2, maximum=2000, integer=True
        ),
    ),
    roles=(Role("opamp", "opamp", (("gbw_hz", "gbw_hz"), ("open_loop_gain", "open_loop_gain"))),),
    results=(
        ("noise_gain", "1 + Rf/Rg, the gain the loop sees [V/V]"),
        ("signal_gain", "ideal signed signal gain [V/V]"),
        ("closed_loop_gain", "signed DC gain with the finite open-loop gain [V/V]"),
        ("gain_error_pct", "(closed_loop_gain - ideal)/ideal x 100 [%]"),
        ("bandwidth_hz", "-3 dB frequency of one stage [Hz]"),
        ("cascade_bandwidth_hz", "-3 dB frequency of all stages [Hz]"),
        ("rise_time_s", "10-90 % rise time of one stage [s]"),
        ("cascade_rise_time_s", "10-90 % rise time of all stages [s]"),
        ("gain_at_signal_db", "gain of all stages at signal_hz [dB]"),
        ("phase_at_signal_deg", "phase lag from finite bandwidth at signal_hz [deg]"),
        ("sweep", "frequency_hz [Hz], gain_db [dB] and phase_deg [deg] arrays, when a sweep was asked for"),
    ),
    make_inputs=_closed_loop_inputs,
    validate=closed_loop.validate,
    compute=closed_loop.compute,
)

SLEW = Calculation(
    name=slew.NAME,
    summary="Largest undistorted amplitude, full-power bandwidth and required slew rate of an op-amp output",
    version=slew.VERSION,
    inputs=(
        positive("slew_rate_v_per_s", "V/s", "op-amp slew rate"),
        Input("output_headroom_v", "V", "how close the output swings to each rail", optional=True, minimum=0),
        positive("frequency_hz", "Hz", "signal frequency", optional=True),
        positive("amplitude_v", "V", "peak amplitude", optional=True),
        Input("waveform", "", "sine or triangle", "sine", choices=("sine", "triangle")),
        positive("supply_v", "V", "total rail-to-rail supply span", optional=True),
        Input("step_v", "V", "size of a step to slew through", optional=True),
    ),
    roles=(
        Role(
            "opamp", "opamp", (("slew_rate_v_per_s", "slew_rate_v_per_s"), ("output_headroom_v", "output_headroom_v"))
        ),
    ),
    results=(
        ("slew_limited_amplitude_v", "largest peak amplitude the slew rate allows at frequency_hz [V]"),
        ("swing_limited_amplitude_v", "largest peak amplitude the supply and headroom allow [V]"),
        ("max_amplitude_v", "the smaller of the two [V]"),
        ("max_amplitude_vpp", "the same, peak to peak [V]"),
        ("full_power_bandwidth_hz", "highest frequency at which amplitude_v is undistorted [Hz]"),
        ("required_slew_rate_v_per_s", "slew rate amplitude_v at frequency_hz needs [V/s]"),
        ("slew_limited", "true when the required slew rate exceeds the op-amp's"),
        ("step_slew_time_s", "time to slew through step_v [s]"),
    ),
    make_inputs=lambda c: slew.SlewInputs(
        **{k: c[k] for k in slew.SlewInputs.__dataclass_fields__ if k != "triangle"},
        triangle=c["waveform"] == "triangle",
    ),
    validate=slew.validate,
    compute=slew.compute,
)

BJT_SWITCH = Calculation(
    name=bjt_switch.NAME,
    summary="Base resistor for a saturated NPN low-side switch, with drive, rating and dissipation checks",
    version=bjt_switch.VERSION,
    inputs=(
        positive("hfe_min", "dimensionless", "lowest DC current gain at the operating current"),
        positive("vbe_sat_v", "V", "base-emitter voltage in saturation"),
        Input("vce_sat_v", "V", "collector-emitter voltage in saturation", minimum=0),
        positive("ic_max_a", "A", "transistor's collector current rating"),
        positive("power_max_w", "W", "transistor's dissipation rating"),
        positive("collector_current_a", "A", "load current when on"),
        Input("drive_high_v", "V", "driver output voltage when on"),
        Input("drive_low_v", "V", "driver output voltage when off", 0.0),
        Input("forced_beta", "dimensionless", "Ic/Ib to design for (10: common practice)", 10.0, minimum=1),
        Input("e_series", "", "standard resistor series", "E24", choices=E_SERIES),
        positive("rbe_ohm", "ohm", "base-emitter pull-down resistor", optional=True),
        positive("driver_current_max_a", "A", "largest current the driver may source", optional=True),
        fraction("duty_cycle", "fraction of time on", default=1.0),
    ),
    roles=(
        Role(
            "transistor",
            "bjt",
            (
                ("hfe_min", "hfe_min"),
                ("vbe_sat_v", "vbe_sat_v"),
                ("vce_sat_v", "vce_sat_v"),
                ("ic_max_a", "ic_max_a"),
                ("power_max_w", "power_max_w"),
            ),
            must_have=(("polarity", "npn"),),
        ),
        Role(
            "driver",
            "driver",
            (("voh_v", "drive_high_v"), ("vol_v", "drive_low_v"), ("source_current_max_a", "driver_current_max_a")),
        ),
    ),
    results=(
        ("base_current_required_a", "collector current / forced beta [A]"),
        ("rb_exact_ohm", "base resistor giving exactly the required base current [ohm]"),
        ("rb_ohm", "largest standard value not above the exact one [ohm]"),
        ("drive_current_a", "current the driver sources through rb_ohm [A]"),
        ("base_current_a", "current into the base after the pull-down's share [A]"),
        ("forced_beta_actual", "collector current / base current with rb_ohm [A/A]"),
        ("saturation_margin", "hfe_min / forced_beta_actual"),
        ("transistor_power_w", "(Vce_sat Ic + Vbe_sat Ib) x duty cycle [W]"),
    ),
    make_inputs=lambda c: _fields(bjt_switch.BjtSwitchInputs, c),
    validate=bjt_switch.validate,
    compute=bjt_switch.compute,
)

LED_STRING = Calculation(
    name=led_string.NAME,
    summary="Series resistor, worst-case current and dissipation of LED strings on one supply",
    version=led_string.VERSION,
    inputs=(
        positive("supply_v", "V", "supply voltage"),
        Input("supply_tolerance", "dimensionless", "supply tolerance as a fraction", 0.0, minimum=0, maximum=1, **{}),
        positive("vf_typ_v", "V", "typical LED forward voltage"),
        positive("vf_min_v", "V", "lowest LED forward voltage"),
        positive("vf_max_v", "V", "highest LED forward voltage"),
        positive("if_max_a", "A", "LED continuous current rating"),
        Input("leds_in_series", "dimensionless", "LEDs in each string", minimum=1, maximum=1000, integer=True),
        Input(
            "strings",
            "dimensionless",
            "parallel strings, each with its own resistor",
            1,
            minimum=1,
            maximum=10000,
            integer=True,
        ),
        positive("current_a", "A", "target current per string"),
        Input("switch_drop_v", "V", "voltage lost in the switch (a transistor's Vce_sat)", 0.0, minimum=0),
        Input("e_series", "", "standard resistor series", "E24", choices=E_SERIES),
        Input(
            "resistor_tolerance",
            "dimensionless",
            "resistor tolerance; absent: the series' own",
            optional=True,
            minimum=0,
            maximum=1,
        ),
    ),
    roles=(
        Role("supply", "supply", (("supply_v", "supply_v"), ("supply_tolerance", "supply_tolerance"))),
        Role(
            "led",
            "led",
            (("vf_typ_v", "vf_typ_v"), ("vf_min_v", "vf_min_v"), ("vf_max_v", "vf_max_v"), ("if_max_a", "if_max_a")),
        ),
        Role("transistor", "bjt", (("vce_sat_v", "switch_drop_v"),)),
    ),
    results=(
        ("resistor_exact_ohm", "resistor giving exactly the target current [ohm]"),
        ("resistor_ohm", "smallest standard value not below the exact one [ohm]"),
        ("current_a", "nominal current per string with resistor_ohm [A]"),
        ("current_min_a", "worst-case lowest current per string [A]"),
        ("current_max_a", "worst-case highest current per string [A]"),
        ("resistor_power_w", "nominal resistor dissipation [W]"),
        ("resistor_power_max_w", "worst-case resistor dissipation [W]"),
        ("resistor_rating_w", "smallest standard rating of at least twice the worst case [W]"),
        ("led_power_w", "power in the LEDs of one string [W]"),
        ("total_current_a", "current of all strings [A]"),
        ("efficiency", "LED power / supply power"),
        ("headroom_v", "nominal voltage across the resistor [V]"),
    ),
    make_inputs=lambda c: _fields(led_string.LedStringInputs, c),
    validate=led_string.validate,
    compute=led_string.compute,
)

FLAT_CALCULATIONS: dict[str, Calculation] = {c.name: c for c in (CLOSED_LOOP, SLEW, BJT_SWITCH, LED_STRING)}
