"""One part_id rule wherever an id enters, and on the store itself: an id that is stored can always be reached
(URL, Location and ETag headers, forms), and ids stored before the rule was enforced are found and fixed."""

from __future__ import annotations

import json
from datetime import UTC, datetime
from typing import Any

import pytest
from flask import Flask
from flask.testing import FlaskClient
from helpers import assert_problem, bearer
from sqlalchemy import text

from calcsvc.cli import main
from calcsvc.data.part_ids import is_part_id, suggest
from calcsvc.data.store import PartStore
from calcsvc.data.store_errors import InvalidPartId
from calcsvc.parts_io import check_row

LED_PARAMETERS = {
    "color": "red",
    "vf_typ_v": 2.0,
    "vf_min_v": 1.8,
    "vf_max_v": 2.4,
    "if_test_a": 0.02,
    "if_max_a": 0.03,
}
BAD_IDS = {
    "newline": "led-nl\n",
    "carriage return": "led-cr\r",
    "trailing space": "led-sp ",
    "unicode letter": "led-gr\u00fcn",
    "unicode digit": "led-\u0663",
    "200 characters": "l" * 200,
    "slash": "led/red",
    "capitals": "LED-RED",
    "leading hyphen": "-led",
    "empty": "",
}
BAD = pytest.mark.parametrize("bad_id", BAD_IDS.values(), ids=BAD_IDS.keys())


def test_the_rule() -> None:
    assert is_part_id("led-red-5mm") and is_part_id("0") and is_part_id("a" * 64)
    assert not any(is_part_id(v) for v in BAD_IDS.values())
    assert not is_part_id("a" * 65) and not is_part_id(None) and not is_part_id(7)
    assert (suggest("led-nl\n"), suggest(" LED Red/5mm "), suggest("\u00e4\u00e4")) == ("led-nl", "led-red-5mm", None)


@BAD
def test_the_api_refuses_a_bad_id_and_stores_nothing(client: FlaskClient, tokens: dict[str, str], bad_id: str) -> None:
    body = {"part_id": bad_id, "kind": "led", "parameters": LED_PARAMETERS}
    assert_problem(client.post("/v1/parts", json=body, headers=bearer(tokens["edna"])), 422, "part_id")
    assert client.get("/v1/parts").get_json()["total"] == 0


@BAD
def test_the_store_refuses_a_bad_id(app: Flask, bad_id: str) -> None:
    with pytest.raises(InvalidPartId), app.extensions["calcsvc.db"].transaction() as session:
        PartStore(session).create(bad_id, "led", "", LED_PARAMETERS, "seed", approve=True)
    with app.extensions["calcsvc.db"].transaction() as session:
        assert PartStore(session).list() == ([], 0)


def test_calculations_batches_and_searches_refuse_a_bad_reference(client: FlaskClient, seeded: Any) -> None:
    body = {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm\n", "leds_in_series": 3, "current_a": "20 mA"}
    assert_problem(client.post("/v1/calc/led-string", json=body), 422, "led")
    assert_problem(client.get("/v1/calc/led-string", query_string=body), 422, "led")
    rows = client.post("/v1/batch/led-string", json=[body, {**body, "led": "led-red-5mm"}]).get_json()["rows"]
    assert [r["ok"] for r in rows] == [False, True]
    assert "led" in rows[0]["problem"]["errors"]
    search = {"led": ["led-red-5mm\n"], "supply_v": 12, "leds_in_series": 3, "current_a": "20 mA"}
    assert_problem(client.post("/v1/select/led-string", json=search), 422, "led.0")
    assert_problem(client.post("/v1/select/led-string", json={**search, "led": "led-red-5mm "}), 422, "led")


def test_the_pages_refuse_a_bad_id(client: FlaskClient, seeded: Any) -> None:
    assert client.get("/review/parts/led-red-5mm%0A").status_code == 404
    assert client.get("/review/parts/LED-RED-5MM").status_code == 404
    # The form trims what was typed around a value, so a stray newline there is harmless; other characters are not.
    form = {"supply": "supply-adapter-12v-2a\u00e4", "driver": "driver-mcu-3v3", "transistor": "npn-small-signal"}
    form |= {"led": "led-red-5mm", "leds_in_series": "3", "strings": "1", "current_a": "20 mA"}
    form |= {"duty_cycle": "0.5", "channels": "1"}
    assert client.get("/review/channel", query_string=form).status_code == 422
    assert_problem(client.get("/review/channel.json", query_string=form), 422, "supply")


def test_a_parts_file_with_a_bad_id_is_refused() -> None:
    row, errors = check_row("line 2", "led-nl\n", "led", "", LED_PARAMETERS)
    assert row is None and [e.field for e in errors] == ["part_id"]


def _store_raw(app: Flask, part_id: str) -> None:
    """Write a part as a server without the rule did: straight into the tables."""
    now = datetime(2026, 1, 1, tzinfo=UTC)
    values = {"p": part_id, "params": json.dumps(LED_PARAMETERS), "t": now}
    with app.extensions["calcsvc.db"].transaction() as session:
        session.execute(
            text(
                "INSERT INTO parts (part_id, kind, description, parameters, status, revision, updated_at, updated_by)"
                " VALUES (:p, 'led', '', :params, 'draft', 1, :t, 'edna')"
            ),
            values,
        )
        session.execute(
            text(
                "INSERT INTO part_revisions (part_id, revision, kind, description, parameters, author, created_at)"
                " VALUES (:p, 1, 'led', '', :params, 'edna', :t)"
            ),
            values,
        )
        session.execute(
            text(
                "INSERT INTO part_events (part_id, revision, action, actor, at) VALUES (:p, 1, 'created', 'edna', :t)"
            ),
            values,
        )


def test_db_check_finds_stored_bad_ids_and_fixes_them(
    app: Flask, client: FlaskClient, database_url: str, capsys: Any, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("DATABASE_URL", database_url)
    assert main(["db", "check"]) == 0
    assert "every stored part_id follows the rule" in capsys.readouterr().out
    for part_id in ("led-nl\n", "led-nl ", "led-ok"):
        _store_raw(app, part_id)

    assert main(["db", "check"]) == 1
    out = capsys.readouterr().out
    assert "2 stored part_id(s) break the rule" in out
    assert "'led-nl\\n': rename to 'led-nl' with: calcsvc db check --fix" in out

    assert main(["db", "check", "--fix"]) == 1  # both want 'led-nl': the second is left for a person to name
    out = capsys.readouterr().out
    assert "renamed to 'led-nl'" in out and "not renamed: a part 'led-nl' already exists" in out
    revisions = client.get("/v1/parts/led-nl/revisions").get_json()["revisions"]
    assert [e["action"] for e in revisions[0]["events"]] == ["created", "renamed"]
    assert revisions[0]["parameters"] == LED_PARAMETERS
    with app.extensions["calcsvc.db"].transaction() as session:
        assert len(PartStore(session).malformed_ids()) == 1
