"""``/review/channel``: the whole-channel review as a form, starting with the greenhouse demo channel, and its
answer as a page (verdict, cautions, bill of materials, the Monte Carlo histogram and the stages' plots, checks)
or JSON (rules: calcsvc.web.pages.common)."""

from __future__ import annotations

import re
from collections.abc import Mapping
from typing import Any

from flask import Response, jsonify, render_template, request, url_for
from markupsafe import Markup
from marshmallow import Schema, ValidationError

from calcsvc.core import channel as channel_review
from calcsvc.core import monte_carlo, pwm_timing
from calcsvc.core.outcome import DomainError
from calcsvc.data.store import PartStore, PartView
from calcsvc.service.demo import demo_channel
from calcsvc.service.errors import ServiceError
from calcsvc.service.parts import part_id_field
from calcsvc.service.review import distribution, run_review
from calcsvc.units import VOLTAGE_RATIO
from calcsvc.web.auth import database
from calcsvc.web.images import check_histogram, image_response
from calcsvc.web.metrics import record_calculation
from calcsvc.web.pages.common import bp, shown
from calcsvc.web.problems import Problem, service_problem
from calcsvc.web.quantity import Quantity
from calcsvc.web.review_front import front_stage_html
from calcsvc.web.review_report import (
    heat_line,
    number,
    render_bom_html,
    render_cautions_html,
    render_markdown,
    render_table_html,
    switch_line,
)

# What a value of the channel form may hold: printable ASCII and the unit symbols, 80 characters at most
# (no control characters or NUL, which PostgreSQL refuses, and nothing worth parsing at length).
_FORM_VALUE = re.compile(r"[\x20-\x7eµμΩ·]{1,80}")

# The front stage's circuit around the op-amp: its windows, DC error, noise and stability (calcsvc.core.channel_front).
FRONT_CIRCUIT: dict[str, Quantity] = {
    "reference_v": Quantity("V", minimum=0),
    "rf_ohm": Quantity("ohm", minimum=0),
    "plus_input_ohm": Quantity("ohm", minimum=0),
    "adc_full_scale_v": Quantity("V", minimum=0, exclusive_minimum=True),
    "adc_bits": Quantity("dimensionless", minimum=1, maximum=32, integer=True),
    "output_error_max_v": Quantity("V", minimum=0, exclusive_minimum=True),
    "load_capacitance_f": Quantity("F", minimum=0, exclusive_minimum=True),
    "isolation_ohm": Quantity("ohm", minimum=0),
}
FRONT_CIRCUIT_FIELDS = (
    ("reference_v", "Reference the signal is centred on", "in V, single supply: 6 V"),
    ("rf_ohm", "Feedback resistor", "in Ω, or with a unit: 100 kohm"),
    ("plus_input_ohm", "Source resistance at the + input", "in Ω, or with a unit: 1 kohm"),
    ("adc_full_scale_v", "Converter full scale", "in V: the input span"),
    ("adc_bits", "Converter bits", "a whole number"),
    ("output_error_max_v", "Largest DC output error allowed", "in V, e.g. half an LSB: 1.2 mV"),
    ("load_capacitance_f", "Capacitive load on the output", "in F, or with a unit: 1 nF"),
    ("isolation_ohm", "Isolation resistor to that load", "in Ω; empty: none"),
)
FRONT_STAGE = ("gain", "signal_hz", "amplitude_v", *FRONT_CIRCUIT)
# Selects of the channel form: role → (label, what it lists, the part kinds it takes with a required parameter value).
CHANNEL_ROLES: dict[str, tuple[str, str, tuple[tuple[str, tuple[str, str] | None], ...]]] = {
    "supply": ("Supply", "supply", (("supply", None),)),
    "driver": ("Driver pin", "driver", (("driver", None),)),
    "transistor": (
        "Switch",
        "npn bjt or n-channel mosfet",
        (("bjt", ("polarity", "npn")), ("mosfet", ("channel", "n"))),
    ),
    "led": ("LED", "led", (("led", None),)),
    "opamp": ("Front-stage op-amp", "opamp", (("opamp", None),)),
}

ChannelForm = Schema.from_dict(
    {
        **{role: part_id_field(required=role != "opamp") for role in CHANNEL_ROLES},
        "leds_in_series": Quantity("dimensionless", minimum=1, maximum=1000, integer=True),
        "strings": Quantity("dimensionless", minimum=1, maximum=10000, integer=True),
        "channels": Quantity("dimensionless", minimum=1, maximum=10000, integer=True),
        "resistor_tolerance": Quantity("dimensionless", minimum=0, maximum=1),
        "gate_pulldown_ohm": Quantity("ohm", minimum=0, exclusive_minimum=True),
        "led_rth_ba_k_per_w": Quantity("K/W", minimum=0),
        **{name: Quantity("V", minimum=0, exclusive_minimum=True) for name in ("vf_min_v", "vf_typ_v", "vf_max_v")},
        "current_a": Quantity("A", minimum=0, exclusive_minimum=True),
        "duty_cycle": Quantity("dimensionless", minimum=0, maximum=1),
        "pwm_frequency_hz": Quantity("Hz", minimum=0, exclusive_minimum=True),
        "pwm_resolution_bits": Quantity("dimensionless", minimum=1, maximum=pwm_timing.MAX_BITS, integer=True),
        "gain": Quantity(VOLTAGE_RATIO, minimum=0, exclusive_minimum=True),
        "signal_hz": Quantity("Hz", minimum=0, exclusive_minimum=True),
        "amplitude_v": Quantity("V", minimum=0, exclusive_minimum=True),
        "ambient_c": Quantity("degC", minimum=-60, maximum=200),
        "ambient_min_c": Quantity("degC", minimum=-60, maximum=200),
        "ambient_max_c": Quantity("degC", minimum=-60, maximum=200),
        **FRONT_CIRCUIT,
        "samples": Quantity("dimensionless", minimum=0, maximum=monte_carlo.MAX_SAMPLES, integer=True),
        "seed": Quantity("dimensionless", minimum=0, maximum=2**32 - 1, integer=True),
    },
    name="ChannelForm",
)

# The form as the demo fills it: the greenhouse channel (calcsvc.service.demo), every value as text.
DEMO_CHANNEL: dict[str, str] = {k: str(v) for k, v in demo_channel().items() if k in ChannelForm._declared_fields}


# --- the channel review ---------------------------------------------------------------------------------------

# The form's number fields: (name, label, hint).
CHANNEL_FIELDS: dict[str, tuple[tuple[str, str, str], ...]] = {
    "Arrangement": (
        ("leds_in_series", "LEDs in series per string", "a whole number"),
        ("strings", "Strings per channel", "a whole number; each string has its own resistor"),
        ("current_a", "Current per string", "in A, or with a unit: 20 mA"),
        ("duty_cycle", "PWM duty cycle", "a fraction from 0 to 1"),
        ("pwm_frequency_hz", "PWM frequency", "in Hz, or with a unit: 2 kHz (no PWM timing if empty)"),
        ("pwm_resolution_bits", "PWM resolution", "in bits, a whole number (8 if empty)"),
        ("channels", "Channels on the supply", "a whole number"),
        ("resistor_tolerance", "Resistor tolerance", "a fraction, 0.01 for 1 % parts (the series' own if empty)"),
        ("gate_pulldown_ohm", "Gate pull-down (MOSFET switch)", "in Ω, or with a unit: 100 kohm (none if empty)"),
    ),
    "LED reel's forward-voltage bin (optional)": (
        ("vf_min_v", "Lowest forward voltage", "in V, from the reel's label (the LED part's if empty)"),
        ("vf_typ_v", "Typical forward voltage", "in V (the LED part's if empty)"),
        ("vf_max_v", "Highest forward voltage", "in V (the LED part's if empty)"),
    ),
    "Front stage (used with an op-amp)": (
        ("gain", "Preamp gain", "V/V, non-inverting"),
        ("signal_hz", "Signal frequency", "in Hz, or with a unit: 1 kHz"),
        ("amplitude_v", "Output amplitude, peak", "in V, or with a unit: 500 mV"),
    ),
    "Temperature": (
        ("ambient_c", "Ambient", "in °C: the enclosure's air (25 °C if empty)"),
        ("ambient_min_c", "Coldest ambient", "in °C: a cold start (the ambient if empty)"),
        ("ambient_max_c", "Hottest ambient", "in °C: the hottest expected day (the ambient if empty)"),
        (
            "led_rth_ba_k_per_w",
            "LED board to air, per LED",
            "in K/W: the board's heat sinking (the LED part's if empty)",
        ),
    ),
    "Front-stage circuit (used with an op-amp)": FRONT_CIRCUIT_FIELDS,
    "Production yield": (
        ("samples", "Simulated builds", "a whole number; 0: no yield"),
        ("seed", "Random seed", "a whole number; the same seed gives the same builds"),
    ),
}


def channel_body(form: Mapping[str, str]) -> dict[str, Any]:
    """The review's request body from the form; a Problem naming each bad field."""
    given = {k: v.strip() for k, v in form.items() if k in ChannelForm._declared_fields and v.strip()}
    unreadable = {
        k: [f"{shown(v)} is not a value: at most 80 characters of text, digits and units"]
        for k, v in given.items()
        if _FORM_VALUE.fullmatch(v) is None
    }
    if unreadable:
        raise Problem(422, "invalid input: " + ", ".join(sorted(unreadable)), "validation", unreadable)
    if "opamp" not in given:
        given = {k: v for k, v in given.items() if k not in FRONT_STAGE}
    try:
        body: dict[str, Any] = ChannelForm().load(given)
    except ValidationError as exc:
        errors = {k: list(v) for k, v in exc.normalized_messages().items()}
        raise Problem(422, "invalid input: " + ", ".join(sorted(errors)), "validation", errors) from exc
    for name in ("leds_in_series", "strings", "channels", "samples", "seed", "adc_bits", "pwm_resolution_bits"):
        if name in body:
            body[name] = int(body[name])
    return body


def _options(store: PartStore) -> dict[str, list[PartView]]:
    options: dict[str, list[PartView]] = {}
    for role, (_, _, kinds) in CHANNEL_ROLES.items():
        options[role] = []
        for kind, needs in kinds:
            parts, _ = store.list(kind, None, 0, 500)
            options[role] += [
                p for p in parts if p.status != "retired" and (needs is None or p.parameters.get(needs[0]) == needs[1])
            ]
    return options


def stage_plots(review: dict[str, Any]) -> list[tuple[str, str]]:
    """(title, SVG address) of each stage's plot at the reviewed design, drawn from its pinned parts."""
    given = review["inputs"]
    pins = {p["role"]: p for p in review["parts"]}

    def pinned(*roles: str) -> dict[str, Any]:
        found = {}
        for role in roles:
            if role in pins:
                found.update({role: pins[role]["part_id"], f"{role}_revision": pins[role]["revision"]})
        return found

    on_supply = {"supply_v": given["supply_v"], "supply_tolerance": given.get("supply_tolerance", 0.0)}
    led = {
        **(pinned("supply") or on_supply),
        **pinned("led", "transistor"),
        **{k: given[k] for k in ("leds_in_series", "strings", "current_a", "e_series")},
    }
    if "led" not in pins:
        led.update({k: given[k] for k in ("vf_typ_v", "vf_min_v", "vf_max_v", "if_max_a")})
    plots = [("LED string current against supply voltage", url_for("plots.led-string-svg", **led))]
    if review["stages"]["front_stage"] is not None and "opamp" in pins:
        opamp = {**pinned("opamp"), "gain": given["gain"], "configuration": given["configuration"]}
        plots.append(
            ("Front stage: gain and phase", url_for("plots.closed-loop-svg", **opamp, signal_hz=given["signal_hz"]))
        )
        slew = {
            **pinned("opamp"),
            "supply_v": given["supply_v"],
            "frequency_hz": given["signal_hz"],
            "amplitude_v": given["amplitude_v"],
        }
        plots.append(("Front stage: slew and swing limits", url_for("plots.slew-limit-svg", **slew)))
    return plots


def _reviewed(body: dict[str, Any]) -> dict[str, Any]:
    review = run_review(database(), body)
    record_calculation(channel_review.NAME, 1)
    return review


@bp.get("/channel")
def channel() -> Response:
    submitted = "supply" in request.args
    form: Mapping[str, str] = request.args if submitted else DEMO_CHANNEL
    with database().transaction() as session:
        options = _options(PartStore(session))
    review, errors, message, status = None, {}, None, 200
    if submitted:
        try:
            review = _reviewed(channel_body(form))
        except (Problem, ServiceError) as exc:
            problem = exc if isinstance(exc, Problem) else service_problem(exc)
            errors, message, status = problem.errors or {}, problem.detail, problem.status
        except DomainError as exc:
            for violation in exc.violations:
                errors.setdefault(violation.field, []).append(violation.message)
            message, status = "the inputs are physically impossible", 422
    query = {k: v for k, v in form.items() if k in ChannelForm._declared_fields}
    page = render_template(
        "review/channel.html",
        form=form,
        options=options,
        roles=CHANNEL_ROLES,
        fields=CHANNEL_FIELDS,
        review=review,
        checks_table=Markup(render_table_html(review)) if review else None,  # the report's tables, escaped there
        bom=Markup(render_bom_html(review)) if review else None,
        cautions=Markup(render_cautions_html(review)) if review else None,
        histogram_url=url_for(".channel_histogram", **query) if review and review["yield"] else None,
        plots=stage_plots(review) if review else [],
        front_stage=Markup(front_stage_html(review, number, level=3)) if review else None,  # escaped there too
        report=render_markdown(review) if review else None,
        heat=heat_line(review) if review else None,
        switch=switch_line(review) if review else None,
        number=number,
        errors=errors,
        message=message,
        json_url=url_for(".channel_json", **query) if review else None,
    )
    return Response(page, status=status)


@bp.get("/channel/histogram.svg")
def channel_histogram() -> Response:
    """The form's channel's Monte Carlo histogram (its tightest or most failing check), for the result page."""
    found = distribution(database(), channel_body(request.args))
    record_calculation(channel_review.NAME, 1)
    return image_response(check_histogram(found, "svg"))


@bp.get("/channel.json")
def channel_json() -> Response:
    """The review of the form's channel as JSON (errors as problem documents, as everywhere in the API)."""
    return jsonify(_reviewed(channel_body(request.args)))
