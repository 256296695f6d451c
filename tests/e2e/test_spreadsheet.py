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
    """The README's way: the URL joined from cells with ``&``, text values through ENCODEURL."""
    return (
        '=WEBSERVICE($A$1&"/v1/calc/led-string?supply="&ENCODEURL($A$2)&"&led="&ENCODEURL($A$3)'
        f'&"&leds_in_series="&$A$4&"&current_a="&ENCODEURL({current_cell})&"&pick=resistor_ohm")'
    )


def _cells(base_url: str) -> dict[str, Any]:
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
        "A12": 0.02,  # a number cell joined into the URL: formatted the sheet's locale's way
        "B1": _led_fetch("$A$5"),
        "B2": "=VALUE(B1)",
        "B3": '=NUMBERVALUE(B1;".")',
        "C1": '=WEBSERVICE($A$1&"/v1/calc/closed-loop-bandwidth?opamp="&ENCODEURL(A6)&"&configuration="&A7'
        '&"&gain="&A8&"&signal_hz="&ENCODEURL(A9)&"&pick=bandwidth_hz")',
        "C2": "=VALUE(C1)",
        "C3": '=NUMBERVALUE(C1;".")',
        "D1": _led_fetch("$A$10"),
        "D2": _led_fetch("$A$11"),
        "D3": _led_fetch("$A$12"),
        "E1": 0.5,  # shows which decimal separator the sheet's locale uses
    }


def _direct(server: Server, name: str, inputs: dict[str, str], pick: str) -> str:
    """The same URL the sheet builds (spaces as %20, as ENCODEURL writes them), fetched by requests."""
    query = urlencode({**inputs, "pick": pick}, quote_via=quote)
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


@pytest.mark.parametrize(("locale", "decimal_point"), [("en-US", "."), ("de-DE", ",")])
def test_a_sheet_fetches_answers_and_turns_them_into_numbers(
    server: Server, tmp_path: Path, locale: str, decimal_point: str
) -> None:
    resistor_text = _direct(server, "led-string", LED, "resistor_ohm")
    bandwidth_text = _direct(server, "closed-loop-bandwidth", OPAMP, "bandwidth_hz")
    assert float(resistor_text) == 300.0
    assert float(bandwidth_text) == pytest.approx(24_008.0, rel=1e-3)  # 1.2 MHz/50 + 1.2 MHz/150 000 (GBW/NG)

    cells = _run_sheet(
        tmp_path,
        {"locale": locale, "cells": _cells(server.url), "wait_for": ["B1", "C1", "D1", "D2", "D3"]},
    )

    assert cells["E1"]["string"] == f"0{decimal_point}5", "the sheet did not take the locale"
    for fetched, text in (("B1", resistor_text), ("C1", bandwidth_text)):
        assert (cells[fetched]["kind"], cells[fetched]["string"]) == ("text", text)
    # NUMBERVALUE(x; ".") reads the service's decimal point whatever the sheet's locale.
    for converted, number in (("B3", float(resistor_text)), ("C3", float(bandwidth_text))):
        assert (cells[converted]["kind"], cells[converted]["value"]) == ("number", number)
    if decimal_point == ".":
        for converted, number in (("B2", float(resistor_text)), ("C2", float(bandwidth_text))):
            assert (cells[converted]["kind"], cells[converted]["value"]) == ("number", number)
