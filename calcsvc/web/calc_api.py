"""``/v1/calc/<name>``: the design calculations, one JSON body in, one envelope out."""

from __future__ import annotations

import io
from collections.abc import Mapping
from typing import Any

import orjson
from flask import Response, g, request
from flask.views import MethodView
from flask_smorest import Blueprint
from marshmallow import RAISE, Schema, ValidationError, fields, pre_load, validate

from calcsvc.core import duty_power
from calcsvc.core.registry import CALCULATIONS
from calcsvc.core.spec import CalculationSpec
from calcsvc.csv_cells import CellWriter
from calcsvc.service.calculate import check_inputs, run_calculation
from calcsvc.service.duty import run_duty
from calcsvc.service.errors import InvalidInput
from calcsvc.units import QUERY_QUANTITY_PATTERN, UnitError, with_decimal_point
from calcsvc.web.auth import database, guard_reads
from calcsvc.web.calc_schemas import budget_request_schema, camel, request_schema, response_schema
from calcsvc.web.json_limits import LengthCheckingParser
from calcsvc.web.metrics import record_calculation
from calcsvc.web.problems import PROBLEM_MIMETYPE, Problem, error_response
from calcsvc.web.quantity import Quantity
from calcsvc.web.sheet_text import cell_value, failing_checks

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


def envelope_response(envelope_: dict[str, Any]) -> Response:
    """The envelope as JSON, written directly: the service built it to the response schema (the published one,
    which the tests hold it to), so a second marshmallow pass over it would only copy it. Keys sorted, as
    Flask writes them."""
    return Response(orjson.dumps(envelope_, option=orjson.OPT_SORT_KEYS), mimetype="application/json")


class _QueryForm(Schema):
    """The query string of the GET form, whose numbers may be written with a decimal comma (``decimal=comma``)."""

    @pre_load
    def _decimal_comma(self, data: Mapping[str, Any], **_: Any) -> Mapping[str, Any]:
        if data.get("decimal") != "comma":
            return data
        converted, errors = {name: data[name] for name in data}, {}
        for name, value in converted.items():
            if isinstance(self.fields.get(name), Quantity) and isinstance(value, str):
                try:
                    converted[name] = with_decimal_point(value)
                except UnitError as exc:
                    errors[name] = [str(exc)]
        if errors:
            raise ValidationError(errors)
        return converted


def query_schema(calc: CalculationSpec) -> type[Schema]:
    """The POST inputs as query parameters, plus the spreadsheet-friendly output choices."""
    return _QueryForm.from_dict(
        {
            **request_schema(calc, QUERY_QUANTITY_PATTERN)._declared_fields,
            "pick": fields.String(
                validate=validate.OneOf(calc.scalar_results()),
                metadata={
                    "description": "answer only this result, as text/plain (a bare number, true or false); a "
                    "design that fails a check answers 409 with one line naming the failing checks instead"
                },
            ),
            "format": fields.String(
                validate=validate.OneOf(("json", "csv")),
                metadata={
                    "description": "csv: a header row and one data row of every result, whether the design "
                    "passes its checks, the failing checks (value and limit) and the cautions"
                },
            ),
            "sheet": fields.Boolean(
                metadata={
                    "description": "spreadsheet mode (with pick): always 200 text/plain, so the cell shows it: "
                    "the bare number, 'error: <field>: <reason>' for a refused input, or 'fails: <check> "
                    "<value> > limit <limit>' for a design that fails a check"
                },
            ),
            "decimal": fields.String(
                validate=validate.OneOf(("point", "comma")),
                metadata={
                    "description": "the caller's decimal mark, for numbers in the query and in text and CSV "
                    "answers (comma: CSV cells are separated by ';')"
                },
            ),
        },
        name=f"{camel(calc.name)}Query",
    )


def csv_text(rows: list[list[Any]], comma: bool) -> str:
    """A CSV table as a spreadsheet of the caller's locale reads it: ';' between cells where ',' is the decimal mark."""
    out = io.StringIO()
    CellWriter(out, lineterminator="\n", delimiter=";" if comma else ",").writerows(rows)
    return out.getvalue()


def failing_problem(failing: dict[str, str]) -> Problem:
    """The 409 of a design that computes but fails a check (as text: ``fails: led_current_rating: 0.2 > ...``)."""
    detail = "the design fails " + ", ".join(failing)
    errors = {name: [text] for name, text in failing.items()}
    return Problem(409, detail, "failing-checks", errors, title="Design fails a check", lead="fails")


def text_answer(
    calc: CalculationSpec, envelope_: dict[str, Any], pick: str | None, fmt: str | None, comma: bool
) -> Response | None:
    results = envelope_["results"]
    failing = failing_checks(envelope_["checks"], comma)
    if pick:
        if failing:
            # A number of a failing design must never pass for an answer: the cell (or script) reads why instead.
            raise failing_problem(failing)
        return Response(cell_value(results.get(pick), comma) or "n/a", mimetype="text/plain")
    if fmt == "csv":
        names = calc.scalar_results()
        header = [*names, "passes", "failing_checks", "cautions"]
        values = [cell_value(results.get(name), comma) for name in names]
        failing_text = "; ".join(f"{name} {text}" for name, text in failing.items())
        row = [*values, "false" if failing else "true", failing_text, " ".join(envelope_["cautions"])]
        return Response(csv_text([header, row], comma), mimetype="text/csv")
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
    body = request_schema(calc)()
    response = response_schema(calc.name, calc.results)()
    query = query_schema(calc)()

    class CalculationView(MethodView):
        @blp.arguments(body)
        @blp.response(200, response)
        @error_response(blp, 404, "a referenced part does not exist")
        @blp.doc(summary=calc.summary)
        def post(self, body: dict[str, Any]) -> Response:
            return envelope_response(_run(calc, body))

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
                "409": _cell_error(
                    "with pick: the design computes but fails a check, each named with its value "
                    "and limit (in sheet mode this line comes with 200)"
                ),
                "422": _cell_error("the inputs are not valid or not physically possible"),
                "default": _cell_error("any other error"),
            },
        )
        def get(self, args: dict[str, Any]) -> Any:
            pick, fmt, sheet = args.pop("pick", None), args.pop("format", None), args.pop("sheet", False)
            comma = args.pop("decimal", "point") == "comma"
            if sheet and not pick:
                raise InvalidInput.on("pick", "sheet mode answers one result: name it with pick=<result>")
            if request.method == "HEAD":
                # A spreadsheet asks with HEAD before each GET: the inputs are checked, the design not computed.
                check_inputs(database(), calc, args)
                return Response(mimetype="text/plain" if pick else "text/csv" if fmt == "csv" else "application/json")
            answer = _run(calc, args)
            return text_answer(calc, answer, pick, fmt, comma) or envelope_response(answer)

    CalculationView.__name__ = f"{camel(calc.name)}View"
    blp.route(f"/{calc.name}", endpoint=calc.name)(CalculationView)


for _calc in CALCULATIONS.values():
    _register_flat(_calc)


@blp.before_request
def _plain_errors_for_cells() -> None:
    if request.method not in ("GET", "HEAD"):
        return
    sheet = request.args.get("sheet", "").lower() in ("1", "true", "t", "yes", "y", "on")
    if sheet or "pick" in request.args:
        g.plain_errors = True
        # A spreadsheet discards the body of any other status: in sheet mode the cell must get the line.
        g.plain_errors_status = 200 if sheet else None


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
