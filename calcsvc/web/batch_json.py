"""A batch's JSON answers: one object per row, written in chunks as it is sent, or one array per result.

The rows answer of 100,000 rows is about 80 MiB of JSON and two million Python objects; built whole, it took
most of a worker's memory. It is streamed instead: the rows are built, serialized and sent a chunk at a time,
so memory stays bounded whatever the batch's size, and the bytes are the ones the whole answer would have.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import numpy as np
import orjson

from calcsvc.core.outcome import Outcome
from calcsvc.core.spec import CalculationSpec
from calcsvc.service.batch import Batch, ParsedRows, Records
from calcsvc.service.envelope import SWEEP_KEYS, row_sweeps, to_json_value
from calcsvc.service.gc_pause import paused_gc
from calcsvc.web.problems import problem_document, service_problem

CHUNK_ROWS = 2_000  # rows built and serialized at a time: small against the batch, large against the call cost
_NUMPY = orjson.OPT_SERIALIZE_NUMPY


def row_problem(parsed: ParsedRows, row: int) -> dict[str, Any]:
    """A bad row's problem document, as a single request with its inputs would have been answered."""
    return problem_document(service_problem(parsed.errors.refusal(row)))


def passes(outcome: Outcome, count: int) -> np.ndarray:
    """Whether each computed row passes every check that applies to it (a check with no limit there does not)."""
    found = np.ones(count, dtype=bool)
    for check in outcome.checks:
        found &= check.ok | np.isnan(check.limit)
    return found


def _labels(records: Records, row: int) -> dict[str, Any]:
    return {name: values[row] for name, values in records.labels.items()}


def _row_chunk(
    calc: CalculationSpec, batch: Batch, low: int, high: int, position: np.ndarray, ok_passes: np.ndarray
) -> list[dict[str, Any]]:
    """The answer's objects of rows ``low`` to ``high`` (``position``: each row's index among the computed rows,
    -1 for a refused row; ``ok_passes``: whether each computed row passes its checks)."""
    parsed, outcome = batch.parsed, batch.outcome
    computed = position[low:high]
    computed = computed[computed >= 0]
    first, last = (int(computed[0]), int(computed[-1]) + 1) if computed.size else (0, 0)
    names = [name for name in calc.scalar_results() if name in outcome.results]
    results = [to_json_value(outcome.results[name][first:last]) for name in names]
    sweeps = row_sweeps(outcome, last)[first:] if "sweep_row" in outcome.results else [None] * (last - first)
    checks = [
        (
            c.name,
            c.ok[first:last].tolist(),
            to_json_value(c.value[first:last]),
            to_json_value(c.limit[first:last]),
            to_json_value(c.margin()[first:last]),
        )
        for c in outcome.checks
    ]
    notices: dict[str, list[list[str]]] = {kind: [[] for _ in range(last - first)] for kind in ("warnings", "cautions")}
    for kind, found in (("warnings", outcome.warnings), ("cautions", outcome.cautions)):
        for notice in found:
            for k in np.flatnonzero(notice.rows[first:last]):
                notices[kind][k].append(notice.message)
    ok = ok_passes[first:last].tolist()
    labelled = bool(batch.records.labels)
    rows = []
    for row, at in zip(range(low, high), position[low:high].tolist(), strict=True):
        labels = {"labels": _labels(batch.records, row)} if labelled else {}
        if at < 0:
            rows.append({"row": row, **labels, "ok": False, "passes": None, "problem": row_problem(parsed, row)})
            continue
        k = at - first
        row_results = dict(zip(names, (column[k] for column in results), strict=True))
        if sweeps[k] is not None:
            row_results["sweep"] = {key: to_json_value(values) for key, values in sweeps[k].items()}
        rows.append(
            {
                "row": row,
                **labels,
                "ok": True,
                "passes": ok[k],
                "results": row_results,
                "checks": [
                    {"name": name, "ok": oks[k], "value": value[k], "limit": limit[k], "margin": margin[k]}
                    for name, oks, value, limit, margin in checks
                    if limit[k] is not None  # a check whose limit is unknown on this row does not apply
                ],
                "warnings": parsed.warnings.get(row, []) + notices["warnings"][k],
                "cautions": notices["cautions"][k] + parsed.cautions.get(row, []),
                "parts": parsed.parts.get(row, []),
            }
        )
    return rows


def streamed_rows(calc: CalculationSpec, batch: Batch, head: dict[str, Any]) -> Iterator[bytes]:
    """``head`` with a ``rows`` array of one object per row, as bytes a chunk of rows at a time."""
    n = batch.parsed.n
    position = np.full(n, -1, dtype=np.int64)
    position[batch.ok_rows] = np.arange(batch.ok_rows.size)
    ok_passes = passes(batch.outcome, batch.ok_rows.size)
    yield orjson.dumps(head, option=_NUMPY)[:-1] + b',"rows":['
    for low in range(0, n, CHUNK_ROWS):
        with paused_gc():
            chunk = orjson.dumps(
                _row_chunk(calc, batch, low, min(n, low + CHUNK_ROWS), position, ok_passes), option=_NUMPY
            )
        yield (b"," if low else b"") + chunk[1:-1]
    yield b"]}"


def streamed_columns(calc: CalculationSpec, batch: Batch, head: dict[str, Any]) -> Iterator[bytes]:
    """``head`` and the columns answer (``json_columns``) as bytes, a result or a check at a time: each one's
    full-length arrays are built as it is written and let go after, so the answer is never whole in memory."""
    return _streamed({**head, **json_columns(calc, batch)}, depth=3)


def _streamed(value: Any, depth: int) -> Iterator[bytes]:
    """The bytes ``orjson.dumps(value)`` gives, a dict's members written one at a time down to ``depth`` levels; a
    callable member is called when it is written."""
    if callable(value):
        value = value()
    if depth == 0 or not isinstance(value, dict) or not value:
        yield orjson.dumps(value, option=_NUMPY)
        return
    for k, (key, member) in enumerate(value.items()):
        yield (b"," if k else b"{") + orjson.dumps(key) + b":"
        yield from _streamed(member, depth - 1)
    yield b"}"


def json_columns(calc: CalculationSpec, batch: Batch) -> dict[str, Any]:
    """The same answer as the rows, one array per result and check (element i belongs to row i); each result
    and check as a function building its arrays (``streamed_columns`` calls it as it writes it).

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
    results: dict[str, Any] = {
        name: lambda name=name: full(outcome.results[name]) for name in calc.scalar_results() if name in outcome.results
    }
    if "sweep_row" in outcome.results:
        # One array per row that sweeps (its own length), null for the others.
        sweeps: list[dict[str, np.ndarray] | None] = [None] * n
        for row, sweep in zip(ok_rows.tolist(), row_sweeps(outcome, ok_rows.size), strict=True):
            sweeps[row] = sweep
        results["sweep"] = {key: [None if s is None else s[key] for s in sweeps] for key in SWEEP_KEYS}
    checks = {
        check.name: lambda check=check: {
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
        "passes": full(passes(outcome, ok_rows.size), False),
        "results": results,
        "checks": checks,
        **notices,
        "parts": {str(row): used for row, used in parsed.parts.items()},
        "problems": {str(row): row_problem(parsed, row) for row in parsed.errors.by_row},
    }
