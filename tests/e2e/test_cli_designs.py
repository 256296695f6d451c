"""``calcsvc designs``: request files imported as designs, listed, and checked at today's approved parts with an
exit status a lab's CI can use (both stores, a real server on loopback)."""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

from flask import Flask

from calcsvc.cli import main
from calcsvc.client import Client

pytest_plugins = ("live_server",)

EXAMPLES = Path(__file__).resolve().parents[2] / "examples"
# A reel of the demo's red LEDs binned higher (invented, class-typical values): 2.6 to 3.4 V.
HIGH_VF_BATCH = {"color": "red", "vf_typ_v": 2.9, "vf_min_v": 2.6, "vf_max_v": 3.4, "if_test_a": 0.02, "if_max_a": 0.03}


def test_import_list_and_check(seeded: Flask, live_url: str, tokens: dict[str, str], capsys: Any) -> None:
    editor = ["--url", live_url, "--token", tokens["edna"]]
    assert main(["designs", "import", str(EXAMPLES), *editor]) == 0
    assert "saved as greenhouse-channel revision 1 (pass)" in capsys.readouterr().out
    assert main(["designs", "import", str(EXAMPLES / "greenhouse-channel.json"), *editor]) == 0
    assert "revision 2" in capsys.readouterr().out  # the same file again: a new revision, nothing lost
    assert main(["designs", "list", "--url", live_url]) == 0
    assert re.search(r"greenhouse-channel +channel +edna +pass", capsys.readouterr().out)
    assert main(["designs", "check", "--url", live_url]) == 0
    assert "every saved design passes at today's approved parts (1 checked)" in capsys.readouterr().out

    with Client(live_url, tokens["edna"]) as client:
        part, etag = client.get_part("led-red-5mm")
        # A new reel of the same LED: only its forward voltages differ, its thermal data stay.
        _, etag = client.update_part("led-red-5mm", {**part["parameters"], **HIGH_VF_BATCH}, etag)
        assert client.part_impact("led-red-5mm")["summary"]["pass_to_fail"] == 1
    assert main(["designs", "list", "--affected-by-draft", "--url", live_url]) == 0
    assert "greenhouse-channel" in capsys.readouterr().out
    assert main(["designs", "check", "--url", live_url]) == 0  # a draft changes nothing until approved
    capsys.readouterr()
    with Client(live_url, tokens["rita"]) as client:
        client.approve_part("led-red-5mm", etag)
    assert main(["designs", "check", "--url", live_url]) == 1
    out = capsys.readouterr().out
    assert re.search(r"greenhouse-channel +edna +fail +.*headroom", out)
    assert "1 of 1 saved designs fail at today's approved parts" in out
