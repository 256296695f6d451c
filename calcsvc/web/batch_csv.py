"""A batch's CSV answer, written by columns: each result column formatted in bulk, text only where a row
fails a check, has a caution or was refused, and the rows joined by the CSV writer in one call."""

from __future__ import annotations

import csv
import io
from typing import Any

import numpy as np

from calcsvc.core.spec import CalculationSpec
from calcsvc.csv_cells import CellWriter, safe_cells
from calcsvc.service.batch import Batch
from calcsvc.web.batch_json import passes
from calcsvc.web.sheet_text import column_texts, failing_check


def csv_body(calc: CalculationSpec, batch: Batch) -> str:
    """One line per row, numbered as the sheet numbers it (header = row 1): its labels, whether it was computed and
    passes its checks, every scalar result, the failing checks with value and limit, its cautions, its problem."""
    parsed, ok_rows, outcome, records = batch.parsed, batch.ok_rows, batch.outcome, batch.records
    comma, n = records.decimal_comma, parsed.n
    names = [name for name in calc.scalar_results() if name in outcome.results]
    labels = list(records.labels)
    computed = np.zeros(n, dtype=bool)
    computed[ok_rows] = True
    ok_list = ok_rows.tolist()

    def spread(texts: list[str]) -> list[str]:
        """Texts of the computed rows placed on their rows; blank on refused rows."""
        if len(texts) == n:
            return texts
        out = [""] * n
        for row, text in zip(ok_list, texts, strict=True):
            out[row] = text
        return out

    passing = np.zeros(n, dtype=bool)
    passing[ok_rows] = passes(outcome, ok_rows.size)
    passes_column = np.where(passing, "true", np.where(computed, "false", "")).tolist()
    results = [spread(column_texts(outcome.results[name], comma)) for name in names]

    failing = [""] * n
    applies = [(c, ~c.ok & ~np.isnan(c.limit)) for c in outcome.checks]  # a check with no limit does not apply
    for k in np.flatnonzero(~passing[ok_rows]).tolist():
        failing[ok_list[k]] = "; ".join(
            f"{c.name} {failing_check(float(c.value[k]), float(c.limit[k]), comma)}" for c, fails in applies if fails[k]
        )
    cautions = [""] * n
    for notice in outcome.cautions:
        for k in np.flatnonzero(notice.rows).tolist():
            row = ok_list[k]
            cautions[row] = f"{cautions[row]} {notice.message}" if cautions[row] else notice.message
    problems = [""] * n
    for row in parsed.errors.by_row:
        problems[row] = parsed.errors.refusal(row).detail

    columns: list[list[Any]] = [
        [records.lines[row] for row in range(n)],
        *(safe_cells(records.labels[name]) for name in labels),
        np.where(computed, "true", "false").tolist(),
        passes_column,
        *(safe_cells(column) for column in results),
        safe_cells(failing),
        safe_cells(cautions),
        # The problem quotes the caller's column names, the labels are the caller's text: both may start a formula.
        safe_cells(problems),
    ]
    out = io.StringIO()
    CellWriter(out, lineterminator="\n", delimiter=records.separator).writerow(
        ["row", *labels, "computed", "passes", *names, "failing_checks", "cautions", "problem"]
    )
    csv.writer(out, lineterminator="\n", delimiter=records.separator).writerows(zip(*columns, strict=True))
    return out.getvalue()
