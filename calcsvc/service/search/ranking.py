"""Scoring and ranking the rows of a search (order: calcsvc.service.search)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from calcsvc.core.outcome import BoolArray, FloatArray

IntArray = npt.NDArray[np.intp]


@dataclass(frozen=True)
class RowCheck:
    """One check on the accepted rows (``rows`` masks them among all rows); ``applies`` is False where its
    limit is unknown (e.g. a pin rating not given), as in a single request's check list."""

    name: str
    rows: BoolArray
    ok: BoolArray
    margin: FloatArray
    applies: BoolArray


@dataclass(frozen=True)
class Scores:
    """Per row: refused by the core, every check passes, the check of least margin (index into ``names``;
    -1 where none applies) and that margin (NaN where none applies). ``ladder`` holds each row's margins in
    ascending order (+inf for a check that does not apply), to break ties of the least margin by the next."""

    names: list[str]
    refused: BoolArray
    ok: BoolArray
    limiting: IntArray
    margin: FloatArray
    ladder: FloatArray

    def limiting_name(self, row: int) -> str | None:
        index = int(self.limiting[row])
        return None if index < 0 else self.names[index]


def score(refused: BoolArray, checks: list[RowCheck]) -> Scores:
    n = refused.shape[0]
    margins = np.full((n, len(checks)), np.inf)
    applies = np.zeros((n, len(checks)), dtype=bool)
    ok = ~refused
    for j, check in enumerate(checks):
        margin = np.where(np.isnan(check.margin), 0.0, check.margin)  # 0/0: a value on a zero limit is on the edge
        margins[check.rows, j] = np.where(check.applies, margin, np.inf)
        applies[check.rows, j] = check.applies
        ok[check.rows] &= check.ok
    limiting = np.argmin(margins, axis=1) if checks else np.zeros(n, dtype=np.intp)
    least = margins[np.arange(n), limiting] if checks else np.full(n, np.nan)
    none = ~applies.any(axis=1)
    limiting[none] = -1
    least[none] = np.nan
    return Scores([c.name for c in checks], refused, ok, limiting, least, np.sort(margins, axis=1))


@dataclass(frozen=True)
class Ranking:
    """``rank_by``: "margin" or a result column name; ``limit`` caps the rows listed."""

    rank_by: str = "margin"
    descending: bool = True
    limit: int = 20
    only_passing: bool = False


DEFAULT_RANKING = Ranking()


def rank(scores: Scores, key: FloatArray, descending: bool, count: int, only_passing: bool = False) -> IntArray:
    """The first ``count`` rows, best first (module docstring): passing rows by ``key`` (NaN last), failing
    ones after them, refused ones last; ties by least margin descending, then by the next-least margin and
    so on (a check every row shares, e.g. a fixed driver's, then does not hide the differences), then by row."""
    group = np.where(scores.ok, 0, np.where(scores.refused, 2, 1))
    signed = -key if descending else key
    by_key = np.where(scores.ok & ~np.isnan(signed), signed, np.inf)
    keys = [group, by_key, *(-scores.ladder.T), np.arange(group.shape[0])]
    return first_in_order(np.flatnonzero(scores.ok) if only_passing else np.arange(group.shape[0]), keys, count)


def first_in_order(rows: IntArray, keys: list[np.ndarray], count: int) -> IntArray:
    """The first ``count`` of ``rows`` in the lexicographic order of ``keys`` (most significant first, no
    NaN, the last unique). Partitions instead of sorting every row: each key keeps only the rows that can
    still make the cut, so the work is linear in the rows and a full sort runs on ``count`` of them."""
    if count <= 0:
        return rows[:0]
    sure: list[IntArray] = []
    need = count
    for key in keys:
        if rows.size <= need:
            break
        values = key[rows]
        threshold = np.partition(values, need - 1)[need - 1]
        better = rows[values < threshold]  # fewer than need: all of them make the cut
        sure.append(better)
        need -= better.size
        rows = rows[values == threshold]  # the ties at the cut, decided by the next key
    pool = np.concatenate([*sure, rows])
    return pool[np.lexsort([key[pool] for key in reversed(keys)])][:count]
