"""``/v1/batch/<name>``: many rows of one calculation through the vectorized core in one pass."""

from __future__ import annotations

from typing import Any

from flask import Response, current_app, request
from flask.views import MethodView
from flask_smorest import Blueprint

from calcsvc.core.registry import CALCULATIONS
from calcsvc.core.spec import CalculationSpec
from calcsvc.service.batch import run_batch
from calcsvc.service.errors import InvalidInput
from calcsvc.service.gc_pause import return_free_memory
from calcsvc.service.safety import SAFETY_LINE
from calcsvc.web.auth import database, guard_reads
from calcsvc.web.batch_csv import csv_chunks
from calcsvc.web.batch_json import streamed_columns, streamed_rows
from calcsvc.web.calc_schemas import request_schema
from calcsvc.web.metrics import record_calculation
from calcsvc.web.problems import error_response

blp = Blueprint(
    "batch",
    __name__,
    url_prefix="/v1/batch",
    description="Many rows of one calculation in one request: a JSON array of input objects, a JSON object of "
    "input arrays (one per name) or a CSV table (header row = input names; cells may carry units such as '9 V'). "
    "A bad row does not fail the batch.",
)
guard_reads(blp)  # calculations read the parts table

CSV = "text/csv"
MAX_LABELS_LENGTH = 1000  # label column names, comma-separated


def answer(calc: CalculationSpec) -> Response:
    decimal = request.args.get("decimal")
    if decimal not in (None, "point", "comma"):
        raise InvalidInput.on("decimal", "must be point or comma")
    labels_text = request.args.get("labels", "")
    if len(labels_text) > MAX_LABELS_LENGTH:
        raise InvalidInput.on("labels", f"longer than {MAX_LABELS_LENGTH} characters")
    labels = tuple(name.strip() for name in labels_text.split(",") if name.strip())
    batch = run_batch(
        database(),
        calc,
        request.get_data(),
        request.mimetype == CSV,
        current_app.config["BATCH_MAX_ROWS"],
        current_app.config["BATCH_MAX_SWEEP_POINTS"],
        labels,
        decimal,
    )
    parsed, ok_rows, outcome = batch.parsed, batch.ok_rows, batch.outcome
    record_calculation(calc.name, int(ok_rows.size))
    if (
        CSV in request.accept_mimetypes.values()
        and request.accept_mimetypes.best_match(["application/json", CSV]) == CSV
    ):
        return _released(Response(csv_chunks(calc, batch), mimetype=CSV))
    body = {
        "calculation": calc.name,
        "version": calc.version,
        "count": parsed.n,
        "ok_count": int(ok_rows.size),
        "check_details": {check.name: check.detail for check in outcome.checks},
        "safety": SAFETY_LINE,
    }
    if request.args.get("layout") == "columns":
        return _released(Response(streamed_columns(calc, batch, body), mimetype="application/json"))
    return _released(Response(streamed_rows(calc, batch, body), mimetype="application/json"))


def _released(response: Response) -> Response:
    """Once the answer is sent, the batch's memory goes back to the operating system."""
    response.call_on_close(return_free_memory)
    return response


def _batch_doc(calc: CalculationSpec) -> dict[str, Any]:
    schema_name = request_schema(calc).__name__
    return {
        "requestBody": {
            "required": True,
            "content": {
                "application/json": {
                    "schema": {
                        "oneOf": [
                            {
                                "type": "array",
                                "description": "rows: one object of inputs per row",
                                "items": {"$ref": f"#/components/schemas/{schema_name.removesuffix('Schema')}"},
                            },
                            {
                                "type": "object",
                                "description": "columns: one array per input name, all of one length (element "
                                "i belongs to row i; null: not given on that row); the fastest to read",
                                "additionalProperties": {"type": "array"},
                            },
                        ]
                    }
                },
                CSV: {
                    "schema": {"type": "string"},
                    "example": "supply_v,led,leds_in_series,current_a\n12 V,led-red-5mm,3,20 mA\n",
                },
            },
        },
        "parameters": [
            {
                "name": "layout",
                "in": "query",
                "required": False,
                "schema": {"type": "string", "enum": ["rows", "columns"], "default": "rows"},
                "description": "rows: one object per row; columns: one array per result and check (fastest for "
                "large batches; element i belongs to row i)",
            },
            {
                "name": "labels",
                "in": "query",
                "required": False,
                "schema": {"type": "string", "maxLength": MAX_LABELS_LENGTH},
                "description": "comma-separated names of columns (or row keys) that are not inputs, such as a "
                "design name: passed through to each row of the answer instead of refused as unknown fields",
            },
            {
                "name": "decimal",
                "in": "query",
                "required": False,
                "schema": {"type": "string", "enum": ["point", "comma"]},
                "description": "the decimal mark of numbers in CSV cells, in and out; default: comma when the "
                "CSV table separates its cells by ';' (detected from its header), else point. A CSV answer uses "
                "the request's separator (';' with a decimal comma)",
            },
        ],
        "responses": {
            "200": {
                "description": "one entry per row, in order; a bad row has ok false and its problem; passes: "
                "whether a computed row passes every check. CSV: row is the row's number in the sheet (the header "
                "is row 1), then the labels, computed, passes, the results, failing_checks (each with its value "
                "and limit), cautions and problem",
                "content": {
                    "application/json": {"schema": {"type": "object"}},
                    CSV: {"schema": {"type": "string"}},
                },
            }
        },
    }


def _register(calc: CalculationSpec) -> None:
    class BatchView(MethodView):
        @blp.doc(summary=f"{calc.name} over many rows", **_batch_doc(calc))
        @error_response(blp, 413, "more rows than BATCH_MAX_ROWS, or more sweep points than BATCH_MAX_SWEEP_POINTS")
        @error_response(blp, 422, "the body is not an array of rows")
        def post(self) -> Response:
            return answer(calc)

    BatchView.__name__ = f"Batch{calc.name.title().replace('-', '')}View"
    blp.route(f"/{calc.name}", endpoint=calc.name)(BatchView)


for _calc in CALCULATIONS.values():
    _register(_calc)
