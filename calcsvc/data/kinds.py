"""Part kinds: their parameters (SI units, unit in the name) and the rules a stored part must satisfy."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

# Limits on what a part stores as text: every list, page and export repeats it to every reader.
MAX_TEXT_LENGTH = 64  # a text parameter, such as an LED's colour
MAX_DESCRIPTION_LENGTH = 500


@dataclass(frozen=True)
class Param:
    name: str
    unit: str  # pint spelling of the SI unit, "" for text and choices
    description: str
    optional: bool = False
    positive: bool = True  # strictly greater than zero
    signed: bool = False  # any sign (with positive=False): a limit that may lie beyond a rail
    fraction: bool = False  # 0 <= value < 1
    choices: tuple[str, ...] = ()
    text: bool = False
    integer: bool = False
    negative: bool = False  # at most zero instead (a falling temperature coefficient)
    # Why no calculation uses it ("": some calculation's part role reads it); shown with the kind's parameters.
    informational: str = ""

    @property
    def numeric(self) -> bool:
        return not (self.choices or self.text)


# What the op-amp stage's windows, DC error, noise and stability read (calcsvc.core.opamp_*); optional, so a
# part stored before them stays valid (migration 0006 writes stated conservative values into stored parts).
OPAMP_STAGE_PARAMS = (
    Param("input_low_headroom_v", "V", "input common-mode range's end above the negative rail (negative: beyond "
          "it)", optional=True, positive=False, signed=True),
    Param("input_high_headroom_v", "V", "input common-mode range's end below the positive rail (negative: beyond "
          "it)", optional=True, positive=False, signed=True),
    Param("output_low_headroom_v", "V", "output swing's end above the negative rail", optional=True, positive=False),
    Param("output_high_headroom_v", "V", "output swing's end below the positive rail", optional=True, positive=False),
    Param("input_bias_current_a", "A", "input bias current (magnitude)", optional=True, positive=False),
    Param("input_offset_current_a", "A", "input offset current (magnitude)", optional=True, positive=False),
    Param("voltage_noise_v_per_rthz", "V/Hz**0.5", "input voltage noise density (white)", optional=True,
          positive=False),
    Param("current_noise_a_per_rthz", "A/Hz**0.5", "input current noise density (white)", optional=True,
          positive=False),
    Param("second_pole_hz", "Hz", "second open-loop pole", optional=True),
    Param("output_resistance_ohm", "ohm", "open-loop output resistance", optional=True, positive=False),
)  # fmt: skip

# Every switch kind's heat data (the channel review's thermal stage reads the same three of either).
TRANSISTOR_THERMAL_PARAMS = (
    Param("tj_max_c", "degC", "maximum junction temperature", optional=True),
    Param(
        "rth_ja_k_per_w",
        "K/W",
        "junction-to-ambient thermal resistance without a heat sink; absent: from power_max_w at 25 °C",
        optional=True,
    ),
    Param("rth_jc_k_per_w", "K/W", "junction-to-case thermal resistance, for a heat sink", optional=True),
)

KINDS: dict[str, tuple[Param, ...]] = {
    "opamp": (
        Param("gbw_hz", "Hz", "gain-bandwidth product"),
        Param("slew_rate_v_per_s", "V/s", "output slew rate"),
        Param("open_loop_gain", "V/V", "DC open-loop gain (a voltage ratio: dB are 20·log10)"),
        Param("supply_min_v", "V", "lowest total supply span"),
        Param("supply_max_v", "V", "highest total supply span"),
        Param("output_headroom_v", "V", "how close the output swings to each rail", positive=False),
        Param(
            "input_offset_v",
            "V",
            "input offset voltage (magnitude)",
            optional=True,
            positive=False,
        ),
        *OPAMP_STAGE_PARAMS,
    ),
    "bjt": (
        Param("polarity", "", "npn or pnp", choices=("npn", "pnp")),
        Param("hfe_min", "dimensionless", "lowest DC current gain over the datasheet range"),
        Param("hfe_typ", "dimensionless", "typical DC current gain"),
        Param("vbe_sat_v", "V", "base-emitter voltage in saturation"),
        Param("vce_sat_v", "V", "collector-emitter voltage in saturation", positive=False),
        Param("ic_max_a", "A", "continuous collector current rating"),
        Param("vceo_max_v", "V", "collector-emitter breakdown with open base"),
        Param("power_max_w", "W", "total dissipation rating at 25 °C ambient"),
        Param("vce_sat_forced_beta", "dimensionless", "Ic/Ib at which vce_sat_v is specified", optional=True),
        Param(
            "base_junctions", "dimensionless", "base-emitter junctions: 2 for a Darlington", optional=True, integer=True
        ),
        *TRANSISTOR_THERMAL_PARAMS,
        # Resistive-load switching times as a datasheet states them at its test ratio Ic/Ib.
        Param("td_s", "s", "turn-on delay time", optional=True),
        Param("tr_s", "s", "collector current rise time", optional=True),
        Param("ts_s", "s", "storage time out of saturation", optional=True),
        Param("tf_s", "s", "collector current fall time", optional=True),
    ),
    "led": (
        Param("color", "", "emitted colour, free text", text=True, informational="names the part for people"),
        Param("vf_typ_v", "V", "typical forward voltage at the test current"),
        Param("vf_min_v", "V", "lowest forward voltage at the test current"),
        Param("vf_max_v", "V", "highest forward voltage at the test current"),
        Param(
            "if_test_a",
            "A",
            "current at which the forward voltages are specified",
            informational="the datasheet's test condition: the forward voltages are used as given, so enter them "
            "for the design current when it differs much from this one",
        ),
        Param("if_max_a", "A", "continuous forward current rating"),
        Param("tj_max_c", "degC", "maximum junction temperature", optional=True),
        Param("rth_jb_k_per_w", "K/W", "junction-to-board thermal resistance", optional=True),
        Param("rth_ba_k_per_w", "K/W", "board-to-ambient thermal resistance, per LED", optional=True),
        Param(
            "vf_tempco_v_per_k",
            "V/K",
            "forward-voltage temperature coefficient (negative)",
            optional=True,
            positive=False,
            negative=True,
        ),
        Param(
            "if_derating_knee_c",
            "degC",
            "ambient above which the maximum current falls linearly to zero at tj_max_c",
            optional=True,
        ),
    ),
    "supply": (
        Param("supply_v", "V", "nominal output voltage"),
        Param(
            "supply_tolerance",
            "dimensionless",
            "± output tolerance as a fraction; absent: 0 (a battery gives its band instead)",
            optional=True,
            positive=False,
            fraction=True,
        ),
        # The band in service; absent: supply_v ± supply_tolerance.
        Param("supply_min_v", "V", "lowest output voltage in service (a battery: end of discharge)", optional=True),
        Param("supply_max_v", "V", "highest output voltage in service (a battery: fresh)", optional=True),
        Param("current_max_a", "A", "continuous current rating"),
        Param("capacity_ah", "A*h", "battery capacity", optional=True),
        Param(
            "source",
            "",
            "mains_adapter, battery or bench; absent: a battery when capacity_ah is given",
            optional=True,
            choices=("mains_adapter", "battery", "bench"),
            informational="chooses the standing safety cautions of every design on this supply",
        ),
    ),
    "mosfet": (
        Param("channel", "", "n or p", choices=("n", "p")),
        Param("vds_max_v", "V", "drain-source voltage rating"),
        Param("id_max_a", "A", "continuous drain current rating"),
        # On-resistance at up to three stated gate-source voltages, ordered by gate voltage.
        Param("vgs_1_v", "V", "lowest gate-source voltage at which an on-resistance is stated"),
        Param("rds_on_1_ohm", "ohm", "largest on-resistance at vgs_1_v, 25 °C"),
        Param("vgs_2_v", "V", "a higher stated gate-source voltage", optional=True),
        Param("rds_on_2_ohm", "ohm", "largest on-resistance at vgs_2_v, 25 °C", optional=True),
        Param("vgs_3_v", "V", "the highest stated gate-source voltage", optional=True),
        Param("rds_on_3_ohm", "ohm", "largest on-resistance at vgs_3_v, 25 °C", optional=True),
        Param("vgs_th_max_v", "V", "largest gate threshold voltage"),
        Param("qg_total_c", "C", "total gate charge at the datasheet's gate drive (at 4.5 V for a logic-level part)"),
        Param("power_max_w", "W", "total dissipation rating at 25 °C ambient"),
        *TRANSISTOR_THERMAL_PARAMS,
    ),
    "driver": (
        Param("voh_v", "V", "output high voltage at the rated source current"),
        Param("vol_v", "V", "output low voltage", positive=False),
        Param("source_current_max_a", "A", "largest current the pin may source"),
        Param("vdd_v", "V", "the pin's own supply, its high level at light load", optional=True),
    ),
}

# Cross-field rules: (lower, higher, strict).
ORDERED: dict[str, tuple[tuple[str, str, bool], ...]] = {
    "opamp": (("supply_min_v", "supply_max_v", True),),
    "bjt": (("hfe_min", "hfe_typ", False), ("vce_sat_v", "vceo_max_v", True)),
    "led": (
        ("vf_min_v", "vf_typ_v", False),
        ("vf_typ_v", "vf_max_v", False),
        ("if_test_a", "if_max_a", False),
        ("if_derating_knee_c", "tj_max_c", True),
    ),
    "driver": (("vol_v", "voh_v", True),),
    "mosfet": (
        ("vgs_th_max_v", "vgs_1_v", True),
        ("vgs_1_v", "vgs_2_v", True),
        ("vgs_2_v", "vgs_3_v", True),
        ("vgs_1_v", "vgs_3_v", True),
        # A higher gate voltage never raises the on-resistance.
        ("rds_on_2_ohm", "rds_on_1_ohm", False),
        ("rds_on_3_ohm", "rds_on_2_ohm", False),
        ("rds_on_3_ohm", "rds_on_1_ohm", False),
    ),
    "supply": (("supply_min_v", "supply_v", False), ("supply_v", "supply_max_v", False)),
}


# Parameters a part gives together or not at all: (first, second).
TOGETHER: dict[str, tuple[tuple[str, str], ...]] = {
    "mosfet": (("vgs_2_v", "rds_on_2_ohm"), ("vgs_3_v", "rds_on_3_ohm")),
}


def params_of(kind: str) -> dict[str, Param]:
    return {p.name: p for p in KINDS[kind]}


def validate_parameters(kind: str, parameters: dict[str, Any]) -> dict[str, str]:
    """Field errors of a part's parameters, keyed by parameter name (empty when the part is sound).

    Values must already be SI floats (or strings for choices and text).
    """
    if kind not in KINDS:
        return {"kind": f"unknown kind '{kind}'; one of {', '.join(KINDS)}"}
    spec = params_of(kind)
    errors: dict[str, str] = {}
    for name in parameters:
        if name not in spec:
            errors[name] = f"not a parameter of kind '{kind}'; expected {', '.join(spec)}"
    for name, param in spec.items():
        value = parameters.get(name)
        if value is None:
            if not param.optional:
                errors[name] = "required"
            continue
        if param.choices:
            if value not in param.choices:
                errors[name] = f"must be one of {', '.join(param.choices)}"
        elif param.text:
            if not isinstance(value, str) or not value.strip():
                errors[name] = "must be a non-empty string"
            elif len(value) > MAX_TEXT_LENGTH:
                errors[name] = f"must be at most {MAX_TEXT_LENGTH} characters"
        elif isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
            errors[name] = "must be a finite number"
        elif param.fraction and not 0 <= value < 1:
            errors[name] = "must be a fraction from 0 up to (not including) 1"
        elif param.negative:
            if value > 0:
                errors[name] = "must not be positive"
        elif param.positive and value <= 0:
            errors[name] = "must be greater than zero"
        elif param.integer and value != int(value):
            errors[name] = "must be a whole number"
        elif value < 0 and not param.signed:
            errors[name] = "must not be negative"
    for first, second in TOGETHER.get(kind, ()):
        if (parameters.get(first) is None) != (parameters.get(second) is None) and not ({first, second} & set(errors)):
            missing = second if parameters.get(second) is None else first
            errors[missing] = f"{first} and {second} are given together or not at all"
    for low, high, strict in ORDERED[kind]:
        a, b = parameters.get(low), parameters.get(high)
        if low in errors or high in errors or not isinstance(a, int | float) or not isinstance(b, int | float):
            continue
        if (a >= b) if strict else (a > b):
            errors[high] = f"{high} ({b:g}) must be {'greater than' if strict else 'at least'} {low} ({a:g})"
    return errors


def validate_part(kind: str, description: str, parameters: dict[str, Any]) -> dict[str, str]:
    """Field errors of a whole part: its parameters as ``validate_parameters`` says, and its description."""
    errors = validate_parameters(kind, parameters)
    if not isinstance(description, str) or len(description) > MAX_DESCRIPTION_LENGTH:
        errors["description"] = f"must be text of at most {MAX_DESCRIPTION_LENGTH} characters"
    return errors
