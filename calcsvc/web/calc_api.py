"""``/v1/calc/<name>``: the design calculations, one JSON body in, one envelope out."""

from __future__ import annotations

import io
from collections.abc import Mapping
from typing import Any

from flask import Response, g, request
from flask.views import MethodView
from flask_smorest import Blueprint
from marshmallow import RAISE, Schema, fields, validate

from calcsvc.core import duty_power
from calcsvc.core.registry import CALCULATIONS
from calcsvc.core.spec import CalculationSpec
from calcsvc.csv_cells import CellWriter
from calcsvc.service.calculate import run_calculation
from calcsvc.service.duty import run_duty
from calcsvc.web.auth import database, guard_reads
from calcsvc.web.calc_schemas import budget_request_schema, camel, request_schema, response_schema
from calcsvc.web.json_limits import LengthCheckingParser
from calcsvc.web.metrics import record_calculation
from calcsvc.web.problems import PROBLEM_MIMETYPE, error_response

blp = Blueprint(
    "calculations",
    __name__,
    url_prefix="/v1/calc",
    description="Design calculations. Numbers are SI; strings with units are converted. Any input a part "
    "provides may be given as a part reference instead (role name = part_id, <role>_revision pins a revision).",
)
guard_reads(blp)  # calculations read the parts table
blp.ARGUMENTS_PARSER = LengthCheckingParser()  # waveform arrays are counted before their samples are built


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


# --- budgets: a row of inputs with a list of items -------------------------------------------------------------


@blp.route(f"/{duty_power.NAME}", endpoint=duty_power.NAME)
class DutyCyclePower(MethodView):
    @blp.arguments(budget_request_schema(duty_power.SPEC)())
    @blp.response(200, response_schema(duty_power.NAME, duty_power.RESULTS))
    @error_response(blp, 404, "a referenced part does not exist")
    def post(self, body: dict[str, Any]) -> dict[str, Any]:
        """Average and peak supply current and power of duty-cycled loads, with runtime and duty headroom."""
        record_calculation(duty_power.NAME, 1)
        return run_duty(database(), body)
