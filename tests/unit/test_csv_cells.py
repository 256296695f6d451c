"""CSV cells a spreadsheet would run as formulas are written inert; numbers stay numbers; reading undoes it."""

from __future__ import annotations

import csv
import io

import pytest

from calcsvc.csv_cells import CellWriter, original_cell, safe_cell

FORMULAS = ["=1+1", '=HYPERLINK("http://example.invalid","x")', "+1+1", "-1+cmd|' /C calc'!A0", "@SUM(1)",
            "\t=1+1", "\r=1+1", "-", "+", "- 5 V"]  # fmt: skip
NUMBERS = ["-0.5", "+3", "-1e-3", "-.5", "12 V", "npn", "", "a=b", " =1"]


@pytest.mark.parametrize("text", FORMULAS)
def test_text_a_spreadsheet_would_evaluate_gets_a_leading_quote(text: str) -> None:
    assert safe_cell(text) == "'" + text
    assert original_cell(safe_cell(text)) == text


@pytest.mark.parametrize("value", [*NUMBERS, -0.5, 2.0, 7, None, True])
def test_numbers_and_plain_text_are_untouched(value: object) -> None:
    assert safe_cell(value) is value


@pytest.mark.parametrize("text", ["'=1+1", "''@x", "'plain", "'", "'-0.5"])
def test_text_that_already_starts_with_a_quote_survives_the_round_trip(text: str) -> None:
    assert original_cell(safe_cell(text)) == text


def test_the_writer_quotes_every_cell_it_writes() -> None:
    out = io.StringIO()
    writer = CellWriter(out, lineterminator="\n")
    writer.writerow(["=name", -0.5, "-0.5"])
    writer.writerows([["@x", 1.0, "+1+1"]])
    assert list(csv.reader(io.StringIO(out.getvalue()))) == [["'=name", "-0.5", "-0.5"], ["'@x", "1.0", "'+1+1"]]
