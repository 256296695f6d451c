"""One batch in every shape it may arrive in (an array of rows, an object of columns, a CSV table) gets the same
answer, whichever shape it is answered in; the streamed rows answer is the whole answer, chunk by chunk."""

from __future__ import annotations

import csv
import io
from typing import Any

import numpy as np
import orjson
import pytest
from flask.testing import FlaskClient
from helpers import assert_problem

from calcsvc.core import blocks
from calcsvc.web import batch_api, batch_csv, batch_json

NAMES = ("supply_v", "vf_typ_v", "vf_min_v", "vf_max_v", "if_max_a", "leds_in_series", "current_a", "e_series")


def varied_rows(n: int) -> list[dict[str, Any]]:
    """Designs that pass, fail a check, carry cautions, name parts, write units, leave inputs out or are refused."""
    rng = np.random.default_rng(11)
    rows: list[dict[str, Any]] = []
    for k in range(n):
        row: dict[str, Any] = {
            "supply_v": float(np.round(rng.uniform(4.0, 30.0), 3)),
            "vf_typ_v": 2.1,
            "vf_min_v": 1.9,
            "vf_max_v": 2.5,
            "if_max_a": float(rng.choice([0.03, 0.5])),
            "leds_in_series": int(rng.integers(1, 5)),
            "current_a": float(np.round(rng.uniform(0.002, 0.4), 4)),
            "e_series": str(rng.choice(["E12", "E24", "E96"])),
        }
        if k % 5 == 0:
            row["supply_v"] = f"{row['supply_v']} V"
        if k % 7 == 0:
            row["current_a"] = "20 mA"
        if k % 11 == 0:
            for name in ("vf_typ_v", "vf_min_v", "vf_max_v", "if_max_a"):
                del row[name]
            row["led"] = "led-red-5mm"
        if k % 13 == 0:
            row["current_a"] = -1  # refused
        if k % 17 == 0:
            del row["e_series"]  # the default
        rows.append(row)
    return rows


def as_columns(rows: list[dict[str, Any]]) -> dict[str, list[Any]]:
    names = list(dict.fromkeys(name for row in rows for name in row))
    return {name: [row.get(name) for row in rows] for name in names}


def as_csv(rows: list[dict[str, Any]]) -> str:
    out = io.StringIO()
    writer = csv.DictWriter(out, fieldnames=list(as_columns(rows)), lineterminator="\n", restval="")
    writer.writeheader()
    writer.writerows(rows)
    return out.getvalue()


def test_rows_columns_and_csv_bodies_get_the_same_answers(client: FlaskClient, seeded: Any) -> None:
    rows = varied_rows(300)
    csv_body = as_csv(rows)
    for query, accept in (("", "application/json"), ("?layout=columns", "application/json"), ("", "text/csv")):
        answers = [
            client.post(f"/v1/batch/led-string{query}", json=rows, headers={"Accept": accept}).data,
            client.post(f"/v1/batch/led-string{query}", json=as_columns(rows), headers={"Accept": accept}).data,
            client.post(
                f"/v1/batch/led-string{query}", data=csv_body, content_type="text/csv", headers={"Accept": accept}
            ).data,
        ]
        if accept == "text/csv":
            # Rows are numbered as a sheet numbers them, header = row 1, for JSON bodies too.
            assert answers[0] == answers[1] == answers[2]
        else:
            first = orjson.loads(answers[0])
            assert first["ok_count"] < first["count"] == 300  # some refused, the rest computed
            assert orjson.loads(answers[1]) == first
            assert orjson.loads(answers[2]) == first


def test_a_column_shaped_body_leaves_a_null_cell_out(client: FlaskClient) -> None:
    body = {"supply_v": [12, 12], "vf_typ_v": [2.1, 2.1], "vf_min_v": [1.9, 1.9], "vf_max_v": [2.5, 2.5],
            "if_max_a": [0.03, 0.03], "leds_in_series": [3, 3], "current_a": [0.02, 0.02], "strings": [None, 2],
            "colour": [None, "red"]}  # fmt: skip
    answer = client.post("/v1/batch/led-string", json=body).get_json()
    assert [row["ok"] for row in answer["rows"]] == [True, False]
    assert answer["rows"][0]["results"]["total_current_a"] == answer["rows"][0]["results"]["current_a"]
    assert answer["rows"][1]["problem"]["errors"] == {"colour": ["Unknown field."]}


@pytest.mark.parametrize(
    "body", [{"supply_v": 12}, {"supply_v": [12, 12], "current_a": [0.02]}], ids=["not-an-array", "lengths"]
)
def test_a_malformed_column_shaped_body_is_refused(client: FlaskClient, body: dict[str, Any]) -> None:
    assert_problem(client.post("/v1/batch/led-string", json=body), 422, "body")


def test_the_streamed_rows_are_the_whole_answer(
    client: FlaskClient, seeded: Any, monkeypatch: pytest.MonkeyPatch
) -> None:
    rows = varied_rows(60)
    whole = client.post("/v1/batch/led-string", json=rows).data
    monkeypatch.setattr(batch_json, "CHUNK_ROWS", 7)
    chunked = client.post("/v1/batch/led-string", json=rows)
    assert chunked.data == whole
    assert [row["row"] for row in orjson.loads(whole)["rows"]] == list(range(60))


@pytest.mark.parametrize("every_row_computes", [False, True], ids=["refused-rows", "every-row-computes"])
def test_the_streamed_columns_are_the_whole_document(
    client: FlaskClient, seeded: Any, monkeypatch: pytest.MonkeyPatch, every_row_computes: bool
) -> None:
    # Written a result and a check at a time, the answer is byte for byte the document serialized whole. When
    # every row computes, the outcome's own arrays are written, shared ones (in blocks too) and constant ones.
    rows = varied_rows(60)
    if every_row_computes:
        rows = [row for row in rows if 8 < float(str(row["supply_v"]).removesuffix(" V")) and row["current_a"] != -1]
        monkeypatch.setattr(blocks, "BLOCKED_FROM", 0)
        monkeypatch.setattr(blocks, "BLOCK_ROWS", 16)
    wholes: list[bytes] = []

    def whole(value: Any, depth: int) -> Any:
        resolved = value() if callable(value) else value
        if depth and isinstance(resolved, dict):
            resolved = {key: whole(member, depth - 1) for key, member in resolved.items()}
        return resolved

    real = batch_json.streamed_columns

    def both(calc: Any, batch: Any, head: dict[str, Any]) -> Any:
        wholes.append(
            orjson.dumps(whole({**head, **batch_json.json_columns(calc, batch)}, 3), option=orjson.OPT_SERIALIZE_NUMPY)
        )
        return real(calc, batch, head)

    monkeypatch.setattr(batch_api, "streamed_columns", both)
    streamed = client.post("/v1/batch/led-string?layout=columns&labels=note", json=rows).data
    assert streamed == wholes[0]
    answer = orjson.loads(streamed)
    assert len(answer["ok"]) == len(rows) and answer["checks"]["headroom"]["margin"]
    assert all(answer["ok"]) == every_row_computes and bool(answer["problems"]) != every_row_computes


@pytest.mark.parametrize("text", ["1_0", "١٢", "nan", "1e400", " 12 ", "12 V", "+.5e1"])
def test_a_numeric_string_cell_reads_as_a_single_request_reads_it(client: FlaskClient, text: str) -> None:
    design = {"vf_typ_v": 2.1, "vf_min_v": 1.9, "vf_max_v": 2.5, "if_max_a": 0.03, "leds_in_series": 3}
    design |= {"current_a": 0.02, "supply_v": text}
    single = client.post("/v1/calc/led-string", json=design).get_json()
    for body in ([design], as_columns([design])):
        row = client.post("/v1/batch/led-string", json=body).get_json()["rows"][0]
        if "errors" in single:
            assert row["problem"]["errors"] == single["errors"]
        else:
            assert row["results"] == single["results"]


def test_the_streamed_csv_is_the_whole_table(client: FlaskClient, seeded: Any, monkeypatch: pytest.MonkeyPatch) -> None:
    table = as_csv(varied_rows(60))
    headers = {"Accept": "text/csv"}
    whole = client.post("/v1/batch/led-string", data=table, content_type="text/csv", headers=headers).data
    monkeypatch.setattr(batch_csv, "CHUNK_ROWS", 7)
    chunked = client.post("/v1/batch/led-string", data=table, content_type="text/csv", headers=headers).data
    assert chunked == whole
    assert whole.count(b"\n") == 61 and b"must be greater than 0 A" in whole  # every row, refused ones too


def rows_of_columns(answer: dict[str, Any]) -> list[dict[str, Any]]:
    """The rows answer's objects, built one by one from the columns answer (a second writer of the same rows)."""
    rows: list[dict[str, Any]] = []
    notes: dict[str, dict[int, list[str]]] = {"warnings": {}, "cautions": {}}
    for kind, found in notes.items():
        for notice in answer[kind]:
            for row in notice["rows"]:
                found.setdefault(row, []).append(notice["message"])
    for row, ok in enumerate(answer["ok"]):
        labels = (
            {"labels": {name: values[row] for name, values in answer["labels"].items()}} if "labels" in answer else {}
        )
        if not ok:
            rows.append({"row": row, **labels, "ok": False, "passes": None, "problem": answer["problems"][str(row)]})
            continue
        results = {name: values[row] for name, values in answer["results"].items() if name != "sweep"}
        sweep = answer["results"].get("sweep")
        if sweep and sweep["frequency_hz"][row] is not None:
            results["sweep"] = {key: values[row] for key, values in sweep.items()}
        checks = [
            {"name": name, **{key: check[key][row] for key in ("ok", "value", "limit", "margin")}}
            for name, check in answer["checks"].items()
            if check["limit"][row] is not None
        ]
        rows.append(
            {
                "row": row,
                **labels,
                "ok": True,
                "passes": answer["passes"][row],
                "results": results,
                "checks": checks,
                "warnings": notes["warnings"].get(row, []),
                "cautions": notes["cautions"].get(row, []),
                "parts": answer["parts"].get(str(row), []),
            }
        )
    return rows


@pytest.mark.parametrize(
    ("name", "query", "body"),
    [
        (
            "led-string",
            "?labels=note",
            [{**row, "note": f"=n{k}" if k % 3 else k} for k, row in enumerate(varied_rows(90))],
        ),
        (
            "bjt-switch",  # the supply-rating check applies only where supply_max_v is given
            "",
            [
                {"transistor": "npn-small-signal", "driver": "driver-mcu-3v3", "collector_current_a": current, **more}
                for current, more in (
                    ("40 mA", {"supply_max_v": "12.6 V"}),
                    ("40 mA", {}),
                    ("-1 A", {}),
                    ("60 mA", {}),
                    ("20 mA", {"supply_max_v": 24}),
                )
            ],
        ),
        (
            "closed-loop-bandwidth",
            "",
            [
                {"gain": 2, "gbw_hz": 1e6, "sweep_start_hz": 10, "sweep_stop_hz": 1e6, "sweep_points": 4},
                {"gain": 10, "gbw_hz": 1e6, "signal_hz": 5e4},
                {"gain": -1, "gbw_hz": 1e6},
                {"gain": 5, "gbw_hz": 2e6, "sweep_start_hz": 1, "sweep_stop_hz": 1e5, "sweep_points": 3},
            ],
        ),
    ],
)
def test_the_rows_answer_is_the_columns_answer_row_by_row_byte_for_byte(
    client: FlaskClient, seeded: Any, monkeypatch: pytest.MonkeyPatch, name: str, query: str, body: list[Any]
) -> None:
    # The rows answer is joined from each value's text: it must be the bytes of its row objects serialized whole,
    # whatever checks apply on a row (one set on every led-string row, two sets in the others), with refused rows,
    # labels, notices, parts and sweeps among them.
    monkeypatch.setattr(batch_json, "CHUNK_ROWS", 16)
    rows = client.post(f"/v1/batch/{name}{query}", json=body).data
    columns_query = f"{query}&layout=columns" if query else "?layout=columns"
    columns = orjson.loads(client.post(f"/v1/batch/{name}{columns_query}", json=body).data)
    head = {key: columns[key] for key in ("calculation", "version", "count", "ok_count", "check_details", "safety")}
    assert rows == orjson.dumps({**head, "rows": rows_of_columns(columns)})
    answer = orjson.loads(rows)
    assert any(not row["ok"] for row in answer["rows"]) and any(row["ok"] for row in answer["rows"])
    assert len({len(row["checks"]) for row in answer["rows"] if row["ok"]}) == (1 if name == "led-string" else 2)


def test_a_rows_unknown_fields_are_named_in_the_order_given(client: FlaskClient) -> None:
    # Same body, same answer, whatever the worker's string hashing: not a set's order.
    unknown = ["zeta", "alpha", "mu", "beta", "omega", "gamma", "kappa", "delta"]
    row = {"supply_v": 12, "vf_typ_v": 2.1, "vf_min_v": 1.9, "vf_max_v": 2.5, "if_max_a": 0.03,
           "leds_in_series": 3, "current_a": 0.02, **dict.fromkeys(unknown, 1)}  # fmt: skip
    for body in ([row], {name: [value] for name, value in row.items()}):
        sent = orjson.dumps(body)  # as given: the test client's json= would sort the keys
        answer = client.post("/v1/batch/led-string", data=sent, content_type="application/json").get_json()
        assert list(answer["rows"][0]["problem"]["errors"]) == unknown
