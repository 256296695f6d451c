"""Drive a real LibreOffice Calc, headless, through its UNO bridge: fill cells, recalculate, read them back.

Run with Debian's ``/usr/bin/python3`` (the ``uno`` module is installed for that interpreter only), never
imported by the project. One argument, a JSON job file::

    {"locale": "de-DE",                      # optional: /org.openoffice.Setup/L10N ooSetupSystemLocale
     "cells": {"A1": "http://...", "A2": 3, "B1": "=WEBSERVICE(A1)"},  # "=..." is a formula (English names,
                                                                        # ";" between arguments), else a value
     "wait_for": ["B1"],                     # formula cells that fetch: waited on until they hold a result
     "timeout_s": 60}                        # the whole run, start-up included

Prints one JSON object: ``{"locale", "seconds", "cells": {name: {"kind", "value", "string", "error"}}}``
where kind is ``number``, ``text``, ``error`` or ``empty``. Exits 1 with one line on stderr on any failure.
Its own soffice (own profile directory and pipe name) is stopped by its process group in every case.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import threading
import time
import uuid
from pathlib import Path
from typing import Any

import uno
from com.sun.star.beans import PropertyValue
from com.sun.star.connection import NoConnectException
from com.sun.star.uno import RuntimeException as UnoRuntimeException

SOFFICE = "/usr/bin/soffice"
QUIT_TIMEOUT_S = 5.0
# com.sun.star.sheet.FormulaResult constants
_RESULT_KINDS = {1: "number", 2: "text", 4: "error"}


class Timeout(Exception):
    pass


def _property(name: str, value: Any) -> PropertyValue:
    prop = PropertyValue()
    prop.Name, prop.Value = name, value
    return prop


def _connect(pipe: str, process: subprocess.Popen[bytes], deadline: float) -> Any:
    local = uno.getComponentContext()
    resolver = local.ServiceManager.createInstanceWithContext("com.sun.star.bridge.UnoUrlResolver", local)
    while True:
        try:
            return resolver.resolve(f"uno:pipe,name={pipe};urp;StarOffice.ComponentContext")
        except NoConnectException:
            if process.poll() is not None:
                raise RuntimeError(f"soffice exited with {process.returncode} before accepting a connection") from None
            if time.monotonic() > deadline:
                raise Timeout("soffice did not accept a connection in time") from None
            time.sleep(0.25)


def _set_locale(context: Any, locale: str) -> None:
    provider = context.ServiceManager.createInstanceWithContext(
        "com.sun.star.configuration.ConfigurationProvider", context
    )
    access = provider.createInstanceWithArguments(
        "com.sun.star.configuration.ConfigurationUpdateAccess", (_property("nodepath", "/org.openoffice.Setup/L10N"),)
    )
    access.setPropertyValue("ooSetupSystemLocale", locale)
    access.commitChanges()


def _fill(sheet: Any, cells: dict[str, Any]) -> None:
    for name, content in cells.items():
        cell = sheet.getCellRangeByName(name)
        if isinstance(content, bool) or not isinstance(content, (int, float, str)):
            raise ValueError(f"cell {name}: a number or a string, not {content!r}")
        if isinstance(content, str) and content.startswith("="):
            cell.setFormula(content)
        elif isinstance(content, str):
            cell.setString(content)  # text stays text: no number or date recognition
        else:
            cell.setValue(float(content))


def _read(cell: Any) -> dict[str, Any]:
    kind = cell.getType().value  # EMPTY, VALUE, TEXT or FORMULA
    if kind == "FORMULA":
        kind = _RESULT_KINDS.get(cell.getPropertyValue("FormulaResultType2"), "unknown")
    else:
        kind = {"EMPTY": "empty", "VALUE": "number", "TEXT": "text"}[kind]
    return {"kind": kind, "value": cell.getValue(), "string": cell.getString(), "error": cell.getError()}


def _settled(cell: Any) -> bool:
    return cell.getError() != 0 or cell.getString() != ""


def _quit(desktop: Any, process: subprocess.Popen[bytes]) -> None:
    """Ask soffice to exit, so that it removes its pipes and temporary files; the group is killed after anyway."""
    try:
        desktop.terminate()
    except UnoRuntimeException:
        return  # the bridge drops as soffice exits
    try:
        process.wait(timeout=QUIT_TIMEOUT_S)
    except subprocess.TimeoutExpired:
        pass


def _compute(desktop: Any, job: dict[str, Any], deadline: float) -> dict[str, dict[str, Any]]:
    """A new sheet with the job's cells, recalculated; every cell read back once the fetches hold a result."""
    document = desktop.loadComponentFromURL("private:factory/scalc", "_blank", 0, (_property("Hidden", True),))
    try:
        sheet = document.getSheets().getByIndex(0)
        _fill(sheet, job["cells"])
        document.calculateAll()
        waiting = [sheet.getCellRangeByName(name) for name in job.get("wait_for", [])]
        while not all(_settled(cell) for cell in waiting):
            if time.monotonic() > deadline:
                raise Timeout(f"cells {job.get('wait_for')} held no result in time")
            time.sleep(0.2)
        return {name: _read(sheet.getCellRangeByName(name)) for name in job["cells"]}
    finally:
        document.close(True)


def run(job: dict[str, Any]) -> dict[str, Any]:
    started = time.monotonic()
    timeout_s = float(job.get("timeout_s", 60))
    deadline = started + timeout_s
    profile = Path(tempfile.mkdtemp(prefix="calcsvc-sheet-"))
    (profile / "tmp").mkdir()
    pipe = f"calcsvc-sheet-{uuid.uuid4().hex}"
    process = subprocess.Popen(
        [
            SOFFICE,
            "--headless",
            "--invisible",
            "--norestore",
            "--nologo",
            "--nodefault",
            "--nolockcheck",
            f"-env:UserInstallation={(profile / 'user').as_uri()}",
            f"--accept=pipe,name={pipe};urp;",
        ],
        env={**os.environ, "TMPDIR": str(profile / "tmp")},
        stdin=subprocess.DEVNULL,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        start_new_session=True,  # its own process group: stopped as a whole, nothing else touched
    )
    expired = threading.Event()

    def stop() -> None:
        try:
            os.killpg(process.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass

    def on_deadline() -> None:
        # A UNO call blocked inside soffice (a fetch that never answers) only returns once soffice is gone.
        expired.set()
        stop()

    watchdog = threading.Timer(max(0.0, deadline - time.monotonic()), on_deadline)
    watchdog.daemon = True
    watchdog.start()
    desktop = None
    try:
        context = _connect(pipe, process, deadline)
        if job.get("locale"):
            _set_locale(context, job["locale"])
        desktop = context.ServiceManager.createInstanceWithContext("com.sun.star.frame.Desktop", context)
        cells = _compute(desktop, job, deadline)
        return {"locale": job.get("locale"), "seconds": round(time.monotonic() - started, 2), "cells": cells}
    except Exception as error:
        if expired.is_set():
            raise Timeout(f"gave up after {timeout_s:g} s ({type(error).__name__}: {error})") from error
        raise
    finally:
        if desktop is not None and not expired.is_set():
            _quit(desktop, process)  # still under the watchdog
        watchdog.cancel()
        stop()
        process.wait(timeout=QUIT_TIMEOUT_S)
        # soffice keeps its pipe in /tmp whatever TMPDIR says; when it was killed, the socket file stays behind.
        (Path("/tmp") / f"OSL_PIPE_{os.getuid()}_{pipe}").unlink(missing_ok=True)
        shutil.rmtree(profile, ignore_errors=True)


def main(argv: list[str]) -> int:
    if len(argv) != 2:
        print("usage: sheet_driver.py JOB.json", file=sys.stderr)
        return 2
    try:
        answer = run(json.loads(Path(argv[1]).read_text()))
    except Exception as error:
        print(f"sheet driver failed: {type(error).__name__}: {error}", file=sys.stderr)
        return 1
    print(json.dumps(answer))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
