"""The columns answer's arrays are written exactly as orjson writes them, whatever shortcut writes them."""

from __future__ import annotations

import numpy as np
import orjson
import pytest

from calcsvc.web.batch_json import _array_text, _ArrayTexts

_NUMPY = orjson.OPT_SERIALIZE_NUMPY


@pytest.mark.parametrize(
    "array",
    [
        np.full(1000, 0.03),
        np.full(1000, -0.0),
        np.full(1000, np.nan),
        np.full(1000, np.inf),
        np.full(1000, 1e-300),
        np.full(1000, 2.0),
        np.array([0.0, -0.0, 0.0]),  # equal values, different bits and texts
        np.array([0.03, 0.04, 0.03]),  # the ends and middle alike, not the rest
        np.array([1.5, 1.5, 2.5, 1.5, 1.5]),
        np.array([7.0]),
        np.array([], dtype=np.float64),
        np.full(1000, True),
        np.full((3, 2), 0.5),
        np.full(4, 3, dtype=np.int64),
    ],
)
def test_an_array_is_written_as_orjson_writes_it(array: np.ndarray) -> None:
    assert _array_text(array) == orjson.dumps(array, option=_NUMPY)


def test_an_array_written_twice_is_the_same_text_each_time() -> None:
    shared, other = np.linspace(0.1, 2.0, 500), np.linspace(3.0, 4.0, 500)
    texts = _ArrayTexts([shared, other, shared])
    document = {"a": shared, "b": other, "c": {"d": lambda: shared, "e": np.full(500, 0.25)}}
    assert b"".join(texts.streamed(document, depth=3)) == orjson.dumps(
        {"a": shared, "b": other, "c": {"d": shared, "e": np.full(500, 0.25)}}, option=_NUMPY
    )
    assert not texts.uses and not texts.texts  # nothing kept past its last use
