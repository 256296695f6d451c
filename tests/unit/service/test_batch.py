"""Batch rows as typed columns, called directly: units in cells, parts per row, bad rows isolated with the
refusal a single request would get."""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calcsvc.core import led_string
from calcsvc.data.database import Database
from calcsvc.service import batch
from calcsvc.service.batch import parse_cells, parse_rows, read_records, run_batch
from calcsvc.service.batch_read import Cells
from calcsvc.service.errors import InvalidInput, MalformedBody, PhysicallyImpossible, TooLarge, UnknownPart
from calcsvc.service.resolve import PartResolver

CALC = led_string.SPEC
LED = {"vf_typ_v": 2.0, "vf_min_v": 1.8, "vf_max_v": 2.4, "if_max_a": 0.03, "leds_in_series": 3}


def test_units_in_cells_are_converted_to_si() -> None:
    parsed = parse_rows(CALC, [{**LED, "supply_v": "12 V", "current_a": "20 mA"}], PartResolver(None))
    assert not parsed.errors.by_row
    assert parsed.columns["current_a"].tolist() == [pytest.approx(0.02)]
    assert parsed.columns["strings"].tolist() == [1.0]  # the declared default fills the blank


def test_range_messages_carry_the_unit_as_a_single_request_does() -> None:
    parsed = parse_rows(CALC, [{**LED, "supply_v": 12, "current_a": 0}], PartResolver(None))
    assert parsed.errors.by_row[0] == {"current_a": ["must be greater than 0 A"]}
    assert isinstance(parsed.errors.refusal(0), InvalidInput)


def test_each_row_names_its_own_part(database: Database) -> None:
    rows = [
        {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "leds_in_series": 3, "current_a": 0.02},
        {"supply_v": 9, "led": "led-red-5mm", "leds_in_series": 3, "current_a": 0.015, "vf_typ_v": 2.1},
        {"supply_v": 9, "led": "led-missing", "leds_in_series": 3, "current_a": 0.015},
    ]
    with database.transaction() as session:
        parsed = parse_rows(CALC, rows, PartResolver(session))
    assert parsed.columns["supply_v"][:2].tolist() == [12.0, 9.0]
    assert parsed.columns["vf_typ_v"][1] == 2.1  # an explicit value wins over the part's
    assert [p["part_id"] for p in parsed.parts[0]] == ["supply-adapter-12v-2a", "led-red-5mm"]
    refusal = parsed.errors.refusal(2)
    assert isinstance(refusal, UnknownPart) and "led" in (refusal.errors or {})


def test_a_physically_impossible_row_is_refused_as_such_and_the_others_computed(database: Database) -> None:
    good = {**LED, "supply_v": 12, "current_a": 0.02}
    body = json.dumps([good, {**good, "supply_v": 5}, {**good, "colour": "red"}]).encode()
    batch = run_batch(database, CALC, body, False, 10, 10)
    assert batch.ok_rows.tolist() == [0]
    impossible = batch.parsed.errors.refusal(1)
    assert isinstance(impossible, PhysicallyImpossible) and "forward voltage" in impossible.errors["supply_v"][0]
    assert isinstance(batch.parsed.errors.refusal(2), InvalidInput)
    assert batch.outcome.results["resistor_ohm"].tolist() == [300.0]


def test_csv_blanks_are_absent_and_bad_bodies_refused() -> None:
    records = read_records(CALC, b"supply_v,strings\n12 V,\n", True, 5)
    assert records.cells.values == {"supply_v": ["12 V"], "strings": [""]} and records.blank_is_absent
    parsed = parse_cells(CALC, records.cells, PartResolver(None), records.blank_is_absent)
    assert np.isnan(parsed.columns["current_a"][0]) and parsed.columns["strings"][0] == 1.0
    with pytest.raises(MalformedBody):
        read_records(CALC, b"[{", False, 5)
    with pytest.raises(InvalidInput):
        read_records(CALC, b'{"supply_v": 12}', False, 5)
    with pytest.raises(TooLarge) as too_many:
        read_records(CALC, b"[{}, {}, {}]", False, 2)
    assert too_many.value.slug == "batch-size"


def test_csv_numbers_read_in_bulk_as_the_unit_parser_reads_each_cell() -> None:
    cells = ["12", "", "1_0", "١٢", "nan", "1e400", "0" * 70 + "1", "+.5", "9 V", "-3", "7."]
    common = {name: [value] * len(cells) for name, value in {**LED, "current_a": "0.02"}.items()}
    together = parse_cells(CALC, Cells(len(cells), {**common, "supply_v": cells}), PartResolver(None), True)
    for row, cell in enumerate(cells):
        alone = parse_cells(CALC, Cells(1, {**{k: v[:1] for k, v in common.items()}, "supply_v": [cell]}),
                            PartResolver(None), True)  # fmt: skip
        assert together.errors.by_row.get(row) == alone.errors.by_row.get(0), cell
        np.testing.assert_equal(together.columns["supply_v"][row], alone.columns["supply_v"][0])
    numbers = [cell for cell in cells if cell in ("12", "+.5", "-3", "7.")]
    whole = parse_cells(CALC, Cells(4, {**{k: v[:4] for k, v in common.items()}, "supply_v": numbers}),
                        PartResolver(None), True)  # fmt: skip
    assert whole.columns["supply_v"].tolist() == [12.0, 0.5, -3.0, 7.0]


@pytest.mark.parametrize(
    "table",
    [
        "supply_v,current_a\n12 V,20 mA\n9,0.01\n",
        "supply_v,current_a\r\n12 V,20 mA\r\n\r\n9, 0.01\r\n",  # a sheet's line ends, a blank line, a space
        " supply_v ; current_a\n12,5 V;20 mA\n\n\n9;0,01",  # no last line end; the names padded
        "supply_v\n12\n   \n9\n",  # one column: a line of spaces is a blank cell, not a blank line
        "supply_v,supply_v\n12,13\n",  # a repeated name: the later column wins
        "supply_v,current_a\n",  # no rows
        "supply_v,current_a\n12\n9,0.01,extra\n",  # short and long rows: the reader's path
        'supply_v,note\n12,"a, b"\n',  # quoted: the reader's path
        "\nsupply_v\n12\n",  # a blank first line: the reader's path
    ],
)
def test_a_plain_table_is_read_as_the_csv_reader_reads_it(table: str, monkeypatch: pytest.MonkeyPatch) -> None:
    # Plain tables are split a column at a time without the CSV reader; cells, names and line numbers must be
    # the reader's.
    body = table.encode()
    fast = read_records(CALC, body, True, 10)
    monkeypatch.setattr("calcsvc.service.batch_read._plain_table", lambda *_args: None)
    reader = read_records(CALC, body, True, 10)
    assert (fast.cells.n, fast.cells.values, fast.lines) == (reader.cells.n, reader.cells.values, reader.lines)
    assert {k: v.tolist() for k, v in fast.cells.keyed.items()} == {
        k: v.tolist() for k, v in reader.cells.keyed.items()
    }


def test_a_plain_table_past_the_row_limit_is_refused_as_the_reader_refuses_it() -> None:
    with pytest.raises(TooLarge, match="more than 2"):
        read_records(CALC, b"supply_v\n1\n2\n3\n", True, 2)


@settings(derandomize=True, max_examples=500)
@given(st.lists(st.text(alphabet="0123456789.+-eE _", max_size=6), max_size=5))
def test_the_quick_proof_of_plain_decimals_never_takes_what_the_pattern_refuses(cells: list[str]) -> None:
    text = "".join(f"{cell}\n" for cell in cells)
    if batch._plain_decimals(text):
        assert batch._PLAIN_NUMBERS.fullmatch(text) is not None
    if all(cell and cell != "." and set(cell) <= set("0123456789.") and cell.count(".") <= 1 for cell in cells):
        assert batch._plain_decimals(text)


def _old_fast_path(raw: list[object]) -> np.ndarray | None:
    """The numbers fast path as it was: every cell's exact type int or float, then numpy's conversion."""
    if not set(map(type, raw)) <= {int, float}:
        return None
    try:
        return np.array(raw, dtype=np.float64)
    except OverflowError:
        return None


_JSON_CELLS = st.one_of(
    st.integers(min_value=-(2**70), max_value=2**70),
    st.sampled_from([0, 1, 0.0, 1.0, -0.0, True, False, None, "1.5", "2 V", [1], {"a": 1}, 10**400]),
    st.floats(allow_nan=False, allow_infinity=False),
)


@settings(max_examples=300, derandomize=True, deadline=None)
@given(st.lists(_JSON_CELLS, max_size=12))
def test_a_column_of_json_numbers_is_converted_as_before(raw: list[object]) -> None:
    found, expected = batch._json_numbers(raw), _old_fast_path(raw)
    if expected is None:
        assert found is None
    else:
        assert found is not None and found.tobytes() == expected.tobytes()


@pytest.mark.parametrize("others", [[12.0, 15.5], [1, 0.0]], ids=["no-zero-or-one", "zero-and-one"])
def test_a_boolean_among_numbers_refuses_its_row_only(others: list[float]) -> None:
    rows = [{**LED, "current_a": 0.02, "supply_v": value} for value in [True, *others, False]]
    parsed = parse_rows(CALC, rows, PartResolver(None))
    assert parsed.errors.by_row[0] == parsed.errors.by_row[3] == {"supply_v": ["must be a number, not a boolean"]}
    assert 1 not in parsed.errors.by_row and parsed.columns["supply_v"][1] == others[0]


def _choices_as_objects(raw: list[object] | None, n: int, default: str) -> np.ndarray:
    """A choice column as it was made before: objects ("" for null), the default where blank, then str."""
    values = np.array(["" if v is None else str(v) for v in (raw or [""] * n)], dtype=object)
    values[values == ""] = default
    return values.astype(str)


_CHOICE_CELLS = st.sampled_from(["E12", "E24", "E96", "E6", "", None, "E192", 24, "e24", "E24 "])


@settings(max_examples=300, derandomize=True, deadline=None)
@given(st.one_of(st.none(), st.lists(_CHOICE_CELLS, max_size=8)), st.integers(min_value=0, max_value=4))
def test_a_choice_column_is_the_str_array_it_was(raw: list[object] | None, n: int) -> None:
    n = n if raw is None else len(raw)
    cells = Cells(n, {"supply_v": [12.0] * n} | ({} if raw is None else {"e_series": raw}))
    parsed = parse_cells(CALC, cells, PartResolver(None))
    found, expected = parsed.columns["e_series"], _choices_as_objects(raw, n, "E24")
    assert found.dtype == expected.dtype and found.tolist() == expected.tolist()
    assert parsed.present["e_series"].tolist() == [v not in ("", None) for v in (raw or [None] * n)]
