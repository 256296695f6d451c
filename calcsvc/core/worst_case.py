"""The worst case of a reviewed channel: each check reduced over the tolerance corners (``corners``, evaluated by
``tolerance``) to its corner of least margin, per row (ties: the first corner in order, low/min before high/max),
with the settings there of the quantities the check depends on."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from calcsvc.core.channel import ChannelInputs, ChannelReview, failing_names, review
from calcsvc.core.corners import BIPOLAR, CornerSet, corner_points, corner_set
from calcsvc.core.outcome import BoolArray, Check, FloatArray, row_count
from calcsvc.core.tolerance import by_row, evaluate_at

IntArray = npt.NDArray[np.intp]


@dataclass(frozen=True)
class WorstCheck:
    """One check at its worst corner, per row. ``check`` holds the value and limit there; ``check.ok`` is
    True where the check passes at every corner. ``corner_index`` indexes ``kind.corners``."""

    check: Check
    corner_index: IntArray
    depends_on: tuple[str, ...]
    kind: CornerSet = BIPOLAR

    @property
    def name(self) -> str:
        return self.check.name

    def margin(self) -> FloatArray:
        return self.check.margin()

    def corner(self, row: int) -> dict[str, str]:
        """The settings, at the worst corner of ``row``, of the quantities this check depends on."""
        settings = self.kind.corners[int(self.corner_index[row])]
        return {q: settings[q] for q in self.depends_on} | self.kind.held.get(self.name, {})


@dataclass(frozen=True)
class WorstCase:
    nominal: ChannelReview  # the design whose resistors were chosen and held fixed
    checks: list[WorstCheck]  # in the review's check order
    ok: BoolArray  # every check passes at every corner

    def check(self, name: str) -> WorstCheck:
        return next(c for c in self.checks if c.name == name)

    def failing(self) -> list[list[str]]:
        """Names of the checks failing at some corner, per row."""
        return failing_names([c.check for c in self.checks])


def _worst(check: Check, kind: CornerSet) -> WorstCheck:
    """Reduce a check over its corner axes to its corner of least margin."""
    flat = Check(check.name, by_row(check.ok), by_row(check.value), by_row(check.limit), check.sense, check.detail)
    margin = flat.margin()
    # 0/0 (value on a zero limit) is on the edge; without a limit rank by the value itself.
    key = np.where(np.isnan(margin), 0.0, margin)
    applies = ~np.isnan(flat.limit)
    if not applies.all():
        key = np.where(applies, key, -flat.value if check.sense == "max" else flat.value)
    # The first least corner in C order over the check's axes is the first in the kind's corners' order.
    index = np.argmin(key, axis=1)
    pick = index[:, None]
    worst = Check(
        check.name,
        flat.ok.all(axis=1),
        np.take_along_axis(flat.value, pick, axis=1)[:, 0],
        np.take_along_axis(flat.limit, pick, axis=1)[:, 0],
        check.sense,
        check.detail,
    )
    corner = np.ravel_multi_index(np.unravel_index(index, check.value.shape[1:]), kind.axes)
    return WorstCheck(worst, corner, kind.depends_on[check.name], kind)


def worst_case(inputs: ChannelInputs, nominal: ChannelReview | None = None) -> WorstCase:
    """Every check at its worst tolerance corner, for every row (model: module docstring).

    ``nominal``: the review of ``inputs`` when the caller has made it already. Without it the inputs are
    reviewed here, which raises DomainError when any row violates ``channel.validate``.
    """
    nominal = review(inputs) if nominal is None else nominal
    kind = corner_set(inputs)
    checks = [_worst(c, kind) for c in evaluate_at(inputs, nominal, corner_points(inputs, nominal))]
    ok = np.ones(row_count(inputs), dtype=bool)
    for c in checks:
        ok &= c.check.ok
    return WorstCase(nominal=nominal, checks=checks, ok=ok)
