"""A large array of row objects is read a piece at a time into the same cells, labels and refusals as the array
parsed whole, wherever its cuts land (between rows, inside a string that looks like a row boundary)."""

from __future__ import annotations

from typing import Any

import numpy as np
import orjson
import pytest

from calcsvc.core import led_string
from calcsvc.service import batch_read
from calcsvc.service.batch_read import read_records
from calcsvc.service.errors import MalformedBody, TooLarge

CALC = led_string.SPEC


def rows(n: int) -> list[Any]:
    rng = np.random.default_rng(5)
    found: list[Any] = []
    for k in range(n):
        row: dict[str, Any] = {"supply_v": float(rng.uniform(5, 30)), "current_a": "20 mA", "leds_in_series": 2}
        if k % 4 == 0:
            row["design"] = f'd{k} }}, {{"supply_v": 1}}'  # a row boundary inside a string
        if k % 5 == 0:
            row["colour"] = "red"  # an unknown field, on some rows only
        if k % 7 == 0:
            del row["supply_v"]
        found.append(row)
    found[9] = [1, 2]  # not an object
    return found


def read(body: bytes, pieces: bool, monkeypatch: pytest.MonkeyPatch, limit: int = 1000) -> Any:
    monkeypatch.setattr(batch_read, "PIECE_BYTES", 300 if pieces else 1 << 40)
    return read_records(CALC, body, False, limit, ("design", "absent"))


@pytest.mark.parametrize("spacing", [None, 2])
def test_pieces_read_as_the_whole_array(spacing: int | None, monkeypatch: pytest.MonkeyPatch) -> None:
    found = rows(200)
    body = orjson.dumps(found) if spacing is None else orjson.dumps(found, option=orjson.OPT_INDENT_2) + b"\n"
    whole, by_piece = read(body, False, monkeypatch), read(body, True, monkeypatch)
    assert len(batch_read._array_pieces(body) or ()) > 5
    assert by_piece.labels == whole.labels and by_piece.lines == whole.lines
    assert by_piece.cells.n == whole.cells.n == 200
    assert by_piece.cells.values == whole.cells.values
    assert by_piece.cells.not_objects == whole.cells.not_objects == [9]
    assert by_piece.cells.keyed.keys() == whole.cells.keyed.keys()
    for name, carried in whole.cells.keyed.items():
        assert by_piece.cells.keyed[name].tolist() == carried.tolist()


def test_a_fault_in_any_piece_is_refused_as_the_whole_body_is(monkeypatch: pytest.MonkeyPatch) -> None:
    good = orjson.dumps(rows(200))
    between = good.index(b"},{", 4000) + 1
    for body in (good[:-1], good + b"]", good[:between] + b"," + good[between:], good.replace(b'"red"', b"red", 1)):
        with pytest.raises(MalformedBody) as whole:
            read(body, False, monkeypatch)
        with pytest.raises(MalformedBody) as by_piece:
            read(body, True, monkeypatch)
        assert by_piece.value.detail == whole.value.detail


def test_too_many_rows_are_counted_over_every_piece(monkeypatch: pytest.MonkeyPatch) -> None:
    body = orjson.dumps(rows(200))
    with pytest.raises(TooLarge) as whole:
        read(body, False, monkeypatch, limit=150)
    with pytest.raises(TooLarge) as by_piece:
        read(body, True, monkeypatch, limit=150)
    assert by_piece.value.detail == whole.value.detail
