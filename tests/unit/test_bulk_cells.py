"""Cells formatted a column at a time read exactly as the cell-by-cell functions write them."""

from __future__ import annotations

import numpy as np
import pytest

from calcsvc.csv_cells import safe_cell, safe_cells
from calcsvc.web.sheet_text import cell_value, column_texts, number_texts


def awkward_values() -> np.ndarray:
    rng = np.random.default_rng(5)
    magnitudes = 10.0 ** rng.uniform(-320, 308, 2000)
    signs = rng.choice([-1.0, 1.0], 2000)
    special = [284.99999999999994, -7.000000000000001, 0.0, -0.0]
    special += [np.nan, np.inf, -np.inf, 0.1 + 0.2, 300.0, 1e16, 1e-5, 123456789012.5, 5e-324, 1.7e308]
    return np.concatenate([magnitudes * signs, np.round(rng.uniform(0, 100, 500), 3), special])


@pytest.mark.parametrize("comma", [False, True])
def test_number_texts_equal_cell_value_per_cell(comma: bool) -> None:
    values = awkward_values()
    assert number_texts(values, comma) == [cell_value(v, comma) for v in values.tolist()]


def test_column_texts_of_flags_and_whole_numbers() -> None:
    flags = np.array([True, False])
    whole = np.array([3, -1, 0])
    assert column_texts(flags) == [cell_value(v) for v in flags.tolist()] == ["true", "false"]
    assert column_texts(whole) == [cell_value(v) for v in whole.tolist()] == ["3", "-1", "0"]
    assert column_texts(np.array([])) == []


@pytest.mark.parametrize(
    "column",
    [
        ["12 V", "bench A", "", "-0.5"],
        ["=1+1", "ok", "'=quoted", "-1+cmd"],
        [1.5, "@SUM(1)", None, "x"],
        ["-0,5", "0,5"],
        ["'plain", "text"],
    ],
)
def test_safe_cells_equal_safe_cell_per_cell(column: list[object]) -> None:
    assert safe_cells(column) == [safe_cell(cell) for cell in column]
