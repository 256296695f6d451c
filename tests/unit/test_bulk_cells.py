"""Cells formatted a column at a time read exactly as the cell-by-cell functions write them."""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest

from calcsvc.csv_cells import csv_text, safe_cell, safe_cells
from calcsvc.web.sheet_text import cell_value, column_texts, guard_leaves, number_texts


def awkward_values() -> np.ndarray:
    rng = np.random.default_rng(5)
    magnitudes = 10.0 ** rng.uniform(-320, 308, 2000)
    signs = rng.choice([-1.0, 1.0], 2000)
    special = [284.99999999999994, -7.000000000000001, 0.0, -0.0]
    special += [np.nan, np.inf, -np.inf, 0.1 + 0.2, 300.0, 1e16, 1e-5, 123456789012.5, 5e-324, 1.7e308]
    # Within a few parts in 1e12 of a whole number: twelve digits round some of them to it ("285.0"), not others.
    whole = np.round(10.0 ** rng.uniform(-1, 11, 1000))
    near = whole * (1 + rng.uniform(-2e-11, 2e-11, 1000)) * rng.choice([-1.0, 1.0], 1000)
    special += [0.99999999999995, 0.9999999999994, 99999999999.99998, 1e-12, 4.9999999999999996e-12]
    return np.concatenate([magnitudes * signs, np.round(rng.uniform(0, 100, 500), 3), near, special])


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


@pytest.mark.parametrize("separator", [",", ";"])
def test_csv_text_is_what_the_csv_writer_writes(separator: str) -> None:
    # Lines joined a column at a time must quote exactly the cells the standard writer quotes (a separator, a
    # quote or a line feed inside; a lone carriage return is not quoted with "\n" lines) and write non-text cells
    # as it does (None blank, floats by repr, the rest by str).
    rng = np.random.default_rng(8)
    alphabet = ["a", ",", ";", '"', "\n", "\r", " ", "\t", "'", "=", "-", "1", ".", "é"]
    others = [None, 1.5, -2e-7, 3, True, 1e22, float("nan"), [1, 2], {"a": ","}]
    for _ in range(500):
        columns = [
            [
                "".join(rng.choice(alphabet, int(rng.integers(0, 6))))
                if rng.random() < 0.7
                else others[int(rng.integers(len(others)))]
                for _row in range(3)
            ]
            for _column in range(int(rng.integers(2, 6)))
        ]
        out = io.StringIO()
        csv.writer(out, lineterminator="\n", delimiter=separator).writerows(zip(*columns, strict=True))
        assert csv_text(columns, separator) == out.getvalue()
    assert csv_text([[1, 2], ["a", "b,c"]], ",") == '1,a\n2,"b,c"\n'
    assert csv_text([[], []], ",") == ""


@pytest.mark.parametrize("comma", [False, True])
def test_bulk_rounding_to_twelve_digits_agrees_with_the_formatter_near_its_ties(comma: bool) -> None:
    """Where the bulk path rounds in numpy: random values over its sizes, and decimals of thirteen digits ending
    in 5 (halfway in decimal, a hair either side in binary), whose twelfth digit the rounding decides."""
    rng = np.random.default_rng(12)
    spread = 10.0 ** rng.uniform(-4.5, 11.5, 100_000) * rng.choice([-1.0, 1.0], 100_000)
    halves = (rng.integers(10**11, 10**12, 50_000) * 10 + 5) * 10.0 ** rng.integers(-17, -1, 50_000)
    edges = np.array([1e-4, 0.99999999999995e-4, 99999999999.95, 1e11, 0.5, 9.9999999999995, 999999999999.5e-12])
    values = np.concatenate([spread, halves, edges, np.nextafter(edges, 0), np.nextafter(edges, 1)])
    assert number_texts(values, comma) == [cell_value(v, comma) for v in values.tolist()]


@pytest.mark.parametrize("comma", [False, True])
def test_a_column_the_guard_is_said_to_leave_it_leaves(comma: bool) -> None:
    values = awkward_values()
    columns = [values, np.abs(values), np.abs(values[np.isfinite(values)]), values[values != -np.inf]]
    columns += [np.array([True, False]), np.array([-3, 0, 7]), np.array([np.nan, -np.inf]), np.array([-1e-5, 2.0])]
    said = [guard_leaves(column, comma) for column in columns]
    assert said == [False, True, True, not comma, True, True, False, not comma]
    for column, leaves in zip(columns, said, strict=True):
        texts = column_texts(column, comma)
        assert not leaves or safe_cells(texts) == texts
