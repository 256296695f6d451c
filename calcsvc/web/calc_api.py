"""``/v1/calc/<name>``: the design calculations, one JSON body in, one envelope out."""

from __future__ import annotations

import io
import math
from collections.abc import Mapping
from typing import Any

import numpy as np
from flask import Response, g, request
from flask.views import MethodView
from flask_smorest import Blueprint
from marshmallow import RAISE, Schema, ValidationError, fields, validate, validates_schema

from calcsvc.core import duty_power
from calcsvc.core.registry import CALCULATIONS
from calcsvc.core.spec import CalculationSpec, Role
from calcsvc.csv_cells import CellWriter
from calcsvc.service.calculate import run_calculation
from calcsvc.service.envelope import envelope, plain, row_results
from calcsvc.service.resolve import resolve_parts
from calcsvc.web.auth import database, guard_reads
from calcsvc.web.calc_schemas import camel, request_schema, response_schema, role_fields
from calcsvc.web.json_limits import LengthCheckingParser
from calcsvc.web.metrics import record_calculation
from calcsvc.web.problems import PROBLEM_MIMETYPE, Problem, error_response
from calcsvc.web.quantity import Quantity

blp = Blueprint(
    "calculations",
    __name__,
    url_prefix="/v1/calc",
    description="Design calculations. Numbers are SI; strings with units are converted. Any input a part "
    "provides may be given as a part reference instead (role name = part_id, <role>_revision pins a revision).",
)
guard_reads(blp)  # calculations read the parts table
blp.ARGUMENTS_PARSER = LengthCheckingParser()  # waveform arrays are counted before their samples are built

MAX_WAVEFORM_SAMPLES = 100_000


def _run(calc: CalculationSpec, body: Mapping[str, Any]) -> dict[str, Any]:
    record_calculation(calc.name, 1)
    return run_calculation(database(), calc, body)


def query_schema(calc: CalculationSpec) -> type[Schema]:
    """The POST inputs as query parameters, plus the spreadsheet-friendly output choices."""
    return Schema.from_dict(
        {
            **request_schema(calc)._declared_fields,
            "pick": fields.String(
                validate=validate.OneOf(calc.scalar_results()),
                metadata={"description": "answer only this result, as text/plain (a bare number, true or false)"},
            ),
            "format": fields.String(
                validate=validate.OneOf(("json", "csv")),
                metadata={"description": "csv: a header row and one data row of every result"},
            ),
        },
        name=f"{camel(calc.name)}Query",
    )


def text_answer(calc: CalculationSpec, envelope_: dict[str, Any], pick: str | None, fmt: str | None) -> Response | None:
    results = envelope_["results"]
    if pick:
        value = results.get(pick)
        text = "n/a" if value is None else ("true" if value is True else "false" if value is False else repr(value))
        return Response(text, mimetype="text/plain")
    if fmt == "csv":
        names = calc.scalar_results()
        out = io.StringIO()
        writer = CellWriter(out, lineterminator="\n")
        writer.writerow(names)
        writer.writerow(["" if results.get(name) is None else results[name] for name in names])
        return Response(out.getvalue(), mimetype="text/csv")
    return None


_TEXT_RESPONSES = {
    "text/plain": {"schema": {"type": "string"}, "example": "300.0"},
    "text/csv": {"schema": {"type": "string"}},
}


def _cell_error(description: str) -> dict[str, Any]:
    """An error of the query-string form: a problem document, or with pick= one line of text/plain."""
    return {
        "description": description,
        "content": {
            PROBLEM_MIMETYPE: {"schema": {"$ref": "#/components/schemas/Problem"}},
            "text/plain": {"schema": {"type": "string"}, "example": "error: current_a: must be greater than 0 A"},
        },
    }


def _register_flat(calc: CalculationSpec) -> None:
    # Instances, not classes: webargs would build a new schema object on every request.
    request = request_schema(calc)()
    response = response_schema(calc.name, calc.results)()
    query = query_schema(calc)()

    class CalculationView(MethodView):
        @blp.arguments(request)
        @blp.response(200, response)
        @error_response(blp, 404, "a referenced part does not exist")
        @blp.doc(summary=calc.summary)
        def post(self, body: dict[str, Any]) -> dict[str, Any]:
            return _run(calc, body)

        @blp.arguments(query, location="query", unknown=RAISE)  # a misspelt input is refused, not dropped
        @blp.response(200, response)
        @error_response(blp, 404, "a referenced part does not exist")
        @blp.doc(
            summary=f"{calc.summary} (query-string form for spreadsheets)",
            description="The same inputs as the POST, as query parameters. With pick=<result> the answer is "
            "text/plain, and so is any error (one line, with the 4xx status), so a spreadsheet's web-fetch "
            "function can put it straight into a cell. With format=csv: a header row and one data row.",
            responses={
                "200": {
                    "description": "the envelope, or text with pick or format=csv",
                    "content": {
                        "application/json": {"schema": {"$ref": f"#/components/schemas/{camel(calc.name)}Response"}},
                        **_TEXT_RESPONSES,
                    },
                },
                "404": _cell_error("a referenced part does not exist"),
                "422": _cell_error("the inputs are not valid or not physically possible"),
                "default": _cell_error("any other error"),
            },
        )
        def get(self, args: dict[str, Any]) -> Any:
            pick, fmt = args.pop("pick", None), args.pop("format", None)
            answer = _run(calc, args)
            return text_answer(calc, answer, pick, fmt) or answer

    CalculationView.__name__ = f"{camel(calc.name)}View"
    blp.route(f"/{calc.name}", endpoint=calc.name)(CalculationView)


for _calc in CALCULATIONS.values():
    _register_flat(_calc)


@blp.before_request
def _plain_errors_for_cells() -> None:
    if request.method == "GET" and "pick" in request.args:
        g.plain_errors = True


# --- duty-cycle power: a list of loads per supply -------------------------------------------------------------

SUPPLY_ROLE = Role(
    "supply",
    "supply",
    (("supply_v", "supply_v"), ("current_max_a", "current_max_a"), ("capacity_ah", "capacity_ah")),
)


class WaveformSchema(Schema):
    time_s = fields.List(
        fields.Float(),
        required=True,
        validate=validate.Length(min=2, max=MAX_WAVEFORM_SAMPLES),
        metadata={"x-unit": "s"},
    )
    current_a = fields.List(
        fields.Float(),
        required=True,
        validate=validate.Length(min=2, max=MAX_WAVEFORM_SAMPLES),
        metadata={"x-unit": "A"},
    )

    @validates_schema
    def same_length(self, data: dict[str, Any], **_kwargs: Any) -> None:
        if len(data["time_s"]) != len(data["current_a"]):
            raise ValidationError("time_s and current_a must have the same length", "current_a")


class LoadSchema(Schema):
    name = fields.String(load_default="", validate=validate.Length(max=100))
    peak_current_a = Quantity("A", minimum=0, description="current while on (rectangular load)")
    duty_cycle = Quantity("dimensionless", minimum=0, maximum=1, description="fraction of time on")
    on_time_s = Quantity("s", minimum=0, description="on time per period (instead of duty_cycle)")
    period_s = Quantity("s", minimum=0, exclusive_minimum=True, description="PWM period (with on_time_s)")
    count = Quantity("dimensionless", minimum=1, maximum=100_000, integer=True, description="identical units")
    waveform = fields.Nested(WaveformSchema, metadata={"description": "samples over exactly one period"})

    @validates_schema
    def one_description(self, data: dict[str, Any], **_kwargs: Any) -> None:
        if "waveform" in data:
            extra = [k for k in ("peak_current_a", "duty_cycle", "on_time_s", "period_s") if k in data]
            if extra:
                raise ValidationError(f"a load with a waveform takes its currents from it; drop {extra[0]}", extra[0])
            return
        if "peak_current_a" not in data:
            raise ValidationError("give peak_current_a with a duty cycle, or a waveform", "peak_current_a")
        timed = "on_time_s" in data or "period_s" in data
        if "duty_cycle" in data and timed:
            raise ValidationError("give duty_cycle or on_time_s with period_s, not both", "duty_cycle")
        if timed and not ("on_time_s" in data and "period_s" in data):
            raise ValidationError("on_time_s and period_s go together", "period_s")
        if "duty_cycle" not in data and not timed:
            raise ValidationError("give duty_cycle, or on_time_s with period_s", "duty_cycle")
        if timed and data["on_time_s"] > data["period_s"]:
            raise ValidationError("on_time_s cannot exceed period_s", "on_time_s")


DutyRequest = Schema.from_dict(
    {
        "supply_v": Quantity("V", minimum=0, exclusive_minimum=True, description="supply voltage"),
        "current_max_a": Quantity("A", minimum=0, exclusive_minimum=True, description="supply current rating"),
        "capacity_ah": Quantity("A*h", minimum=0, exclusive_minimum=True, description="battery capacity"),
        **role_fields(SUPPLY_ROLE),
        "loads": fields.List(fields.Nested(LoadSchema), required=True, validate=validate.Length(min=1, max=1000)),
    },
    name="DutyCyclePowerRequest",
)
DutyResponse = response_schema(duty_power.NAME, duty_power.RESULTS)


def _load_currents(load: dict[str, Any]) -> dict[str, Any]:
    """Peak, duty, average and RMS of one load, from its duty cycle or its sampled waveform."""
    if "waveform" in load:
        average, rms, peak, duty = duty_power.waveform_stats(load["waveform"]["time_s"], load["waveform"]["current_a"])
        return {"peak_current_a": peak, "duty_cycle": duty, "average_current_a": average, "rms_current_a": rms}
    duty = load["duty_cycle"] if "duty_cycle" in load else load["on_time_s"] / load["period_s"]
    return {"peak_current_a": load["peak_current_a"], "duty_cycle": duty}


def run_duty(body: Mapping[str, Any]) -> dict[str, Any]:
    resolved = resolve_parts(database(), (SUPPLY_ROLE,), body)
    values = resolved.values
    if "supply_v" not in values:
        message = "required: give supply_v or reference a supply part"
        raise Problem(422, message, "validation", {"supply_v": [message]})
    loads = []
    for index, load in enumerate(values["loads"]):
        try:
            currents = _load_currents(load)
        except duty_power.DomainError as exc:
            errors = {f"loads.{index}.{v.field}": [v.message] for v in exc.violations}
            raise Problem(422, "; ".join(m[0] for m in errors.values()), "physically-impossible", errors) from exc
        loads.append({"name": load["name"], "count": load.get("count", 1), **currents})
    m = len(loads)
    column = {
        key: np.array([ld.get(key, math.nan) for ld in loads], dtype=np.float64)
        for key in ("peak_current_a", "duty_cycle", "average_current_a", "rms_current_a", "count")
    }
    waveform = ~np.isnan(column["average_current_a"])
    inputs = duty_power.DutyPowerInputs(
        supply_v=np.array([values["supply_v"]]),
        current_max_a=np.array([values.get("current_max_a", math.nan)]),
        capacity_ah=np.array([values.get("capacity_ah", math.nan)]),
        load_row=np.zeros(m, dtype=np.int64),
        peak_current_a=column["peak_current_a"],
        duty_cycle=np.where(waveform, math.nan, column["duty_cycle"]),
        average_current_a=column["average_current_a"],
        rms_current_a=column["rms_current_a"],
        count=column["count"],
    )
    outcome = duty_power.compute(inputs)
    record_calculation(duty_power.NAME, 1)
    per_load = [
        {
            "name": load["name"],
            "count": load["count"],
            "duty_cycle": plain(load["duty_cycle"]),
            "peak_current_a": plain(load["peak_current_a"]),
            "average_current_a": plain(outcome.results["load_average_current_a"][k]),
            "rms_current_a": plain(outcome.results["load_rms_current_a"][k]),
            "average_power_w": plain(outcome.results["load_average_power_w"][k]),
            "peak_power_w": plain(outcome.results["load_peak_power_w"][k]),
        }
        for k, load in enumerate(loads)
    ]
    results = {"loads": per_load, **row_results(outcome, 0, [r.name for r in duty_power.RESULTS if r.scalar])}
    resolved_inputs = {k: values[k] for k in ("supply_v", "current_max_a", "capacity_ah") if k in values}
    resolved_inputs["loads"] = [
        {k: load[k] for k in ("name", "count", "peak_current_a", "duty_cycle")} for load in loads
    ]
    return envelope(
        duty_power.NAME, duty_power.VERSION, resolved_inputs, resolved.parts, results, outcome, 0, resolved.warnings
    )


@blp.route(f"/{duty_power.NAME}", endpoint=duty_power.NAME)
class DutyCyclePower(MethodView):
    @blp.arguments(DutyRequest)
    @blp.response(200, DutyResponse)
    @error_response(blp, 404, "a referenced part does not exist")
    def post(self, body: dict[str, Any]) -> dict[str, Any]:
        """Average and peak supply current and power of duty-cycled loads, with runtime and duty headroom."""
        return run_duty(body)
