"""The supply budget for one request: the supply resolved, each load's currents from its description, the core
once over all loads, answered as an envelope with one record per load."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from calcsvc.core import duty_power, load_current
from calcsvc.core.outcome import DomainError
from calcsvc.data.database import Database
from calcsvc.service.calculate import complete
from calcsvc.service.envelope import envelope, row_results, to_json_value
from calcsvc.service.errors import PhysicallyImpossible
from calcsvc.service.resolve import resolve_parts

SPEC = duty_power.SPEC
_LOAD_DEFAULTS = {spec.name: spec.default for spec in SPEC.items.inputs if spec.default is not None}


def _load_currents(load: Mapping[str, Any]) -> dict[str, Any]:
    """Peak, duty, average and RMS of one load, from its duty cycle, its on time and period, or its waveform."""
    if "waveform" in load:
        average, rms, peak, duty = load_current.waveform_stats(
            load["waveform"]["time_s"], load["waveform"]["current_a"]
        )
        return {"peak_current_a": peak, "duty_cycle": duty, "average_current_a": average, "rms_current_a": rms}
    if "duty_cycle" in load:
        duty = load["duty_cycle"]
    else:
        duty = float(load_current.on_time_duty(load["on_time_s"], load["period_s"])[0])
    return {"peak_current_a": load["peak_current_a"], "duty_cycle": duty}


def run_duty(database: Database, body: Mapping[str, Any]) -> dict[str, Any]:
    """The envelope of the supply budget for one request body (values in SI; the supply may be a part)."""
    resolved = resolve_parts(database, SPEC.roles, body)
    values = complete(SPEC, resolved.values)
    loads = []
    for index, given in enumerate(resolved.values[SPEC.items.name]):
        load = {**_LOAD_DEFAULTS, **given}
        try:
            currents = _load_currents(load)
        except DomainError as exc:
            raise PhysicallyImpossible.of(exc.violations, f"{SPEC.items.name}.{index}.") from exc
        loads.append({"name": load["name"], "count": load["count"], "fixed": load["fixed"], **currents})
    column = {
        key: np.array([load.get(key, math.nan) for load in loads], dtype=np.float64)
        for key in ("peak_current_a", "duty_cycle", "average_current_a", "rms_current_a", "count")
    }
    waveform = ~np.isnan(column["average_current_a"])
    inputs = duty_power.DutyPowerInputs(
        supply_v=np.array([values["supply_v"]]),
        current_max_a=np.array([values.get("current_max_a", math.nan)]),
        capacity_ah=np.array([values.get("capacity_ah", math.nan)]),
        load_row=np.zeros(len(loads), dtype=np.int64),
        peak_current_a=column["peak_current_a"],
        duty_cycle=np.where(waveform, math.nan, column["duty_cycle"]),
        average_current_a=column["average_current_a"],
        rms_current_a=column["rms_current_a"],
        count=column["count"],
        fixed=np.array([load["fixed"] for load in loads], dtype=bool),
    )
    try:
        outcome = duty_power.compute(inputs)
    except DomainError as exc:
        raise PhysicallyImpossible.of(exc.violations) from exc
    per_load = [
        {
            "name": load["name"],
            "count": load["count"],
            "duty_cycle": to_json_value(load["duty_cycle"]),
            "peak_current_a": to_json_value(load["peak_current_a"]),
            "average_current_a": to_json_value(outcome.results["load_average_current_a"][k]),
            "rms_current_a": to_json_value(outcome.results["load_rms_current_a"][k]),
            "average_power_w": to_json_value(outcome.results["load_average_power_w"][k]),
            "peak_power_w": to_json_value(outcome.results["load_peak_power_w"][k]),
        }
        for k, load in enumerate(loads)
    ]
    results = {"loads": per_load, **row_results(outcome, 0, [r.name for r in SPEC.results if r.scalar])}
    resolved_inputs: dict[str, Any] = dict(values)
    resolved_inputs["loads"] = [
        {k: load[k] for k in ("name", "count", "fixed", "peak_current_a", "duty_cycle")} for load in loads
    ]
    return envelope(
        SPEC.name,
        SPEC.version,
        resolved_inputs,
        resolved.parts,
        results,
        outcome,
        0,
        resolved.warnings,
        resolved.cautions,
    )
