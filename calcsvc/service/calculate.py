"""One calculation of the core for one request: parts resolved, defaults filled, computed, answered as an envelope."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from calcsvc.core.outcome import DomainError, Outcome
from calcsvc.core.spec import CalculationSpec, Columns, InputSet
from calcsvc.data.database import Database
from calcsvc.service.envelope import envelope, row_results, row_sweeps, to_json_value
from calcsvc.service.errors import InvalidInput, PhysicallyImpossible
from calcsvc.service.resolve import resolve_parts


def complete(calc: InputSet, values: dict[str, Any]) -> dict[str, Any]:
    """Fill defaults; a required input neither given nor supplied by a part is refused, naming it."""
    missing = {
        spec.name: [f"required: give {spec.name} or reference a part that provides it"]
        for spec in calc.inputs
        if spec.required and spec.name not in values
    }
    if missing:
        raise InvalidInput("missing inputs: " + ", ".join(missing), missing)
    filled = {spec.name: spec.default for spec in calc.inputs if spec.default is not None}
    names = {spec.name for spec in calc.inputs}
    filled.update({k: v for k, v in values.items() if k in names})
    for spec in calc.inputs:
        if spec.integer and spec.name in filled:
            filled[spec.name] = int(filled[spec.name])
    return filled


def columns_of(calc: InputSet, rows: list[dict[str, Any]]) -> Columns:
    """Input columns for the core: floats with NaN for absent optional inputs, strings for choices."""
    columns: Columns = {}
    for spec in calc.inputs:
        if spec.choices:
            columns[spec.name] = np.array([row[spec.name] for row in rows], dtype=str)
        else:
            columns[spec.name] = np.array([row.get(spec.name, math.nan) for row in rows], dtype=np.float64)
    return columns


def results_of_row(calc: CalculationSpec, outcome: Outcome, row: int) -> dict[str, Any]:
    """The declared results of one row, its sweep included when it has one."""
    results = row_results(outcome, row, calc.scalar_results())
    sweep = row_sweeps(outcome, row + 1)[row]
    if sweep is not None:
        results["sweep"] = {key: to_json_value(values) for key, values in sweep.items()}
    return results


def check_inputs(database: Database, calc: CalculationSpec, body: Mapping[str, Any]) -> None:
    """Refuse ``body`` as :func:`run_calculation` would, from the parts and the core's checks, computing nothing."""
    values = complete(calc, resolve_parts(database, calc.roles, body).values)
    violations = calc.validate(calc.make_inputs(columns_of(calc, [values])))
    if violations:
        raise PhysicallyImpossible.of(violations)


def run_calculation(database: Database, calc: CalculationSpec, body: Mapping[str, Any]) -> dict[str, Any]:
    """The envelope of ``calc`` for one request body (values in SI, part references by role name)."""
    resolved = resolve_parts(database, calc.roles, body)
    values = complete(calc, resolved.values)
    try:
        outcome = calc.compute(calc.make_inputs(columns_of(calc, [values])))
    except DomainError as exc:
        raise PhysicallyImpossible.of(exc.violations) from exc
    return envelope(
        calc.name,
        calc.version,
        values,
        resolved.parts,
        results_of_row(calc, outcome, 0),
        outcome,
        0,
        resolved.warnings,
        resolved.cautions,
    )
