"""Array lengths are checked on the raw body: an oversized array is refused before its elements are built."""

from __future__ import annotations

import tracemalloc
from collections.abc import Callable

import pytest
from flask.testing import FlaskClient
from helpers import assert_problem

from calcsvc import create_app
from calcsvc.web.json_limits import TooLong, first_too_long

LIMITS = {"": 5, "loads": 3, "loads.*.waveform.time_s": 4}


def scan(body: str) -> TooLong | None:
    return first_too_long(body.encode(), lambda pattern: LIMITS.get(pattern, 10))


@pytest.mark.parametrize(
    ("body", "found"),
    [
        ('{"loads": [{"waveform": {"time_s": [0, 1, 2, 3]}}]}', None),
        ('{"loads": [{"waveform": {"time_s": [0, 1, 2, 3, 4]}}]}', TooLong("loads.0.waveform.time_s", 4)),
        ('{"loads": [{}, {"waveform": {"time_s": [0,1,2,3,4]}}]}', TooLong("loads.1.waveform.time_s", 4)),
        ('{"loads": [{}, {}, {}, {}]}', TooLong("loads", 3)),
        ('{"loads": [{"name": "a,b,c,d,e,f,g,h,i,j,k,[{"}, {"name": "\\",,,,,,,,,,,,]"}]}', None),
        ('{"zzz": [' + ",".join(["0"] * 11) + "]}", TooLong("zzz", 10)),
        ("[1, 2, 3, 4, 5, 6]", TooLong("", 5)),
        ('{"loads": [{"waveform": {"time_s": [0, 1, 2, 3, 4', TooLong("loads.0.waveform.time_s", 4)),
        ('{"loads": "unterminated', None),
        ("", None),
    ],
)
def test_the_scan_finds_the_first_array_over_its_limit(body: str, found: TooLong | None) -> None:
    assert scan(body) == found


def peak_growth(send: Callable[[], object]) -> int:
    tracemalloc.start()
    try:
        send()
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def test_a_huge_sample_array_is_refused_without_building_its_samples(client: FlaskClient) -> None:
    samples = ",".join(["0.5"] * 1_000_000)
    body = f'{{"supply_v": 12, "loads": [{{"waveform": {{"time_s": [{samples}], "current_a": [{samples}]}}}}]}}'
    data = body.encode()
    answers = []
    peak = peak_growth(
        lambda: answers.append(client.post("/v1/calc/duty-cycle-power", data=data, content_type="application/json"))
    )
    assert_problem(answers[0], 422, "loads.0.waveform.time_s")
    # Two million floats would take over 60 MB; refusing costs about one copy of the 8 MB body.
    assert peak < 3 * len(data), f"peak {peak / 1e6:.1f} MB for a {len(data) / 1e6:.1f} MB body"


@pytest.mark.parametrize("path", ["/v1/calc/closed-loop-bandwidth", "/v1/calc/duty-cycle-power"])
def test_deep_nesting_is_refused_without_a_path_per_level(client: FlaskClient, path: str) -> None:
    """100,000 nested brackets once cost the scan a path string per level: gigabytes, then a 500."""
    data = b"[" * 100_000 + b"]" * 100_000
    answers = []
    peak = peak_growth(lambda: answers.append(client.post(path, data=data, content_type="application/json")))
    assert answers[0].status_code == 400 and answers[0].json["type"].endswith(":malformed-body")
    assert peak < 3 * len(data), f"peak {peak / 1e6:.1f} MB for a {len(data) / 1e6:.1f} MB body"


def test_a_batch_of_millions_of_tiny_rows_is_refused_before_building_them(database_url: str) -> None:
    small = create_app({"DATABASE_URL": database_url, "BATCH_MAX_ROWS": 1000}).test_client()
    data = ("[" + ",".join(["{}"] * 200_000) + "]").encode()
    answers = []
    peak = peak_growth(
        lambda: answers.append(small.post("/v1/batch/led-string", data=data, content_type="application/json"))
    )
    assert_problem(answers[0], 413, "body")
    assert peak < 3 * len(data), f"peak {peak / 1e6:.1f} MB for a {len(data) / 1e6:.1f} MB body"

    table = ("supply_v\n" + "1\n" * 200_000).encode()
    peak = peak_growth(lambda: answers.append(small.post("/v1/batch/led-string", data=table, content_type="text/csv")))
    assert_problem(answers[1], 413)
    # The text is held as bytes, as str and in StringIO's 4-byte characters; 200,000 row dicts would be ~50 MB.
    assert peak < 10 * len(table), f"peak {peak / 1e6:.1f} MB for a {len(table) / 1e6:.1f} MB body"
