"""The response every calculation shares: inputs, parts, results, checks, notices and a fingerprint."""

from __future__ import annotations

import hashlib
import itertools
import json
import math
from typing import Any

import numpy as np

from calcsvc.core.channel_spec import CHECK_UNITS
from calcsvc.core.outcome import Outcome
from calcsvc.service.safety import SAFETY_LINE


def to_json_value(value: Any) -> Any:
    """JSON-ready: numpy scalars to Python, NaN (does not apply) to null, arrays to lists."""
    kind = type(value)
    if kind is float:  # most values of an answer: tested first, as the general path would answer
        return value if math.isfinite(value) else None
    if kind is int or kind is str or kind is bool:
        return value
    if isinstance(value, np.ndarray):
        if value.dtype.kind == "f":
            # Object arrays hold Python floats; NaN becomes None in one vectorized step.
            boxed = value.astype(object)
            boxed[np.isnan(value)] = None
            return boxed.tolist()
        return value.tolist()
    if isinstance(value, list | tuple):
        return [to_json_value(v) for v in value]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def fingerprint(calculation: str, version: str, inputs: dict[str, Any], parts: list[dict[str, Any]]) -> str:
    """Stable over key order: the same inputs, part revisions and calculation version give the same hash."""
    canonical = json.dumps(
        {
            "calculation": calculation,
            "version": version,
            "inputs": inputs,
            "parts": sorted((p["role"], p["part_id"], p["revision"]) for p in parts),
        },
        sort_keys=True,
        separators=(",", ":"),
    )
    return hashlib.sha256(canonical.encode()).hexdigest()


def row_value(column: np.ndarray, row: int) -> Any:
    """``column[row]`` as Python: ``item`` converts a plain column's value without a numpy scalar in between."""
    return column.item(row) if column.ndim == 1 else column[row]


def row_results(outcome: Outcome, row: int, names: list[str]) -> dict[str, Any]:
    results = outcome.results
    return {name: to_json_value(row_value(results[name], row)) for name in names if name in results}


SWEEP_KEYS = ("frequency_hz", "gain_db", "phase_deg")


def row_sweeps(outcome: Outcome, n: int) -> list[dict[str, np.ndarray] | None]:
    """Each of the ``n`` computed rows' own sweep (slices of the core's flat arrays), None where it has none."""
    if "sweep_row" not in outcome.results:
        return [None] * n
    bounds = np.searchsorted(outcome.results["sweep_row"], np.arange(n + 1)).tolist()
    columns = {key: outcome.results[f"sweep_{key}"] for key in SWEEP_KEYS}
    return [
        {key: column[low:high] for key, column in columns.items()} if high > low else None
        for low, high in itertools.pairwise(bounds)
    ]


def row_checks(outcome: Outcome, row: int) -> list[dict[str, Any]]:
    """The checks that apply on ``row`` (a check whose limit is unknown there is left out)."""
    checks = []
    for check in outcome.checks:
        limit = float(check.limit.item(row))
        if math.isnan(limit):
            continue
        checks.append(
            {
                "name": check.name,
                "unit": CHECK_UNITS.get(check.name, ""),
                "ok": bool(check.ok.item(row)),
                "value": to_json_value(float(check.value.item(row))),
                "limit": limit,
                "margin": to_json_value(float(check.margin().item(row))),
                "detail": check.detail,
            }
        )
    return checks


def row_notices(notices: list[Any], row: int) -> list[str]:
    return [notice.message for notice in notices if bool(notice.rows[row])]


def envelope(
    calculation: str,
    version: str,
    inputs: dict[str, Any],
    parts: list[dict[str, Any]],
    results: dict[str, Any],
    outcome: Outcome,
    row: int,
    warnings: list[str],
    cautions: list[str],
) -> dict[str, Any]:
    """The answer to one calculation; ``cautions`` are the standing ones of the parts used, before the design's."""
    inputs = {k: to_json_value(v) for k, v in inputs.items()}
    return {
        "calculation": calculation,
        "inputs": inputs,
        "parts": parts,
        "results": results,
        "checks": row_checks(outcome, row),
        "warnings": warnings + row_notices(outcome.warnings, row),
        "cautions": row_notices(outcome.cautions, row) + cautions,
        "safety": SAFETY_LINE,
        "fingerprint": fingerprint(calculation, version, inputs, parts),
    }
