"""A batch's JSON answers: one object per row, written in chunks as it is sent, or one array per result.

The rows answer of 100,000 rows is about 80 MiB of JSON and two million Python objects; built whole, it took
most of a worker's memory. It is streamed instead: the rows are built, serialized and sent a chunk at a time,
so memory stays bounded whatever the batch's size, and the bytes are the ones the whole answer would have.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from itertools import repeat
from typing import Any

import numpy as np
import orjson

from calcsvc.core.outcome import Outcome
from calcsvc.core.spec import CalculationSpec
from calcsvc.service.batch import Batch, ParsedRows
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


def _texts(values: np.ndarray) -> list[bytes]:
    """Each element's JSON text, as orjson writes it anywhere in a document (NaN: null). Numbers and booleans
    are serialized as one array and split at its commas, which none of their texts holds; orjson writes a
    float64 array's elements as it writes Python floats (NaN and infinities as null), without boxing them."""
    if not values.size:
        return []
    if values.dtype.kind in "biuf":
        if values.dtype.kind == "f":
            values = values.astype(np.float64, copy=False)
        return orjson.dumps(np.ascontiguousarray(values), option=_NUMPY)[1:-1].split(b",")
    return [orjson.dumps(value, option=_NUMPY) for value in to_json_value(values)]


def _listed(count: int, lists: dict[int, list[Any]]) -> list[bytes]:
    """The JSON text of each of ``count`` rows' lists, ``lists`` holding the rows that have any."""
    texts = [b"[]"] * count
    known: dict[tuple[str, ...], bytes] = {}  # many rows carry the same messages
    for k, found in lists.items():
        if all(type(item) is str for item in found):
            key = tuple(found)
            texts[k] = known.get(key) or known.setdefault(key, orjson.dumps(found))
        else:
            texts[k] = orjson.dumps(found, option=_NUMPY)
    return texts


@dataclass(frozen=True)
class _Computed:
    """What every chunk of the rows answer reads, found once for the batch: each row's index among the computed
    rows (-1 for a refused row), whether each computed row passes its checks, and each check's margins."""

    position: np.ndarray
    passes: np.ndarray
    margins: list[np.ndarray]


def _computed_rows(
    calc: CalculationSpec, batch: Batch, rows: np.ndarray, first: int, last: int, computed: _Computed
) -> list[bytes]:
    """The JSON objects of the computed rows ``first`` to ``last`` (their numbers in the body: ``rows``), each
    joined from its values' texts and the keys between them; the rows are grouped by which checks apply to them
    (a check whose limit is unknown on a row is left out there), so each group shares one sequence of keys."""
    parsed, outcome = batch.parsed, batch.outcome
    count, numbers = last - first, rows.tolist()
    pieces: list[Any] = [b'{"row":', _texts(rows)]
    if batch.records.labels:
        labels = [{name: values[row] for name, values in batch.records.labels.items()} for row in numbers]
        pieces += [b',"labels":', [orjson.dumps(found) for found in labels]]
    pieces += [b',"ok":true,"passes":', _texts(computed.passes[first:last]), b',"results":{']
    names = [name for name in calc.scalar_results() if name in outcome.results]
    for j, name in enumerate(names):
        pieces += [(b"," if j else b"") + orjson.dumps(name) + b":", _texts(outcome.results[name][first:last])]
    if "sweep_row" in outcome.results:
        lead = b',"sweep":' if names else b'"sweep":'
        sweeps = row_sweeps(outcome, last)[first:]
        pieces.append(
            [b"" if s is None else lead + orjson.dumps({k: to_json_value(v) for k, v in s.items()}) for s in sweeps]
        )
    pieces.append(b'},"checks":[')
    head = len(pieces)
    checks = [
        [
            b'{"name":' + orjson.dumps(c.name) + b',"ok":',
            _texts(c.ok[first:last]),
            b',"value":',
            _texts(c.value[first:last]),
            b',"limit":',
            _texts(c.limit[first:last]),
            b',"margin":',
            _texts(margin[first:last]),
            b"}",
        ]
        for c, margin in zip(outcome.checks, computed.margins, strict=True)
    ]
    warnings: dict[int, list[str]] = {}
    cautions: dict[int, list[str]] = {}
    parts: dict[int, list[dict[str, Any]]] = {}
    for k, row in enumerate(numbers):
        if row in parsed.warnings:
            warnings[k] = list(parsed.warnings[row])
        if row in parsed.parts:
            parts[k] = parsed.parts[row]
    for found, notices in ((warnings, outcome.warnings), (cautions, outcome.cautions)):
        for notice in notices:
            for k in np.flatnonzero(notice.rows[first:last]).tolist():
                found.setdefault(k, []).append(notice.message)
    for k, row in enumerate(numbers):
        if row in parsed.cautions:
            cautions.setdefault(k, []).extend(parsed.cautions[row])
    tail = [b'],"warnings":', _listed(count, warnings), b',"cautions":', _listed(count, cautions)]
    tail += [b',"parts":', _listed(count, parts), b"}"]
    applies = np.array([~np.isnan(c.limit[first:last]) for c in outcome.checks], dtype=bool).reshape(-1, count)
    if applies.all():  # the usual case, without sorting the rows' patterns
        patterns, group = np.ones((1, len(checks)), dtype=bool), np.zeros(count, dtype=np.int64)
    else:
        patterns, group = np.unique(applies.T, axis=0, return_inverse=True)
    texts: list[bytes] = [b""] * count
    for g, pattern in enumerate(patterns):
        chosen = [check for check, applied in zip(checks, pattern.tolist(), strict=True) if applied]
        sequence = [*pieces[:head], *_joined(chosen), *tail]
        if len(patterns) == 1:
            members = range(count)
        else:
            members = np.flatnonzero(group.reshape(-1) == g).tolist()
            sequence = [piece if isinstance(piece, bytes) else [piece[k] for k in members] for piece in sequence]
        # A key's text repeats on every row; the rows' own values run out together (strict=False: repeat never does).
        columns = [repeat(piece) if isinstance(piece, bytes) else piece for piece in _merged(sequence)]
        for k, text in zip(members, map(b"".join, zip(*columns, strict=False)), strict=True):
            texts[k] = text
    return texts


def _merged(sequence: list[Any]) -> list[Any]:
    """``sequence`` with neighbouring fixed texts joined into one, so each row joins fewer pieces."""
    merged: list[Any] = []
    for piece in sequence:
        if isinstance(piece, bytes) and merged and isinstance(merged[-1], bytes):
            merged[-1] += piece
        else:
            merged.append(piece)
    return merged


def _joined(checks: list[list[Any]]) -> list[Any]:
    """The pieces of the checks one after another, separated by commas."""
    joined: list[Any] = []
    for j, check in enumerate(checks):
        joined += [b",", *check] if j else check
    return joined


def _row_chunk(calc: CalculationSpec, batch: Batch, low: int, high: int, computed: _Computed) -> bytes:
    """The answer's objects of rows ``low`` to ``high``, comma-separated."""
    at = computed.position[low:high]
    lines = np.arange(low, high)
    was = at >= 0
    ks = at[was]
    texts = _computed_rows(calc, batch, lines[was], int(ks[0]), int(ks[-1]) + 1, computed) if ks.size else []
    if not was.all():
        done = iter(texts)
        texts = [next(done) if c else _refused(batch, row) for row, c in zip(lines.tolist(), was.tolist(), strict=True)]
    return b",".join(texts)


def _refused(batch: Batch, row: int) -> bytes:
    labels = {"labels": {name: values[row] for name, values in batch.records.labels.items()}}
    return orjson.dumps(
        {
            "row": row,
            **(labels if batch.records.labels else {}),
            "ok": False,
            "passes": None,
            "problem": row_problem(batch.parsed, row),
        },
        option=_NUMPY,
    )


def streamed_rows(calc: CalculationSpec, batch: Batch, head: dict[str, Any]) -> Iterator[bytes]:
    """``head`` with a ``rows`` array of one object per row, as bytes a chunk of rows at a time."""
    n = batch.parsed.n
    position = np.full(n, -1, dtype=np.int64)
    position[batch.ok_rows] = np.arange(batch.ok_rows.size)
    margins = [check.margin() for check in batch.outcome.checks]
    computed = _Computed(position, passes(batch.outcome, batch.ok_rows.size), margins)
    yield orjson.dumps(head, option=_NUMPY)[:-1] + b',"rows":['
    for low in range(0, n, CHUNK_ROWS):
        with paused_gc():
            chunk = _row_chunk(calc, batch, low, min(n, low + CHUNK_ROWS), computed)
        yield (b"," if low else b"") + chunk
    yield b"]}"


def streamed_columns(calc: CalculationSpec, batch: Batch, head: dict[str, Any]) -> Iterator[bytes]:
    """``head`` and the columns answer (``json_columns``) as bytes, a result or a check at a time: each one's
    full-length arrays are built as it is written and let go after, so the answer is never whole in memory."""
    outcome = batch.outcome
    held = [*outcome.results.values(), *(a for c in outcome.checks for a in (c.ok, c.value, c.limit))]
    return _ArrayTexts(held).streamed({**head, **json_columns(calc, batch)}, depth=3)


class _ArrayTexts:
    """Writes the arrays of one answer. An array of one repeated value is written as that value's text repeated,
    and the text of an array the answer holds more than once (a check's value that is also a result) is kept
    until its last use: serializing a float is most of the answer's cost. ``held`` are the arrays that live as
    long as the answer (the outcome's own), so their ids name them; an array built for one member is never
    kept, as its id may be reused once it is freed."""

    def __init__(self, held: list[np.ndarray]) -> None:
        uses: dict[int, int] = {}
        for array in held:
            uses[id(array)] = uses.get(id(array), 0) + 1
        self.uses = {key: count for key, count in uses.items() if count > 1}
        self.texts: dict[int, bytes] = {}

    def streamed(self, value: Any, depth: int) -> Iterator[bytes]:
        """The bytes ``orjson.dumps(value)`` gives, a dict's members written one at a time down to ``depth``
        levels; a callable member is called when it is written."""
        if callable(value):
            value = value()
        if isinstance(value, np.ndarray):
            yield self.text(value)
        elif depth == 0 or not isinstance(value, dict) or not value:
            yield orjson.dumps(value, option=_NUMPY)
        else:
            for k, (key, member) in enumerate(value.items()):
                yield (b"," if k else b"{") + orjson.dumps(key) + b":"
                yield from self.streamed(member, depth - 1)
            yield b"}"

    def text(self, array: np.ndarray) -> bytes:
        key = id(array)
        if key not in self.uses:
            return _array_text(array)
        found = self.texts.get(key) or self.texts.setdefault(key, _array_text(array))
        self.uses[key] -= 1
        if not self.uses[key]:
            del self.uses[key], self.texts[key]
        return found


def _array_text(array: np.ndarray) -> bytes:
    """``orjson.dumps(array)``; a one-dimensional float array whose elements are all the same bits is written as
    its first element's text repeated (equal bits, equal text: -0.0 and 0.0 differ, and so they do here; a NaN
    is null either way). Booleans are not worth it: orjson writes them about as fast as it copies."""
    if array.ndim == 1 and array.size > 1 and array.dtype == np.float64:
        bits = array.view(np.uint64)
        # Ends and middle first: a column that varies is almost always told by them without a full scan.
        if bits[0] == bits[-1] == bits[array.size // 2] and (bits == bits[0]).all():
            text = orjson.dumps(array[:1], option=_NUMPY)[1:-1]
            return b"[" + (text + b",") * (array.size - 1) + text + b"]"
    return orjson.dumps(array, option=_NUMPY)


def json_columns(calc: CalculationSpec, batch: Batch) -> dict[str, Any]:
    """The same answer as the rows, one array per result and check (element i belongs to row i); each result
    and check as a function building its arrays (``streamed_columns`` calls it as it writes it).

    Arrays go to the serializer as they are, with no object per row, which is what makes large batches fast.
    A row that was not computed has ok false, passes false, null results and null check values, and its problem.
    """
    parsed, ok_rows, outcome = batch.parsed, batch.ok_rows, batch.outcome
    n = parsed.n

    def full(column: np.ndarray, fill: Any = np.nan) -> np.ndarray:
        if ok_rows.size == n:  # every row computed: the column itself, as the serializer needs it
            return np.ascontiguousarray(column)
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
