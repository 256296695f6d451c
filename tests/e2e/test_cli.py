"""The ``calcsvc`` command, run in-process against a real server on loopback (both stores)."""

from __future__ import annotations

import csv
import io
import json
import re
import sys
from pathlib import Path
from typing import Any

import pytest
from flask import Flask
from sqlalchemy import text

from calcsvc.cli import main
from calcsvc.cli_remote import calc_body, calc_inputs
from calcsvc.client import Client
from calcsvc.service.safety import SAFETY_LINE

pytest_plugins = ("live_server",)

LED_RED = ["--supply", "supply-adapter-12v-2a", "--led", "led-red-5mm", "--leds_in_series", "3"]
LED_HEADER = (
    "part_id,kind,description,color,vf_typ_v,vf_min_v,vf_max_v,if_test_a,if_max_a,"
    "tj_max_c,rth_jb_k_per_w,rth_ba_k_per_w,vf_tempco_v_per_k,if_derating_knee_c\n"
)


def table(url: str) -> dict[str, tuple[str, str, dict[str, Any]]]:
    with Client(url) as client:
        return {p["part_id"]: (p["kind"], p["description"], p["parameters"]) for p in client.list_parts()}


def empty_parts_table(app: Flask) -> None:
    with app.extensions["calcsvc.db"].transaction() as session:
        session.execute(text("DELETE FROM part_events"))
        session.execute(text("DELETE FROM part_revisions"))
        session.execute(text("DELETE FROM parts"))


class Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


# --- parts export / import --------------------------------------------------------------------------------------


@pytest.mark.parametrize("suffix", [".csv", ".json"])
def test_export_then_import_into_an_empty_database_reproduces_the_table(
    seeded: Flask, live_url: str, tokens: dict[str, str], tmp_path: Path, suffix: str, capsys: Any
) -> None:
    path = tmp_path / f"parts{suffix}"
    before = table(live_url)
    assert main(["parts", "export", str(path), "--url", live_url]) == 0
    assert f"exported {len(before)} part(s)" in capsys.readouterr().out
    empty_parts_table(seeded)
    assert table(live_url) == {}

    assert main(["parts", "import", str(path), "--url", live_url, "--token", tokens["edna"]]) == 0
    assert f"created {len(before)}, updated 0, unchanged 0" in capsys.readouterr().out
    assert table(live_url) == before
    with Client(live_url) as client:
        assert {(p["status"], p["revision"], p["updated_by"]) for p in client.list_parts()} == {("draft", 1, "edna")}

    # A second import of the same file changes nothing: no spurious revisions from float noise.
    assert main(["parts", "import", str(path), "--url", live_url, "--token", tokens["edna"]]) == 0
    assert f"created 0, updated 0, unchanged {len(before)}" in capsys.readouterr().out


def test_export_writes_si_columns_for_one_kind(seeded: Flask, live_url: str, tmp_path: Path) -> None:
    path = tmp_path / "leds.csv"
    assert main(["parts", "export", str(path), "--kind", "led", "--url", live_url]) == 0
    lines = path.read_text().splitlines()
    assert lines[0] + "\n" == LED_HEADER
    red = next(line for line in lines if line.startswith("led-red-5mm,"))
    assert red.endswith(",red,2.1,1.9,2.5,0.02,0.03,100,200,150,-0.002,60")
    assert len(lines) == 1 + 6


def test_export_writes_formula_text_inert_and_reads_it_back_unchanged(
    seeded: Flask, live_url: str, tokens: dict[str, str], tmp_path: Path, capsys: Any
) -> None:
    descriptions = {"led-formula-a": "=cmd|' /C calc'!A0", "led-formula-b": "@SUM(1)", "led-formula-c": "-2+3"}
    with Client(live_url, token=tokens["edna"]) as client:
        red, _ = client.get_part("led-red-5mm")
        for part_id, description in descriptions.items():
            client.create_part(part_id, "led", red["parameters"], description)
    path = tmp_path / "leds.csv"
    assert main(["parts", "export", str(path), "--kind", "led", "--url", live_url]) == 0
    rows = {row[0]: row for row in csv.reader(io.StringIO(path.read_text()))}
    for part_id, description in descriptions.items():
        assert rows[part_id][2] == "'" + description
    # Numbers stay numbers.
    assert rows["led-red-5mm"][4:] == ["2.1", "1.9", "2.5", "0.02", "0.03", "100", "200", "150", "-0.002", "60"]
    capsys.readouterr()
    assert main(["parts", "import", str(path), "--url", live_url, "--token", tokens["edna"]]) == 0
    assert "created 0, updated 0, unchanged 9" in capsys.readouterr().out
    assert {part_id: table(live_url)[part_id][1] for part_id in descriptions} == descriptions


def test_import_with_bad_rows_writes_nothing_and_names_line_and_field(
    seeded: Flask, live_url: str, tokens: dict[str, str], tmp_path: Path, capsys: Any
) -> None:
    path = tmp_path / "new.csv"
    path.write_text(
        LED_HEADER
        + "led-amber-3mm,led,Amber,amber,2.1 V,1.9 V,2.5 V,20 mA,30 mA\n"  # sound
        + "led-amber-5mm,led,Amber,amber,2.1 V,1.9 V,2.5 V,20 mA,30 mV\n"  # line 3: a voltage for a current
        + "led-orange-3mm,led,Orange,orange,2.1,2.3,2.5,0.02,0.03\n"  # line 4: vf_min above vf_typ
        + "led-red-5mm,led,Red,red,2.0,1.8,2.4,0.02,0.025\n"  # a sound update of a seeded part
    )
    before = table(live_url)
    assert main(["parts", "import", str(path), "--url", live_url, "--token", tokens["edna"]]) == 1
    err = capsys.readouterr().err
    assert f"{path}: line 3: if_max_a: '30 mV' has the wrong dimension" in err
    assert f"{path}: line 4: vf_typ_v: vf_typ_v (2.1) must be at least vf_min_v (2.3)" in err
    assert "2 error(s)" in err and "nothing was imported" in err
    assert table(live_url) == before


def test_import_refuses_text_longer_than_the_table_keeps(
    seeded: Flask, live_url: str, tokens: dict[str, str], tmp_path: Path, capsys: Any
) -> None:
    path = tmp_path / "long.csv"
    path.write_text(
        LED_HEADER
        + f"led-amber-3mm,led,{'x' * 501},amber,2.1 V,1.9 V,2.5 V,20 mA,30 mA\n"
        + f"led-amber-5mm,led,Amber,{'x' * 65},2.1 V,1.9 V,2.5 V,20 mA,30 mA\n"
    )
    before = table(live_url)
    assert main(["parts", "import", str(path), "--url", live_url, "--token", tokens["edna"]]) == 1
    err = capsys.readouterr().err
    assert f"{path}: line 2: description: Longer than maximum length 500." in err
    assert f"{path}: line 3: color: must be at most 64 characters" in err
    assert table(live_url) == before


def test_json_import_reports_lines_and_unknown_fields(
    live_url: str, tokens: dict[str, str], tmp_path: Path, capsys: Any
) -> None:
    good = {"part_id": "led-amber-3mm", "kind": "led", "description": "Amber", "parameters": {"color": "amber",
            "vf_typ_v": 2.1, "vf_min_v": "1.9 V", "vf_max_v": 2.5, "if_test_a": "20 mA", "if_max_a": 0.03}}  # fmt: skip
    bad = {**good, "part_id": "led-amber-5mm", "revision": 4, "parameters": {**good["parameters"], "vf_max_v": "3 A"}}
    path = tmp_path / "parts.json"
    path.write_text(json.dumps({"note": "two LEDs", "parts": [good, bad]}, indent=2))
    line = 1 + path.read_text().splitlines().index("    {", 5)  # where the second entry starts
    assert main(["parts", "import", str(path), "--url", live_url, "--token", tokens["edna"]]) == 1
    err = capsys.readouterr().err
    assert f"line {line}: revision: unknown field" in err
    assert f"line {line}: vf_max_v: '3 A' has the wrong dimension" in err
    assert table(live_url) == {}


def test_import_revises_changed_parts_only_and_refuses_conflicts(
    seeded: Flask, live_url: str, tokens: dict[str, str], tmp_path: Path, capsys: Any, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = tmp_path / "leds.csv"
    assert main(["parts", "export", str(path), "--kind", "led", "--url", live_url]) == 0
    exported = path.read_text()
    path.write_text(exported.replace("red,2.1,1.9,2.5,0.02,0.03", "red,2.1,1.9,2.5,20 mA,25 mA"))
    monkeypatch.setenv("CALCSVC_URL", live_url)
    monkeypatch.setenv("CALCSVC_TOKEN", tokens["edna"])
    captured_stderr, terminal = sys.stderr, Terminal()
    monkeypatch.setattr(sys, "stderr", terminal)
    assert main(["parts", "import", str(path)]) == 0
    assert "created 0, updated 1, unchanged 5" in capsys.readouterr().out
    assert terminal.getvalue().endswith("\r[" + "#" * 30 + "] 1/1\n")  # the progress bar, on a terminal only
    with Client(live_url) as client:
        red, _ = client.get_part("led-red-5mm")
        revisions = {p["part_id"]: p["revision"] for p in client.list_parts(kind="led")}
        client.session.headers["Authorization"] = f"Bearer {tokens['edna']}"
        client.retire_part("led-blue-5mm", client.get_part("led-blue-5mm")[1], reason="no longer stocked")
    assert (red["revision"], red["status"], red["parameters"]["if_max_a"]) == (2, "draft", 0.025)
    assert sorted(revisions.values()) == [1, 1, 1, 1, 1, 2]

    conflicts = tmp_path / "conflicts.csv"
    conflicts.write_text(
        "part_id,kind,description,supply_v,supply_tolerance,current_max_a,color,vf_typ_v,vf_min_v,vf_max_v,if_test_a,"
        "if_max_a\n"
        "led-green-5mm,supply,Now a supply,12,0.05,2,,,,,,\n"
        "led-blue-5mm,led,Blue,,,,blue,3.2,2.9,3.6,0.02,0.02\n"
        "led-new-3mm,led,New,,,,blue,3.2,2.9,3.6,0.02,0.02\n"
        "led-new-3mm,led,New,,,,blue,3.2,2.9,3.6,0.02,0.02\n"
    )
    monkeypatch.setattr(sys, "stderr", captured_stderr)
    assert main(["parts", "import", str(conflicts)]) == 1
    err = capsys.readouterr().err
    assert "line 2: kind: the stored part is a led; a part never changes kind" in err
    assert "line 3: part_id: the stored part is retired" in err
    assert "line 5: part_id: 'led-new-3mm' also appears on line 4" in err
    assert "3 error(s)" in err
    assert "led-new-3mm" not in table(live_url)


def test_import_refuses_unknown_columns_and_formats(live_url: str, tmp_path: Path, capsys: Any) -> None:
    path = tmp_path / "typo.csv"
    path.write_text("part_id,kind,vf_tpy_v\nled-x,led,2.0\n")
    assert main(["parts", "import", str(path), "--url", live_url]) == 1
    assert "line 1: vf_tpy_v: not a parameter of any kind" in capsys.readouterr().err
    assert main(["parts", "import", str(tmp_path / "parts.xlsx"), "--url", live_url]) == 2
    assert "use a .csv or .json file" in capsys.readouterr().err


def test_import_without_a_token_is_refused_before_anything_is_written(
    live_url: str, tmp_path: Path, capsys: Any
) -> None:
    path = tmp_path / "one.csv"
    path.write_text(LED_HEADER + "led-amber-3mm,led,Amber,amber,2.1,1.9,2.5,0.02,0.03\n")
    assert main(["parts", "import", str(path), "--url", live_url]) == 2
    assert "401" in capsys.readouterr().err
    assert table(live_url) == {}


# --- parts list / show ---------------------------------------------------------------------------------------------


def test_parts_list_and_show(seeded: Flask, live_url: str, tokens: dict[str, str], capsys: Any) -> None:
    assert main(["parts", "list", "--kind", "supply", "--url", live_url]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0].split() == ["PART_ID", "KIND", "STATUS", "REV", "DESCRIPTION"]
    assert out[1].split()[:4] == ["supply-adapter-12v-2a", "supply", "approved", "1"]
    assert out[-1] == "3 part(s)"

    with Client(live_url, tokens["edna"]) as edna:
        part, etag = edna.get_part("led-red-5mm")
        edna.update_part("led-red-5mm", {**part["parameters"], "if_max_a": 0.025}, etag)
    assert main(["parts", "show", "led-red-5mm", "--url", live_url]) == 0
    out = capsys.readouterr().out
    assert re.search(r"if_max_a +0.025 +A\n", out)
    assert "if_max_a 0.03 -> 0.025" in out  # the history says what each revision changed
    assert out.rstrip().endswith(SAFETY_LINE)
    # A reviewer sends the draft back and comments; the author reads both in the history.
    with Client(live_url, tokens["rita"]) as rita:
        rita.send_back_part("led-red-5mm", rita.get_part("led-red-5mm")[1], "25 mA is the pulsed rating")
        rita.comment_revision("led-red-5mm", 2, "the continuous one is 20 mA")
    assert main(["parts", "show", "led-red-5mm", "--url", live_url]) == 0
    out = capsys.readouterr().out
    assert "sent back by rita: 25 mA is the pulsed rating; comment by rita: the continuous one is 20 mA" in out
    with Client(live_url, tokens["edna"]) as edna:
        edna.retire_part("led-red-5mm", edna.get_part("led-red-5mm")[1], reason="dimmer than its replacement")
    assert main(["parts", "show", "led-red-5mm", "--url", live_url]) == 0
    assert re.search(
        r"\n +2 .* edna +- +if_max_a .*; retired by edna: dimmer than its replacement\n", out := capsys.readouterr().out
    ), out

    assert main(["parts", "show", "led-red-5mm", "--json", "--url", live_url]) == 0
    shown = json.loads(capsys.readouterr().out)
    assert (shown["etag"], [r["revision"] for r in shown["revisions"]]) == ('"led-red-5mm-r2"', [1, 2])
    assert shown["part"]["status"] == "retired"

    assert main(["parts", "show", "no-such-part", "--url", live_url]) == 2
    assert "404" in capsys.readouterr().err


# --- calc ----------------------------------------------------------------------------------------------------------


def test_calc_prints_a_table_and_exits_0_when_every_check_passes(seeded: Flask, live_url: str, capsys: Any) -> None:
    assert main(["calc", "led-string", *LED_RED, "--current_a", "20 mA", "--url", live_url]) == 0
    out = capsys.readouterr().out
    assert "resistor_ohm" in out and " 300" in out  # (12 V - 3 x 2.1 V) / 20 mA = 285 ohm, up to E24 300 ohm
    # Worst case with units: (12.6 V - 3 x 1.9 V) / (300 ohm x 0.95) = 24.2105 mA against the 30 mA rating with
    # the LEDs at the air's temperature; their own warming lowers Vf, so a little more (under 25 mA).
    assert re.search(r"supply +supply-adapter-12v-2a +1 +approved", out)
    assert "FAIL" not in out and re.search(r"OK +led_current_rating +0\.024[2-9]\d* A +0\.03 A", out)
    # The verdict first, then the cautions with the standing safety line, and the whole fingerprint (as the API).
    lines = out.splitlines()
    assert lines[0] == "led-string: passes every check" and re.fullmatch(r"fingerprint [0-9a-f]{64}", lines[1])
    assert lines[2] == "CAUTIONS:" and "Mains adapter" in lines[3] and lines[4] == f"  ! {SAFETY_LINE}"


def test_calc_exits_1_and_says_why_when_a_check_fails(seeded: Flask, live_url: str, capsys: Any) -> None:
    # 29 mA: (12 - 3 x 2.1) V / 29 mA = 197 ohm, up to the E24 200 ohm; worst case (+5 % supply, lowest Vf,
    # resistor -5 %) (12.6 - 5.7) V / 190 ohm = 36.3 mA cold. Each LED then dissipates 1.9 V x 36.3 mA = 69 mW
    # through 350 K/W: 24.1 K warmer, 2 mV/K lower, so (6.9 + 3 x 0.002 x 24.1) V / 190 ohm = 37.1 mA (a second
    # pass agrees to 0.01 mA), 23.6 % above the 30 mA rating.
    assert main(["calc", "led-string", *LED_RED, "--current_a", "29 mA", "--url", live_url]) == 1
    out = capsys.readouterr().out
    assert re.search(r"FAIL +led_current_rating .* -23.6 %", out)
    assert "CAUTIONS:" in out and "overheat" in out
    assert main(["calc", "led-string", *LED_RED, "--current_a=29 mA", "--json", "--url", live_url]) == 1
    envelope = json.loads(capsys.readouterr().out)
    assert [c["ok"] for c in envelope["checks"] if c["name"] == "led_current_rating"] == [False]


def test_calc_exits_2_with_the_problem_on_stderr(seeded: Flask, live_url: str, capsys: Any) -> None:
    assert main(["calc", "led-string", *LED_RED, "--current_a", "20 V", "--url", live_url]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert "422" in captured.err and "current_a: " in captured.err and "wrong dimension" in captured.err
    assert main(["calc", "led-string", "--url", "http://127.0.0.1:1", "--supply"]) == 2
    assert "--supply needs a value" in capsys.readouterr().err


def test_calc_takes_lists_as_json(seeded: Flask, live_url: str, capsys: Any) -> None:
    loads = '[{"name": "grow LEDs", "peak_current_a": 0.06, "duty_cycle": 0.5, "count": 6}]'
    assert (
        main(["calc", "duty-cycle-power", "--supply", "supply-battery-9v-6aa", "--loads", loads, "--url", live_url])
        == 0
    )
    out = capsys.readouterr().out
    assert "results (SI), loads:" in out and "grow LEDs" in out
    assert re.search(r"average_current_a +0.18\n", out)  # 6 x 60 mA x 0.5 (arithmetic)


def test_calc_inputs_are_typed_and_named_like_the_api() -> None:
    assert calc_inputs(["--leds-in-series", "3", "--current_a=20 mA", "--drive_low_v", "-0.2", "--gain", "1e3"]) == {
        "leds_in_series": 3,
        "current_a": "20 mA",
        "drive_low_v": -0.2,
        "gain": 1000.0,
    }
    assert calc_inputs(["--x", "nan"]) == {"x": "nan"}  # not a JSON number: left for the server to refuse
    for bad in (["led-string"], ["--a", "1", "--a", "2"], ["--loads", "[1,"]):
        with pytest.raises(ValueError):
            calc_inputs(bad)


def test_unknown_options_outside_calc_are_usage_errors(capsys: Any) -> None:
    with pytest.raises(SystemExit) as exit_:
        main(["parts", "list", "--bogus", "1"])
    assert exit_.value.code == 2
    assert "unrecognized arguments: --bogus 1" in capsys.readouterr().err


def test_a_token_made_by_the_command_line_writes_through_it(
    database_url: str, live_url: str, tmp_path: Path, capsys: Any, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("DATABASE_URL", database_url)
    assert main(["token", "create", "--name", "tess", "--role", "editor"]) == 0
    token = capsys.readouterr().out.strip()
    path = tmp_path / "one.csv"
    path.write_text(LED_HEADER + "led-amber-3mm,led,Amber,amber,2.1,1.9,2.5,0.02,0.03\n")
    assert main(["parts", "import", str(path), "--url", live_url, "--token", token]) == 0
    with Client(live_url) as client:
        assert client.get_part("led-amber-3mm")[0]["updated_by"] == "tess"


def test_token_list_shows_names_and_roles_never_tokens(
    app: Flask, database_url: str, capsys: Any, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("DATABASE_URL", database_url)
    assert main(["token", "create", "--name", "tess", "--role", "editor"]) == 0
    assert main(["token", "create", "--name", "rhea", "--role", "reviewer"]) == 0
    made = capsys.readouterr().out.split()
    assert main(["token", "list"]) == 0
    listed = capsys.readouterr()
    assert re.search(r"^rhea +reviewer +\d{4}-\d\d-\d\d", listed.out, re.MULTILINE)
    assert re.search(r"^tess +editor ", listed.out, re.MULTILINE)
    assert not any(token in listed.out for token in made) and "2 token(s)" in listed.err


def test_db_upgrade_says_whether_it_created_the_database(
    tmp_path: Path, capsys: Any, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("DATABASE_URL", f"sqlite:///{tmp_path / 'new.sqlite'}")
    assert main(["db", "upgrade"]) == 0
    assert re.match(r"database created at schema \d{4} ", capsys.readouterr().out)
    assert main(["db", "upgrade"]) == 0
    assert re.match(r"database schema is current at \d{4} ", capsys.readouterr().out)


def test_calc_options_come_from_the_declared_calculations(capsys: Any) -> None:
    assert calc_body("duty-cycle-power", ["--supply_v", "12", "--loads", "[]"]) == {"supply_v": 12, "loads": []}
    for name, tokens in (("led-string", ["--colour", "red"]), ("no-such-calculation", [])):
        with pytest.raises(ValueError):
            calc_body(name, tokens)
    # Refused before any server is asked (nothing listens on port 1).
    assert main(["calc", "led-string", "--colour", "red", "--url", "http://127.0.0.1:1"]) == 2
    assert "led-string takes no --colour" in capsys.readouterr().err
    with pytest.raises(SystemExit):
        main(["calc", "--help"])
    assert "duty-cycle-power: --supply_v" in capsys.readouterr().out
