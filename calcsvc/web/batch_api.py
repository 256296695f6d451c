"""``/v1/batch/<name>``: many rows of one calculation through the vectorized core in one pass."""

from __future__ import annotations

import io
from typing import Any

import numpy as np
import orjson
from flask import Response, current_app, request
from flask.views import MethodView
from flask_smorest import Blueprint

from calcsvc.core.registry import CALCULATIONS
from calcsvc.core.spec import CalculationSpec
from calcsvc.csv_cells import CellWriter
from calcsvc.service.batch import Batch, ParsedRows, Records, run_batch
from calcsvc.service.envelope import SWEEP_KEYS, row_sweeps, to_json_value
from calcsvc.service.errors import InvalidInput
from calcsvc.service.safety import SAFETY_LINE
from calcsvc.web.auth import database, guard_reads
from calcsvc.web.calc_schemas import request_schema
from calcsvc.web.metrics import record_calculation
from calcsvc.web.problems import error_response, problem_document, service_problem
from calcsvc.web.sheet_text import cell_value, failing_check

blp = Blueprint(
    "batch",
    __name__,
    url_prefix="/v1/batch",
    description="Many rows of one calculation in one request: a JSON array of input objects or a CSV table "
    "(header row = input names; cells may carry units such as '9 V'). A bad row does not fail the batch.",
)
guard_reads(blp)  # calculations read the parts table

CSV = "text/csv"
MAX_LABELS_LENGTH = 1000  # label column names, comma-separated


def _row_problem(parsed: ParsedRows, row: int) -> dict[str, Any]:
    """A bad row's problem document, as a single request with its inputs would have been answered."""
    return problem_document(service_problem(parsed.errors.refusal(row)))


def _passes(outcome: Any, count: int) -> np.ndarray:
    """Whether each computed row passes every check that applies to it (a check with no limit there does not)."""
    passes = np.ones(count, dtype=bool)
    for check in outcome.checks:
        passes &= check.ok | np.isnan(check.limit)
    return passes


def _labels(records: Records, row: int) -> dict[str, Any]:
    return {name: values[row] for name, values in records.labels.items()}


def json_rows(calc: CalculationSpec, batch: Batch) -> list[dict[str, Any]]:
    parsed, ok_rows, outcome = batch.parsed, batch.ok_rows, batch.outcome
    n = parsed.n
    passes = _passes(outcome, ok_rows.size).tolist()
    names = [name for name in calc.scalar_results() if name in outcome.results]
    results = [to_json_value(outcome.results[name]) for name in names]
    sweeps = row_sweeps(outcome, ok_rows.size)
    checks = [
        (c.name, c.ok.tolist(), to_json_value(c.value), to_json_value(c.limit), to_json_value(c.margin()))
        for c in outcome.checks
    ]
    notices: dict[str, list[list[str]]] = {"warnings": [[] for _ in ok_rows], "cautions": [[] for _ in ok_rows]}
    for kind, found in (("warnings", outcome.warnings), ("cautions", outcome.cautions)):
        for notice in found:
            for k in np.flatnonzero(notice.rows):
                notices[kind][k].append(notice.message)
    rows: list[dict[str, Any]] = [{}] * n
    for k, row in enumerate(ok_rows.tolist()):
        row_results = dict(zip(names, (column[k] for column in results), strict=True))
        if sweeps[k] is not None:
            row_results["sweep"] = {key: to_json_value(values) for key, values in sweeps[k].items()}
        rows[row] = {
            "row": row,
            **({"labels": _labels(batch.records, row)} if batch.records.labels else {}),
            "ok": True,
            "passes": passes[k],
            "results": row_results,
            "checks": [
                {"name": name, "ok": ok[k], "value": value[k], "limit": limit[k], "margin": margin[k]}
                for name, ok, value, limit, margin in checks
                if limit[k] is not None  # a check whose limit is unknown on this row does not apply
            ],
            "warnings": parsed.warnings.get(row, []) + notices["warnings"][k],
            "cautions": notices["cautions"][k] + parsed.cautions.get(row, []),
            "parts": parsed.parts.get(row, []),
        }
    for row in parsed.errors.by_row:
        labels = {"labels": _labels(batch.records, row)} if batch.records.labels else {}
        rows[row] = {"row": row, **labels, "ok": False, "passes": None, "problem": _row_problem(parsed, row)}
    return rows


def json_columns(calc: CalculationSpec, batch: Batch) -> dict[str, Any]:
    """The same answer as ``json_rows``, one array per result and check (element i belongs to row i).

    Arrays go to the serializer as they are, with no object per row, which is what makes large batches fast.
    A row that was not computed has ok false, passes false, null results and null check values, and its problem.
    """
    parsed, ok_rows, outcome = batch.parsed, batch.ok_rows, batch.outcome
    n = parsed.n

    def full(column: np.ndarray, fill: Any = np.nan) -> np.ndarray:
        out = np.full((n, *column.shape[1:]), fill, dtype=column.dtype)
        out[ok_rows] = column
        return out

    ok = np.zeros(n, dtype=bool)
    ok[ok_rows] = True
    results = {name: full(outcome.results[name]) for name in calc.scalar_results() if name in outcome.results}
    if "sweep_row" in outcome.results:
        # One array per row that sweeps (its own length), null for the others.
        sweeps: list[dict[str, np.ndarray] | None] = [None] * n
        for row, sweep in zip(ok_rows.tolist(), row_sweeps(outcome, ok_rows.size), strict=True):
            sweeps[row] = sweep
        results["sweep"] = {key: [None if s is None else s[key] for s in sweeps] for key in SWEEP_KEYS}
    checks = {
        check.name: {
            "ok": full(check.ok, False),
            "value": full(check.value),
            "limit": full(check.limit),
            "margin": full(check.margin()),
        }
        for check in outcome.checks
    }
    notices = {
        kind: [{"message": notice.message, "rows": ok_rows[notice.rows]} for notice in found]
        for kind, found in (("warnings", outcome.warnings), ("cautions", outcome.cautions))
    }
    part_warnings = [{"message": m, "rows": [row]} for row, found in parsed.warnings.items() for m in found]
    notices["warnings"] = part_warnings + notices["warnings"]
    notices["cautions"] += [{"message": m, "rows": [row]} for row, found in parsed.cautions.items() for m in found]
    return {
        "layout": "columns",
        **({"labels": batch.records.labels} if batch.records.labels else {}),
        "ok": ok,
        "passes": full(_passes(outcome, ok_rows.size), False),
        "results": results,
        "checks": checks,
        **notices,
        "parts": {str(row): used for row, used in parsed.parts.items()},
        "problems": {str(row): _row_problem(parsed, row) for row in parsed.errors.by_row},
    }


def csv_body(calc: CalculationSpec, batch: Batch) -> str:
    """One line per row, numbered as the sheet numbers it (header = row 1): its labels, whether it was computed and
    passes its checks, every scalar result, the failing checks with value and limit, its cautions, its problem."""
    parsed, ok_rows, outcome, records = batch.parsed, batch.ok_rows, batch.outcome, batch.records
    comma = records.decimal_comma
    names = [name for name in calc.scalar_results() if name in outcome.results]
    labels = list(records.labels)
    table: list[list[Any]] = [
        [records.lines[row], *(records.labels[name][row] for name in labels), "false", ""]
        + [""] * len(names)
        + ["", "", ""]
        for row in range(parsed.n)
    ]
    columns = [outcome.results[name].tolist() for name in names]
    checks = [(c.name, c.ok.tolist(), c.value.tolist(), c.limit.tolist()) for c in outcome.checks]
    cautions: list[list[str]] = [[] for _ in ok_rows]
    for notice in outcome.cautions:
        for k in np.flatnonzero(notice.rows):
            cautions[k].append(notice.message)
    for k, row in enumerate(ok_rows.tolist()):
        failing = [
            f"{name} {failing_check(value[k], limit[k], comma)}"
            for name, ok, value, limit in checks
            if not ok[k] and limit[k] == limit[k]  # a check with no limit on this row does not apply
        ]
        cells = [cell_value(column[k], comma) for column in columns]
        passes = "false" if failing else "true"
        noted = " ".join(cautions[k] + parsed.cautions.get(row, []))
        table[row][len(labels) + 1 :] = ["true", passes, *cells, "; ".join(failing), noted, ""]
    for row in parsed.errors.by_row:
        table[row][-1] = parsed.errors.refusal(row).detail
    out = io.StringIO()
    # The problem quotes the caller's column names, the labels are the caller's text: both may start a formula.
    writer = CellWriter(out, lineterminator="\n", delimiter=records.separator)
    writer.writerow(["row", *labels, "computed", "passes", *names, "failing_checks", "cautions", "problem"])
    writer.writerows(table)
    return out.getvalue()


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
        return Response(csv_body(calc, batch), mimetype=CSV)
    body = {
        "calculation": calc.name,
        "version": calc.version,
        "count": parsed.n,
        "ok_count": int(ok_rows.size),
        "check_details": {check.name: check.detail for check in outcome.checks},
        "safety": SAFETY_LINE,
    }
    if request.args.get("layout") == "columns":
        body.update(json_columns(calc, batch))
    else:
        body["rows"] = json_rows(calc, batch)
    return Response(orjson.dumps(body, option=orjson.OPT_SERIALIZE_NUMPY), mimetype="application/json")


def _batch_doc(calc: CalculationSpec) -> dict[str, Any]:
    schema_name = request_schema(calc).__name__
    return {
        "requestBody": {
            "required": True,
            "content": {
                "application/json": {
                    "schema": {
                        "type": "array",
                        "items": {"$ref": f"#/components/schemas/{schema_name.removesuffix('Schema')}"},
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
