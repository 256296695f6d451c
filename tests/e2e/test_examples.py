"""The shipped examples run against a live server and give the answers their numbers imply."""

from __future__ import annotations

import csv
import importlib.util
from pathlib import Path
from typing import Any

pytest_plugins = ("live_server",)

EXAMPLES = Path(__file__).resolve().parents[2] / "examples"


def _channel_batch() -> Any:
    spec = importlib.util.spec_from_file_location("channel_batch", EXAMPLES / "channel_batch.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_candidate_channels_through_the_batch_endpoint(live_url: str, seeded: Any, tmp_path: Path) -> None:
    results = tmp_path / "results.csv"
    assert _channel_batch().main([str(EXAMPLES / "greenhouse-candidates.csv"), str(results), "--url", live_url]) == 0
    rows = {row["design"]: row for row in csv.DictReader(results.open())}
    assert len(rows) == 6
    # (12 - 3 x 2.1 - 0.2) V / 20 mA = 275 ohm; the next E24 value up is 300 ohm (IEC 60063).
    assert float(rows["red-3x2-20mA"]["resistor_ohm"]) == 300.0 and rows["red-3x2-20mA"]["ok"] == "True"
    # Four red LEDs leave (12 - 8.4 - 0.2) V: 3.4 V is above the 1.2 V headroom limit, so this one sizes too.
    assert rows["red-4x2-20mA"]["resistor_ohm"] != ""
    # Three white LEDs at 3.0 V need 9 V plus the switch: more than the 9 V pack, refused with the reason.
    white = rows["white-3x1-battery"]
    assert white["ok"] == "False" and "forward voltage" in white["problem"]
    # 350 mA from an 8 mA pin at forced beta 10 needs 35 mA: the driver check fails and is named.
    assert "driver_current" in rows["deep-red-3x1-350mA"]["failing_checks"]


def test_the_batch_example_reads_calcsvc_url_and_says_when_nothing_answers(
    live_url: str, seeded: Any, tmp_path: Path, monkeypatch: Any, capsys: Any
) -> None:
    results = tmp_path / "results.csv"
    monkeypatch.setenv("CALCSVC_URL", live_url)
    assert _channel_batch().main([str(EXAMPLES / "greenhouse-candidates.csv"), str(results)]) == 0
    assert len(list(csv.DictReader(results.open()))) == 6
    assert "licensed practice" in capsys.readouterr().out
    monkeypatch.setenv("CALCSVC_URL", "http://127.0.0.1:1")  # nothing listens on port 1
    assert _channel_batch().main([str(EXAMPLES / "greenhouse-candidates.csv"), str(tmp_path / "none.csv")]) == 1
    err = capsys.readouterr().err
    assert err.startswith("channel_batch: ") and "Traceback" not in err and len(err.splitlines()) == 1


def test_readme_settings_table_is_the_one_the_settings_define() -> None:
    from calcsvc.config import settings_table

    readme = (EXAMPLES.parent / "README.md").read_text()
    assert settings_table() in readme
