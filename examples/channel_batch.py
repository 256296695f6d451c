"""Size every candidate channel of the greenhouse grow-light controller in two batch calls.

Reads a CSV of candidate designs (one row each: supply, LED, arrangement, transistor, driver pin, duty cycle),
sizes every LED string resistor in one ``led-string`` batch, feeds each channel's total current into one
``bjt-switch`` batch for the base resistor, and writes a results CSV with a verdict per design.

    python examples/channel_batch.py examples/greenhouse-candidates.csv results.csv [--url URL]

``--url`` defaults to ``$CALCSVC_URL``, else http://127.0.0.1:8000, as the command line's does.
"""

from __future__ import annotations

import argparse
import csv
import os
import sys
from pathlib import Path
from typing import Any

from calcsvc.client import CalcsvcError, Client
from calcsvc.service.safety import SAFETY_LINE

STRING_INPUTS = ("supply", "led", "leds_in_series", "strings", "current_a", "transistor")
COLUMNS = (
    "design", "ok", "resistor_ohm", "resistor_rating_w", "current_max_a", "total_current_a", "rb_ohm",
    "drive_current_a", "transistor_power_w", "failing_checks", "problem",
)  # fmt: skip


def failing(entry: dict[str, Any]) -> list[str]:
    return [check["name"] for check in entry.get("checks", []) if not check["ok"]]


def size_channels(client: Client, designs: list[dict[str, str]]) -> list[dict[str, Any]]:
    strings = client.batch("led-string", [{k: d[k] for k in STRING_INPUTS} for d in designs])["rows"]
    switches: list[dict[str, Any]] = []
    sized = [(d, s) for d, s in zip(designs, strings, strict=True) if s["ok"]]
    if sized:
        switch_rows = [
            {
                "transistor": design["transistor"],
                "driver": design["driver"],
                "collector_current_a": entry["results"]["total_current_a"],
                "duty_cycle": design["duty_cycle"],
            }
            for design, entry in sized
        ]
        switches = client.batch("bjt-switch", switch_rows)["rows"]
    by_design = {design["design"]: switch for (design, _), switch in zip(sized, switches, strict=True)}
    results = []
    for design, entry in zip(designs, strings, strict=True):
        row: dict[str, Any] = {"design": design["design"]}
        switch = by_design.get(design["design"])
        if not entry["ok"]:
            row.update(ok=False, problem=entry["problem"]["detail"])
        elif switch is None or not switch["ok"]:
            row.update(ok=False, problem=switch["problem"]["detail"] if switch else "switch not sized")
        else:
            checks = failing(entry) + failing(switch)
            row.update(entry["results"], **switch["results"], ok=not checks, failing_checks=";".join(checks))
        results.append({column: row.get(column, "") for column in COLUMNS})
    return results


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("designs", type=Path)
    parser.add_argument("results", type=Path)
    parser.add_argument("--url", default=os.environ.get("CALCSVC_URL") or "http://127.0.0.1:8000")
    args = parser.parse_args(argv)
    with args.designs.open(newline="") as handle:
        designs = list(csv.DictReader(handle))
    try:
        with Client(args.url) as client:
            results = size_channels(client, designs)
    except CalcsvcError as error:
        print(f"channel_batch: {error}", file=sys.stderr)
        return 1
    with args.results.open("w", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=COLUMNS)
        writer.writeheader()
        writer.writerows(results)
    passed = sum(1 for r in results if r["ok"] is True)
    print(f"{passed} of {len(results)} designs pass every check; results in {args.results}")
    print(SAFETY_LINE)
    return 0


if __name__ == "__main__":
    sys.exit(main())
