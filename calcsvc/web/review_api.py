"""``/v1/review/channel``: one verdict for a whole channel, from the driver pin to the LEDs to the supply."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
from flask import Response, current_app, request
from flask.views import MethodView
from flask_smorest import Blueprint
from marshmallow import Schema, fields

from calcsvc.core import channel, tolerance
from calcsvc.core.outcome import Outcome, raise_violations
from calcsvc.core.spec import E_SERIES, Input, InputSet, Role, fraction, positive
from calcsvc.service.calculate import columns_of, complete
from calcsvc.service.envelope import fingerprint, plain, row_notices
from calcsvc.service.resolve import resolve_parts
from calcsvc.web import plots
from calcsvc.web.auth import require_reader
from calcsvc.web.calc_schemas import CheckSchema, PartUsedSchema, request_schema
from calcsvc.web.metrics import record_calculation
from calcsvc.web.plots_api import image_response
from calcsvc.web.problems import Problem, error_response
from calcsvc.web.review_report import render_html, render_markdown

blp = Blueprint(
    "review",
    __name__,
    url_prefix="/v1/review",
    description="Whole-channel design review with worst case and production yield. Send Accept: text/markdown "
    "or text/html for a report a reviewer can read.",
)


def count(name: str, description: str, default: int | None = None, maximum: float = 1000) -> Input:
    return Input(name, "dimensionless", description, default, minimum=1, maximum=maximum, integer=True)


REVIEW = InputSet(
    name=channel.NAME,
    summary="Review a whole LED channel: string resistor, NPN switch, supply budget and front stage, "
    "nominal, worst case and yield",
    version=channel.VERSION,
    inputs=(
        positive("supply_v", "V", "supply voltage"),
        Input("supply_tolerance", "dimensionless", "supply tolerance as a fraction", 0.0, minimum=0, maximum=1),
        positive("current_max_a", "A", "supply current rating"),
        positive("capacity_ah", "A*h", "battery capacity", optional=True),
        Input("drive_high_v", "V", "driver output voltage when on"),
        Input("drive_low_v", "V", "driver output voltage when off", 0.0),
        positive("source_current_max_a", "A", "largest current the driver pin may source", optional=True),
        positive("hfe_min", "dimensionless", "lowest DC current gain"),
        positive("hfe_typ", "dimensionless", "typical DC current gain"),
        positive("vbe_sat_v", "V", "base-emitter voltage in saturation"),
        Input("vce_sat_v", "V", "collector-emitter voltage in saturation", minimum=0),
        positive("ic_max_a", "A", "transistor's collector current rating"),
        positive("power_max_w", "W", "transistor's dissipation rating"),
        positive("vf_typ_v", "V", "typical LED forward voltage"),
        positive("vf_min_v", "V", "lowest LED forward voltage"),
        positive("vf_max_v", "V", "highest LED forward voltage"),
        positive("if_max_a", "A", "LED continuous current rating"),
        count("leds_in_series", "LEDs in each string"),
        count("strings", "parallel strings per channel, each with its own resistor", 1, 10_000),
        positive("current_a", "A", "target current per string"),
        fraction("duty_cycle", "PWM duty cycle (or give on_time_s and period_s)", optional=True),
        Input("on_time_s", "s", "PWM on time per period", optional=True, minimum=0),
        positive("period_s", "s", "PWM period", optional=True),
        count("channels", "identical channels sharing the supply", 1),
        Input("e_series", "", "standard resistor series", "E24", choices=E_SERIES),
        Input("forced_beta", "dimensionless", "Ic/Ib to design for (10: common practice)", 10.0, minimum=1),
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
        positive("gain", "dimensionless", "front stage closed-loop gain magnitude", optional=True),
        positive("gbw_hz", "Hz", "front stage op-amp gain-bandwidth product", optional=True),
        positive("open_loop_gain", "dimensionless", "front stage op-amp DC open-loop gain", optional=True),
        positive("slew_rate_v_per_s", "V/s", "front stage op-amp slew rate", optional=True),
        Input("output_headroom_v", "V", "front stage output headroom to each rail", optional=True, minimum=0),
        positive("signal_hz", "Hz", "front stage signal frequency", optional=True),
        positive("amplitude_v", "V", "front stage output peak amplitude", optional=True),
        Input(
            "samples",
            "dimensionless",
            "Monte Carlo builds for the yield (0: no yield)",
            tolerance.DEFAULT_SAMPLES,
            minimum=0,
            maximum=tolerance.MAX_SAMPLES,
            integer=True,
        ),
        Input("seed", "dimensionless", "Monte Carlo seed", 0, minimum=0, maximum=2**32 - 1, integer=True),
    ),
    roles=(
        Role(
            "supply",
            "supply",
            (
                ("supply_v", "supply_v"),
                ("supply_tolerance", "supply_tolerance"),
                ("current_max_a", "current_max_a"),
                ("capacity_ah", "capacity_ah"),
            ),
        ),
        Role(
            "driver",
            "driver",
            (("voh_v", "drive_high_v"), ("vol_v", "drive_low_v"), ("source_current_max_a", "source_current_max_a")),
        ),
        Role(
            "transistor",
            "bjt",
            tuple((p, p) for p in ("hfe_min", "hfe_typ", "vbe_sat_v", "vce_sat_v", "ic_max_a", "power_max_w")),
            must_have=(("polarity", "npn"),),
        ),
        Role("led", "led", tuple((p, p) for p in ("vf_typ_v", "vf_min_v", "vf_max_v", "if_max_a"))),
        Role(
            "opamp",
            "opamp",
            tuple((p, p) for p in ("gbw_hz", "open_loop_gain", "slew_rate_v_per_s", "output_headroom_v")),
        ),
    ),
)
STAGES = ("led_string", "switch", "supply", "front_stage")
# An instance, not a class: webargs would build a new schema object on every request.
REVIEW_REQUEST = request_schema(REVIEW)()


def _refuse(field: str, message: str) -> Problem:
    return Problem(422, message, "validation", {field: [message]})


def duty_of(values: dict[str, Any]) -> float:
    """The duty cycle as given, or from on-time and period; neither: always on."""
    timed = [name for name in ("on_time_s", "period_s") if name in values]
    if "duty_cycle" in values and timed:
        raise _refuse("duty_cycle", "give duty_cycle or on_time_s with period_s, not both")
    if len(timed) == 1:
        missing = "period_s" if timed == ["on_time_s"] else "on_time_s"
        raise _refuse(missing, f"{missing} is required with {timed[0]}")
    if timed:
        if values["on_time_s"] > values["period_s"]:
            raise _refuse("on_time_s", f"on_time_s ({values['on_time_s']:g} s) cannot exceed period_s")
        return float(values["on_time_s"] / values["period_s"])
    return float(values.get("duty_cycle", 1.0))


def channel_inputs(values: dict[str, Any]) -> channel.ChannelInputs:
    columns = columns_of(REVIEW, [values])
    columns["duty_cycle"] = np.array([duty_of(values)])
    columns["inverting"] = columns["configuration"] == "inverting"
    return channel.ChannelInputs(**{name: columns[name] for name in channel.ChannelInputs.__dataclass_fields__})


def _stage_results(outcome: Outcome) -> dict[str, Any]:
    return {
        name: plain(values[0])
        for name, values in outcome.results.items()
        if values.ndim == 1 and not name.startswith("load_")
    }


def _check_entry(nominal: Any, worst: tolerance.WorstCheck, stage: str) -> dict[str, Any] | None:
    limit = float(nominal.limit[0])
    if math.isnan(limit):
        return None  # does not apply to this design (e.g. no front stage, pin rating unknown)
    return {
        "name": nominal.name,
        "stage": stage,
        "ok": bool(worst.check.ok[0]),
        "value": plain(float(nominal.value[0])),
        "limit": limit,
        "margin": plain(float(nominal.margin()[0])),
        "detail": nominal.detail,
        "nominal_ok": bool(nominal.ok[0]),
        "worst_case": {
            "value": plain(float(worst.check.value[0])),
            "limit": plain(float(worst.check.limit[0])),
            "margin": plain(float(worst.margin()[0])),
            "corner": worst.corner(0),
        },
    }


def review_document(values: dict[str, Any], parts: list[dict[str, Any]], warnings: list[str]) -> dict[str, Any]:
    inputs = channel_inputs(values)
    samples, seed = int(values["samples"]), int(values["seed"])
    raise_violations(tolerance.validate_monte_carlo(inputs, max(samples, 1), seed))
    worst = tolerance.worst_case(inputs)
    record_calculation(channel.NAME, 1)
    nominal = worst.nominal
    stage_of = {check.name: stage for stage in STAGES for check in getattr(nominal, stage).checks}
    checks = [
        entry
        for check, wc in zip(nominal.checks, worst.checks, strict=True)
        if (entry := _check_entry(check, wc, stage_of[check.name])) is not None
    ]
    stages: dict[str, Any] = {stage: _stage_results(getattr(nominal, stage)) for stage in STAGES}
    if not bool(nominal.has_front_stage[0]):
        stages["front_stage"] = None
    stages["supply"]["max_duty_cycle"] = plain(float(nominal.max_duty_cycle[0]))
    document: dict[str, Any] = {
        "review": channel.NAME,
        "inputs": {k: plain(v) for k, v in values.items()},
        "parts": parts,
        "verdict": "pass" if all(c["ok"] for c in checks) else "fail",
        "failing": [c["name"] for c in checks if not c["ok"]],
        "failing_nominal": [c["name"] for c in checks if not c["nominal_ok"]],
        "max_duty_cycle": plain(float(nominal.max_duty_cycle[0])),
        "stages": stages,
        "checks": checks,
        "yield": None,
        "warnings": warnings + row_notices(nominal.warnings, 0),
        "cautions": row_notices(nominal.cautions, 0),
    }
    if samples:
        found = tolerance.monte_carlo(inputs, samples, seed)
        document["yield"] = {
            "fraction": found.fraction,
            "ci_low": found.ci_low,
            "ci_high": found.ci_high,
            "samples": found.samples,
            "seed": found.seed,
            "most_failing_check": found.most_failing_check,
            "failures": found.failures,
        }
    document["fingerprint"] = fingerprint(channel.NAME, channel.VERSION, document["inputs"], parts)
    return document


# The unit of each check's value, for axes and reports.
CHECK_UNITS = {
    "led_current_rating": "A", "headroom": "V", "resistor_rating": "W", "saturation": "", "driver_current": "A",
    "collector_current_rating": "A", "power_rating": "W", "off_state": "V", "supply_average_current": "A",
    "supply_peak_current": "A", "gain_achievable": "", "signal_in_band": "Hz", "slew_rate": "V/s", "output_swing": "V",
}  # fmt: skip


def yield_histogram(body: Mapping[str, Any], fmt: str) -> plots.Plot:
    """The Monte Carlo distribution of the check that fails most often, with its limit marked."""
    resolved = resolve_parts(current_app.extensions["calcsvc.db"], REVIEW.roles, body)
    values = complete(REVIEW, resolved.values)
    samples = int(values["samples"]) or tolerance.DEFAULT_SAMPLES
    found = tolerance.monte_carlo(channel_inputs(values), samples, int(values["seed"]))
    if found.most_failing_check is None or found.most_failing_values is None or found.most_failing_limits is None:
        message = f"every one of the {samples} simulated builds passes every check: there is no failing check to plot"
        raise Problem(422, message, "nothing-fails", {"samples": [message]})
    name, values, limits = found.most_failing_check, found.most_failing_values, found.most_failing_limits
    if np.ptp(limits) > 1e-9 * np.abs(limits).max():
        # The limit itself varies per build (the hfe of each transistor, the supply of each build): only the
        # value relative to its own limit shows which builds fail.
        return plots.histogram(values / limits, 1.0, f"{name} (value / its limit)", "", fmt)
    return plots.histogram(values, float(limits[0]), name, CHECK_UNITS[name], fmt)


def run_review(body: Mapping[str, Any]) -> dict[str, Any]:
    """The review of one channel, as JSON-ready data (also used by the parts-review page)."""
    resolved = resolve_parts(current_app.extensions["calcsvc.db"], REVIEW.roles, body)
    return review_document(complete(REVIEW, resolved.values), resolved.parts, resolved.warnings)


class CornerCheckSchema(Schema):
    value = fields.Float(allow_none=True)
    limit = fields.Float(allow_none=True)
    margin = fields.Float(allow_none=True)
    corner = fields.Dict(keys=fields.String(), values=fields.String())


class ReviewCheckSchema(CheckSchema):
    stage = fields.String(required=True)
    nominal_ok = fields.Boolean(required=True)
    worst_case = fields.Nested(CornerCheckSchema, required=True)


class YieldSchema(Schema):
    fraction = fields.Float(required=True)
    ci_low = fields.Float(required=True, metadata={"description": "95 % Wilson interval, low end"})
    ci_high = fields.Float(required=True, metadata={"description": "95 % Wilson interval, high end"})
    samples = fields.Integer(required=True)
    seed = fields.Integer(required=True)
    most_failing_check = fields.String(allow_none=True, required=True)
    failures = fields.Dict(keys=fields.String(), values=fields.Integer(), required=True)


class ReviewSchema(Schema):
    review = fields.String(required=True)
    inputs = fields.Dict(required=True)
    parts = fields.List(fields.Nested(PartUsedSchema), required=True)
    verdict = fields.String(required=True, metadata={"description": "pass when every check passes at every corner"})
    failing = fields.List(fields.String(), required=True, metadata={"description": "checks failing at some corner"})
    failing_nominal = fields.List(fields.String(), required=True)
    max_duty_cycle = fields.Float(allow_none=True, required=True)
    stages = fields.Dict(required=True, metadata={"description": "results of each stage (front_stage null if none)"})
    checks = fields.List(fields.Nested(ReviewCheckSchema), required=True)
    yield_ = fields.Nested(YieldSchema, allow_none=True, required=True, attribute="yield", data_key="yield")
    warnings = fields.List(fields.String(), required=True)
    cautions = fields.List(fields.String(), required=True)
    fingerprint = fields.String(required=True)


REPORTS = {"text/markdown": render_markdown, "text/html": render_html}


@blp.route("/channel", endpoint="channel")
class ChannelReview(MethodView):
    @blp.arguments(REVIEW_REQUEST)
    @blp.response(200, ReviewSchema())
    @error_response(blp, 404, "a referenced part does not exist")
    @blp.doc(
        responses={
            "200": {
                "description": "the review; a Markdown or HTML report of the same numbers when asked for by Accept",
                "content": {
                    "application/json": {"schema": {"$ref": "#/components/schemas/Review"}},
                    "text/markdown": {"schema": {"type": "string"}},
                    "text/html": {"schema": {"type": "string"}},
                },
            }
        }
    )
    def post(self, body: dict[str, Any]) -> Any:
        """Review a whole channel: nominal checks, worst case over tolerances, and production yield."""
        document = run_review(body)
        best = request.accept_mimetypes.best_match(["application/json", *REPORTS])
        if best in REPORTS:
            return Response(REPORTS[best](document), mimetype=best)
        return document


@blp.before_request
def _reads_may_need_a_token() -> None:
    # Calculations read the parts table, so they follow its read protection.
    require_reader()


def _register_histogram(fmt: str) -> None:
    class Histogram(MethodView):
        @blp.arguments(REVIEW_REQUEST)
        @blp.response(200, {"type": "string"}, content_type=plots.FORMATS[fmt], description=f"the histogram ({fmt})")
        @error_response(blp, 404, "a referenced part does not exist")
        def post(self, body: dict[str, Any]) -> Response:
            """Monte Carlo histogram of the check that fails most often (limit marked); same body as the review."""
            return image_response(yield_histogram(body, fmt))

    Histogram.__name__ = f"Histogram{fmt.capitalize()}"
    blp.route(f"/channel/histogram.{fmt}", endpoint=f"histogram-{fmt}")(Histogram)


for _fmt in plots.FORMATS:
    _register_histogram(_fmt)
