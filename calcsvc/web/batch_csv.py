"""A batch's CSV answer, written by columns a chunk of rows at a time: each result column formatted in bulk,
text only where a row fails a check, has a caution or was refused, each line joined from its cells (quoted as the CSV
writer quotes them), and each chunk sent as it is written, so memory does not grow with the batch."""

from __future__ import annotations

import io
from collections.abc import Iterator
from typing import Any

import numpy as np

from calcsvc.core.spec import CalculationSpec
from calcsvc.csv_cells import CellWriter, csv_text, safe_cells
from calcsvc.service.batch import Batch
from calcsvc.web.batch_json import passes
from calcsvc.web.sheet_text import column_texts, failing_check, guard_leaves

CHUNK_ROWS = 5_000


def csv_chunks(calc: CalculationSpec, batch: Batch) -> Iterator[str]:
    """One line per row, numbered as the sheet numbers it (header = row 1): its labels, whether it was computed and
    passes its checks, every scalar result, the failing checks with value and limit, its cautions, its problem."""
    parsed, ok_rows, outcome, records = batch.parsed, batch.ok_rows, batch.outcome, batch.records
    names = [name for name in calc.scalar_results() if name in outcome.results]
    labels = list(records.labels)
    out = io.StringIO()
    CellWriter(out, lineterminator="\n", delimiter=records.separator).writerow(
        ["row", *labels, "computed", "passes", *names, "failing_checks", "cautions", "problem"]
    )
    yield out.getvalue()
    position = np.full(parsed.n, -1, dtype=np.int64)
    position[ok_rows] = np.arange(ok_rows.size)
    passing = passes(outcome, ok_rows.size)
    for low in range(0, parsed.n, CHUNK_ROWS):
        yield _chunk(batch, names, labels, position[low : low + CHUNK_ROWS], low, passing)


def _chunk(
    batch: Batch, names: list[str], labels: list[str], position: np.ndarray, low: int, passing: np.ndarray
) -> str:
    """The lines of the rows from ``low`` on (``position``: each one's index among the computed rows, or -1)."""
    parsed, outcome, records = batch.parsed, batch.outcome, batch.records
    comma, size = records.decimal_comma, position.size
    computed = position >= 0
    at = np.flatnonzero(computed).tolist()  # the chunk's computed lines
    ks = position[computed]
    first, last = (int(ks[0]), int(ks[-1]) + 1) if ks.size else (0, 0)

    def spread(texts: list[str]) -> list[str]:
        """Texts of the computed rows placed on their lines; blank on refused rows."""
        if len(texts) == size:
            return texts
        out = [""] * size
        for line, text in zip(at, texts, strict=True):
            out[line] = text
        return out

    results = []
    for name in names:
        values = outcome.results[name][first:last]
        texts = spread(column_texts(values, comma))
        results.append(texts if guard_leaves(values, comma) else safe_cells(texts))
    chunk_passing = passing[first:last]
    failing = [""] * size
    applies = [(c, ~c.ok & ~np.isnan(c.limit)) for c in outcome.checks]  # a check with no limit does not apply
    for k in (np.flatnonzero(~chunk_passing) + first).tolist():
        failing[at[k - first]] = "; ".join(
            f"{c.name} {failing_check(float(c.value[k]), float(c.limit[k]), comma)}" for c, fails in applies if fails[k]
        )
    cautions = [""] * size
    for notice in outcome.cautions:
        for k in np.flatnonzero(notice.rows[first:last]).tolist():
            line = at[k]
            cautions[line] = f"{cautions[line]} {notice.message}" if cautions[line] else notice.message
    for line in at:  # the standing cautions of the parts each row names (a supply's kind) come after
        for message in parsed.cautions.get(low + line, []):
            cautions[line] = f"{cautions[line]} {message}" if cautions[line] else message
    problems = [""] * size
    for line in np.flatnonzero(~computed).tolist():
        problems[line] = parsed.errors.refusal(low + line).detail
    passes_column = [""] * size
    for line, ok in zip(at, np.where(chunk_passing, "true", "false").tolist(), strict=True):
        passes_column[line] = ok
    columns: list[list[Any]] = [
        records.lines[low : low + size],
        *(safe_cells(records.labels[name][low : low + size]) for name in labels),
        np.where(computed, "true", "false").tolist(),
        passes_column,
        *results,
        safe_cells(failing),
        safe_cells(cautions),
        # The problem quotes the caller's column names, the labels are the caller's text: both may start a formula.
        safe_cells(problems),
    ]
    return csv_text(columns, records.separator)
