"""Evaluating a calculation over many rows in blocks of rows that stay in the processor's cache.

A calculation's numpy work makes tens of temporaries per row. Over many rows each is a large array that
arrives as fresh pages from the allocator and streams through memory: past about half a million rows a whole
evaluation's time per row more than doubles (measured: LED strings 0.67 µs a row at 500,000 rows, 1.55 µs at
700,000; 1,000,000 rows 1.3 s whole, 0.46 s in blocks). Evaluated
``BLOCK_ROWS`` rows at a time, the temporaries are reused from the allocator's free lists and stay in cache;
the answer is the same, because every calculation is row-wise: a row's results, checks, notices and violations
depend on that row alone.

What stays exact:
- violations: the blocks are only tested for validity; when any block has a violation the whole input is
  validated once more, so messages quote the same (first bad) row and rows are numbered as without blocks;
- results and checks: each block's columns are written into whole-length columns as soon as the block is
  evaluated, while they are still in cache; arrays a block's outcome shares (a check's value that is also a
  result, a limit that is an input) are shared alike;
- notices: a notice belongs to the answer when some row raises it, in the calculation's own order; where the
  blocks' lists differ, that order is read from one evaluation of a row raising each notice.
Anything else (a result or check that is not one value per row, checks that differ between blocks) is
evaluated without blocks.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from typing import Any, TypeVar

import numpy as np

from calcsvc.core.outcome import Check, Notice, Outcome, Violation, raise_violations, row_count, take

T = TypeVar("T")
_NOTICES = ("warnings", "cautions")

BLOCK_ROWS = 16_384
"""Rows per block, the fastest measured at 1,000,000 LED-string rows (4k to 64k tried, alternated in one process:
8k 0.64 s, 16k 0.51 s, 32k 0.54 s, 64k 0.75 s)."""

BLOCKED_FROM = 100_000
"""Inputs of fewer rows are evaluated whole: there the blocks' own costs (a call's fixed cost per block, the
copies into the whole columns) ate what they saved. Measured, whole against blocks: 20,000 rows NPN switch 8.8 /
11.5 ms; 60,000 rows LED string 42 / 42 ms; 100,000 rows LED string 65 / 55, 68 / 54 and 66 / 54 ms, NPN switch
58 / 54 and 49 / 54 ms (CPU time, medians of 15 alternated calls in one process, runs in other orders);
150,000 rows LED string 98 / 85 ms and NPN switch 86 / 81 ms (two runs alike); 250,000 rows 190 / 142 and 147 /
136 ms."""


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
    joined = _Joined(inputs, n)
    start = 0
    for block in blocks:
        stop = start + row_count(block)
        if not joined.add(block, outcome(block), start, stop):
            return outcome(inputs)
        start = stop
    return joined.outcome(outcome)


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


class _Joined:
    """The blocks' outcomes, written into one outcome over every row a block at a time."""

    def __init__(self, inputs: Any, n: int) -> None:
        self.inputs, self.n = inputs, n
        self.fields = [f.name for f in dataclasses.fields(inputs) if isinstance(getattr(inputs, f.name), np.ndarray)]
        # The first block's layout: result names, checks, and where each of their arrays comes from (an input by
        # name, else the index of a distinct array); every block must have the same.
        self.layout: tuple[list[str], list[tuple[str, str, str]], list[str | int]] | None = None
        self.columns: list[np.ndarray] = []
        self.notices: dict[str, dict[str, np.ndarray]] = {kind: {} for kind in _NOTICES}
        self.orders: dict[str, set[tuple[str, ...]]] = {kind: set() for kind in _NOTICES}
        self.first_rows: list[int] = []

    def add(self, block: Any, part: Outcome, start: int, stop: int) -> bool:
        """Write one block's outcome at rows ``start:stop``; False where it does not line up with the others."""
        arrays = [*part.results.values(), *(getattr(c, col) for c in part.checks for col in ("ok", "value", "limit"))]
        own = {id(getattr(block, name)): name for name in self.fields}
        distinct: dict[int, int] = {}
        sources: list[str | int] = []
        fresh = []
        for array in arrays:
            if id(array) in own:
                sources.append(own[id(array)])
            else:
                if id(array) not in distinct:
                    distinct[id(array)] = len(fresh)
                    fresh.append(array)
                sources.append(distinct[id(array)])
        layout = (list(part.results), [(c.name, c.sense, c.detail) for c in part.checks], sources)
        if self.layout is None:
            if not all(isinstance(a, np.ndarray) and a.ndim == 1 for a in fresh):
                return False
            self.layout, self.columns = layout, [np.empty(self.n, dtype=a.dtype) for a in fresh]
        elif layout != self.layout:
            return False
        for column, array in zip(self.columns, fresh, strict=True):
            if not isinstance(array, np.ndarray) or array.shape != (stop - start,) or array.dtype != column.dtype:
                return False
            column[start:stop] = array
        return all(self._add_notices(kind, getattr(part, kind), start, stop) for kind in _NOTICES)

    def _add_notices(self, kind: str, notices: list[Notice], start: int, stop: int) -> bool:
        if len({notice.message for notice in notices}) != len(notices):
            return False  # one message twice: its notices cannot be told apart by message
        found = self.notices[kind]
        for notice in notices:
            if notice.rows.shape != (stop - start,):
                return False
            if notice.message not in found:
                found[notice.message] = np.zeros(self.n, dtype=bool)
                self.first_rows.append(start + int(np.argmax(notice.rows)))
            found[notice.message][start:stop] = notice.rows
        if notices:
            self.orders[kind].add(tuple(notice.message for notice in notices))
        return True

    def outcome(self, outcome: Callable[[Any], Outcome]) -> Outcome:
        """The joined outcome, once every block is added (``outcome`` evaluates rows for the notices' order)."""
        assert self.layout is not None
        names, kinds, sources = self.layout
        whole = [getattr(self.inputs, s) if isinstance(s, str) else self.columns[s] for s in sources]
        results = dict(zip(names, whole, strict=False))
        columns = iter(whole[len(names) :])
        checks = [
            Check(name, next(columns), next(columns), next(columns), sense, detail)  # type: ignore[arg-type]
            for name, sense, detail in kinds
        ]
        orders = {kind: self._order(kind) for kind in _NOTICES}
        if None in orders.values():
            # No block raised every message: the order of one evaluation of a row raising each message.
            picked = np.zeros(self.n, dtype=bool)
            picked[self.first_rows] = True
            own = outcome(take(self.inputs, picked))
            for kind, order in orders.items():
                if order is None:
                    orders[kind] = order = tuple(notice.message for notice in getattr(own, kind))
                    if sorted(order) != sorted(self.notices[kind]):
                        return outcome(self.inputs)
        notices = {kind: [Notice(self.notices[kind][m], m) for m in orders[kind] or ()] for kind in _NOTICES}
        return Outcome(results=results, checks=checks, **notices)

    def _order(self, kind: str) -> tuple[str, ...] | None:
        """The one order of the blocks' lists when they agree and one holds every message (each calculation lists
        its notices in one fixed order, leaving out those no row raises)."""
        orders = self.orders[kind]
        order = next(iter(orders)) if len(orders) == 1 else ()
        return order if set(order) == set(self.notices[kind]) else None
