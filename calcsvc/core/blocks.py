"""Evaluating a calculation over many rows in blocks of rows that stay in the processor's cache.

A calculation's numpy work makes tens of temporaries per row. Past about half a million rows (4 MB per array)
a whole evaluation's time per row nearly doubles (measured: 1,000,000 LED strings 1.3 s whole, 0.6 s in
blocks): each temporary arrives as fresh pages from the allocator and streams through memory. Evaluated
``BLOCK_ROWS`` rows at a time, the temporaries are reused from the allocator's free lists and stay in cache;
the answer is the same, because every calculation is row-wise: a row's results, checks, notices and violations
depend on that row alone.

What stays exact:
- violations: the blocks are only tested for validity; when any block has a violation the whole input is
  validated once more, so messages quote the same (first bad) row and rows are numbered as without blocks;
- results and checks: each block's columns are written into whole-length columns;
- notices: a notice belongs to the answer when some row raises it, in the calculation's own order; where the
  blocks' lists differ, that order is read from one evaluation of a row raising each notice.
Anything else (a result or check that is not one value per row, checks that differ between blocks) is
evaluated without blocks.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from typing import TypeVar

import numpy as np

from calcsvc.core.outcome import Check, Notice, Outcome, Violation, raise_violations, row_count, take

T = TypeVar("T")
_NOTICES = ("warnings", "cautions")

BLOCK_ROWS = 16_384
"""Rows per block, the fastest measured at 1,000,000 LED-string rows (4k to 128k tried)."""

BLOCKED_FROM = 500_000
"""Inputs of fewer rows are evaluated whole: there, joining the blocks' outcomes cost about what the blocks
saved. Measured, whole against blocks: 300,000 rows LED string 194 / 181 ms, NPN switch 174 / 188 ms;
500,000 rows 336 / 295 and 304 / 311 ms; 700,000 rows 1,088 / 617 and 1,050 / 599 ms."""


def evaluate(
    inputs: T, validate: Callable[[T], list[Violation]], outcome: Callable[[T], Outcome], validated: bool
) -> Outcome:
    """``outcome`` of ``inputs`` (validated inputs), evaluated in blocks when there are many rows; raises
    DomainError with ``validate``'s violations of the whole input unless ``validated``."""
    n = row_count(inputs)
    if n < BLOCKED_FROM or n <= BLOCK_ROWS or not _splittable(inputs, n):
        if not validated:
            raise_violations(validate(inputs))
        return outcome(inputs)
    blocks = [_rows(inputs, start, min(start + BLOCK_ROWS, n)) for start in range(0, n, BLOCK_ROWS)]
    if not validated and any(v.rows.any() for block in blocks for v in validate(block)):
        raise_violations(validate(inputs))  # the whole input's messages and row numbers
    parts = [outcome(block) for block in blocks]
    merged = _merged(parts, blocks, n, inputs, outcome)
    return outcome(inputs) if merged is None else merged


def _splittable(inputs: object, n: int) -> bool:
    """Every array field holds one entry per row (nothing such as a list of sweep points shared by all)."""
    arrays = [getattr(inputs, f.name) for f in dataclasses.fields(inputs)]  # type: ignore[arg-type]
    return all(x.shape[0] == n for x in arrays if isinstance(x, np.ndarray) and x.ndim >= 1)


def _rows(inputs: T, start: int, stop: int) -> T:
    changes = {}
    for f in dataclasses.fields(inputs):  # type: ignore[arg-type]
        value = getattr(inputs, f.name)
        if isinstance(value, np.ndarray) and value.ndim >= 1:
            changes[f.name] = value[start:stop]
    return dataclasses.replace(inputs, **changes)  # type: ignore[type-var]


def _merged(
    parts: list[Outcome], blocks: list[T], n: int, inputs: T, outcome: Callable[[T], Outcome]
) -> Outcome | None:
    """The blocks' outcomes as one; None where they do not line up one value per row."""
    first = parts[0]
    names = list(first.results)
    kinds = [(c.name, c.sense, c.detail) for c in first.checks]
    for part in parts:
        if list(part.results) != names or [(c.name, c.sense, c.detail) for c in part.checks] != kinds:
            return None
    join = _joiner(blocks, inputs, n)
    results = {name: join([p.results[name] for p in parts]) for name in names}
    checks = []
    for j, (name, sense, detail) in enumerate(kinds):
        columns = [join([getattr(p.checks[j], column) for p in parts]) for column in ("ok", "value", "limit")]
        checks.append(Check(name, *columns, sense, detail))  # type: ignore[arg-type]
    if any(column is None for column in results.values()) or any(
        column is None for c in checks for column in (c.ok, c.value, c.limit)
    ):
        return None
    sizes = [row_count(block) for block in blocks]
    notices = _notices(parts, sizes, inputs, outcome)
    if notices is None:
        return None
    return Outcome(results=results, checks=checks, **notices)  # type: ignore[arg-type]


def _joiner(blocks: list[T], inputs: T, n: int) -> Callable[[list[np.ndarray]], np.ndarray | None]:
    """``_joined`` once for each distinct set of the blocks' arrays: an array a block's outcome holds twice (a
    result that is also a check's value) or that is a block's slice of an input (a check's limit) is shared by
    the joined outcome as by one evaluation of every row, instead of copied again."""
    joined: dict[tuple[int, ...], np.ndarray | None] = {}
    for f in dataclasses.fields(inputs):  # type: ignore[arg-type]
        if isinstance(getattr(inputs, f.name), np.ndarray):
            joined[tuple(id(getattr(block, f.name)) for block in blocks)] = getattr(inputs, f.name)

    def join(columns: list[np.ndarray]) -> np.ndarray | None:
        key = tuple(map(id, columns))  # the blocks and their outcomes are alive: no id is reused meanwhile
        if key not in joined:
            joined[key] = _joined(columns, n)
        return joined[key]

    return join


def _joined(columns: list[np.ndarray], n: int) -> np.ndarray | None:
    """The blocks' columns end to end; None unless each is a column of its block's rows."""
    if not all(isinstance(c, np.ndarray) and c.ndim == 1 for c in columns):
        return None
    if sum(c.shape[0] for c in columns) != n or len({c.dtype for c in columns}) != 1:
        return None
    return np.concatenate(columns)


def _notices(
    parts: list[Outcome], sizes: list[int], inputs: T, outcome: Callable[[T], Outcome]
) -> dict[str, list[Notice]] | None:
    """Each warning and caution raised by some block, with its rows over the whole input, in the calculation's
    order (each lists its notices in one fixed order, leaving out those no row raises)."""
    n = sum(sizes)
    offsets = np.cumsum([0, *sizes]).tolist()
    rows: dict[str, dict[str, np.ndarray]] = {kind: {} for kind in _NOTICES}
    first_rows: list[int] = []
    orders: dict[str, tuple[str, ...] | None] = {}
    for kind, found in rows.items():
        lists = [getattr(part, kind) for part in parts]
        for b, notices in enumerate(lists):
            if len({notice.message for notice in notices}) != len(notices):
                return None  # one message twice: its notices cannot be told apart by message
            for notice in notices:
                if notice.rows.shape != (sizes[b],):
                    return None
                if notice.message not in found:
                    found[notice.message] = np.zeros(n, dtype=bool)
                    first_rows.append(offsets[b] + int(np.argmax(notice.rows)))
                found[notice.message][offsets[b] : offsets[b + 1]] = notice.rows
        distinct = {tuple(notice.message for notice in notices) for notices in lists if notices}
        order = next(iter(distinct)) if len(distinct) == 1 else ()
        orders[kind] = order if set(order) == set(found) else None
    if None in orders.values():
        # The order where no block raises every message: the outcome of one row raising each message.
        picked = np.zeros(n, dtype=bool)
        picked[first_rows] = True
        own = outcome(take(inputs, picked))
        for kind, order in orders.items():
            if order is None:
                orders[kind] = order = tuple(notice.message for notice in getattr(own, kind))
                if sorted(order) != sorted(rows[kind]):
                    return None
    return {kind: [Notice(rows[kind][m], m) for m in orders[kind] or ()] for kind in _NOTICES}
