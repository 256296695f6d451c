"""A real spreadsheet as a client: Debian's LibreOffice Calc, headless, fetches answers from the production
server (the container entrypoint) with its web-fetch function, in an English and a decimal-comma locale.

The sheet is driven by ``sheet_driver.py`` under the system interpreter, which owns the ``uno`` module."""

from __future__ import annotations

import json
import os
import subprocess
from collections.abc import Iterator
from pathlib import Path
from typing import Any
from urllib.parse import quote, urlencode

import pytest
import requests
from test_entrypoint import Server, entrypoint

SOFFICE = "/usr/bin/soffice"
SYSTEM_PYTHON = "/usr/bin/python3"
DRIVER = Path(__file__).resolve().parents[1] / "sheet_driver.py"
DRIVER_TIMEOUT_S = 60


def _missing() -> str | None:
    """Why the real spreadsheet cannot run here, or None."""
    if not os.access(SOFFICE, os.X_OK):
        return f"{SOFFICE} is absent: install the Debian package 'libreoffice-calc-nogui'"
    try:
        probe = subprocess.run([SYSTEM_PYTHON, "-c", "import uno"], capture_output=True, timeout=30)
    except FileNotFoundError:
        return f"{SYSTEM_PYTHON} is absent"
    if probe.returncode != 0:
        return f"{SYSTEM_PYTHON} cannot import uno: install the Debian package 'python3-uno'"
    return None


if reason := _missing():
    if os.environ.get("CALCSVC_REQUIRE_SPREADSHEET"):
        # CI installs the spreadsheet, so its absence there is a failure, never a silent skip.
        raise RuntimeError(reason)
    pytest.skip(reason, allow_module_level=True)

LED = {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "leds_in_series": "3", "current_a": "20 mA"}
OPAMP = {"opamp": "opamp-general-1mhz", "configuration": "non_inverting", "gain": "50", "signal_hz": "2 kHz"}


def _led_fetch(current_cell: str) -> str:
    """The README's way: the URL joined from cells with ``&``, text values through ENCODEURL, the sheet mode and
    the sheet's decimal mark (in A13) at the end."""
    return (
        '=WEBSERVICE($A$1&"/v1/calc/led-string?supply="&ENCODEURL($A$2)&"&led="&ENCODEURL($A$3)'
        f'&"&leds_in_series="&$A$4&"&current_a="&ENCODEURL({current_cell})&"&pick=resistor_ohm&sheet=1&decimal="&$A$13)'
    )


def _cells(base_url: str, decimal: str, mark: str) -> dict[str, Any]:
    return {
        "A1": base_url,
        "A2": LED["supply"],
        "A3": LED["led"],
        "A4": 3,
        "A5": LED["current_a"],
        "A6": OPAMP["opamp"],
        "A7": OPAMP["configuration"],
        "A8": 50,
        "A9": OPAMP["signal_hz"],
        "A10": "20 ma",  # refused: unit case matters
        "A11": "200 mA",  # computed, but the LED's current check fails
        "A12": 0.02,  # a number cell joined into the URL: written in the sheet's decimal mark
        "A13": decimal,  # "point" or "comma": the sheet's decimal mark, told to the service
        "B1": _led_fetch("$A$5"),
        "B2": "=VALUE(B1)",  # the sheet's own conversion reads its own decimal mark
        "B3": f'=NUMBERVALUE(B1;"{mark}")',  # or whatever the locale, naming the mark asked for
        "C1": '=WEBSERVICE($A$1&"/v1/calc/closed-loop-bandwidth?opamp="&ENCODEURL(A6)&"&configuration="&A7'
        '&"&gain="&A8&"&signal_hz="&ENCODEURL(A9)&"&pick=bandwidth_hz&sheet=1&decimal="&$A$13)',
        "C2": "=VALUE(C1)",
        "C3": f'=NUMBERVALUE(C1;"{mark}")',
        "D1": _led_fetch("$A$10"),
        "D2": _led_fetch("$A$11"),
        "D3": _led_fetch("$A$12"),
        "D4": "=VALUE(D3)",
        "E1": 0.5,  # shows which decimal separator the sheet's locale uses
    }


def _direct(server: Server, name: str, inputs: dict[str, str], pick: str, decimal: str = "point") -> str:
    """The same URL the sheet builds (spaces as %20, as ENCODEURL writes them), fetched by requests."""
    query = urlencode({**inputs, "pick": pick, "sheet": "1", "decimal": decimal}, quote_via=quote)
    answer = requests.get(f"{server.url}/v1/calc/{name}?{query}", timeout=10)
    assert answer.status_code == 200, answer.text
    return answer.text


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Server]:
    folder = tmp_path_factory.mktemp("sheet-server")
    with entrypoint(folder, f"sqlite:///{folder / 'calcsvc.sqlite'}", "sheet") as running:
        yield running


def _run_sheet(tmp_path: Path, job: dict[str, Any]) -> dict[str, dict[str, Any]]:
    job_file = tmp_path / "job.json"
    job_file.write_text(json.dumps(job))
    result = subprocess.run(
        [SYSTEM_PYTHON, str(DRIVER), str(job_file)], capture_output=True, text=True, timeout=DRIVER_TIMEOUT_S + 30
    )
    assert result.returncode == 0, result.stderr
    (tmp_path / "sheet.json").write_text(result.stdout)  # what each cell showed, kept beside the job
    cells: dict[str, dict[str, Any]] = json.loads(result.stdout)["cells"]
    return cells


@pytest.mark.parametrize(("locale", "decimal", "mark"), [("en-US", "point", "."), ("de-DE", "comma", ",")])
def test_a_sheet_shows_numbers_refusals_and_failing_designs(
    server: Server, tmp_path: Path, locale: str, decimal: str, mark: str
) -> None:
    resistor_text = _direct(server, "led-string", LED, "resistor_ohm", decimal)
    bandwidth_text = _direct(server, "closed-loop-bandwidth", OPAMP, "bandwidth_hz", decimal)
    resistor, bandwidth = (float(text.replace(",", ".")) for text in (resistor_text, bandwidth_text))
    assert resistor == 300.0 and resistor_text == f"300{mark}0"
    assert bandwidth == pytest.approx(24_008.0, rel=1e-3)  # 1.2 MHz/50 + 1.2 MHz/150 000 (GBW/NG)

    cells = _run_sheet(
        tmp_path,
        {"locale": locale, "cells": _cells(server.url, decimal, mark), "wait_for": ["B1", "C1", "D1", "D2", "D3"]},
    )

    assert cells["E1"]["string"] == f"0{mark}5", "the sheet did not take the locale"
    for fetched, text in (("B1", resistor_text), ("C1", bandwidth_text)):
        assert (cells[fetched]["kind"], cells[fetched]["string"]) == ("text", text)
    # The documented conversions: the sheet's own text-to-number function with the service answering in the
    # sheet's decimal mark, or the one that is told the mark.
    for converted, number in (("B2", resistor), ("B3", resistor), ("C2", bandwidth), ("C3", bandwidth)):
        assert (cells[converted]["kind"], cells[converted]["value"]) == ("number", number), cells[converted]
    # A number cell joins into the URL in the sheet's decimal mark, which the service was told.
    assert (cells["D3"]["string"], cells["D4"]["kind"], cells["D4"]["value"]) == (resistor_text, "number", 300.0)
    # A refused input and a failing design show our line, never a number or the sheet's generic error.
    assert cells["D1"]["string"] == "error: current_a: unknown unit 'ma'; did you mean 'mA'?"
    failing = cells["D2"]["string"]
    assert cells["D2"]["kind"] == "text" and failing.startswith("fails: led_current_rating: 0")
    assert failing.endswith(f" > limit 0{mark}03") or f" > limit 0{mark}03;" in failing, failing
