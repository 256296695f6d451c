"""Synthetic generic parts for the candidate-search benchmark: varied, valid parameters drawn from a seeded numpy
Generator, as ``PartView`` objects for the in-process search and as rows of a database for the server.

Their ids (``bench-led-0001``, ``bench-supply-01``, ``bench-npn-01``) sort in the order they are made, which is
the order the search evaluates them in. The values are plausible for their class, not those of any product.
"""

from __future__ import annotations

import datetime
from typing import Any

import numpy as np

from calcsvc.data.database import Database, upgrade
from calcsvc.data.kinds import validate_parameters
from calcsvc.data.store import PartStore, PartView

AUTHOR = "bench"
STAMP = datetime.datetime(2026, 1, 1, tzinfo=datetime.UTC)  # fixed, so every run builds identical parts


def _part(part_id: str, kind: str, description: str, parameters: dict[str, Any]) -> PartView:
    errors = validate_parameters(kind, parameters)
    if errors:
        raise ValueError(f"synthetic part {part_id} is not valid: {errors}")
    return PartView(part_id, kind, description, parameters, "approved", 1, STAMP, AUTHOR, AUTHOR)


def leds(n: int, rng: np.random.Generator) -> list[PartView]:
    """Indicator (20 mA class) and power (350 mA class) LEDs, forward voltages 1.8–3.3 V typical."""
    typ = np.round(rng.uniform(1.8, 3.3, n), 3)
    low = np.round(typ - rng.uniform(0.1, 0.4, n), 3)
    high = np.round(typ + rng.uniform(0.15, 0.5, n), 3)
    power = rng.random(n) < 0.3
    test = np.where(power, 0.35, 0.02)
    rating = np.round(np.where(power, rng.uniform(0.35, 0.7, n), rng.uniform(0.025, 0.05, n)), 3)
    color = np.where(typ < 2.3, "red", np.where(typ < 2.8, "amber", "green"))
    rows = zip(color.tolist(), typ.tolist(), low.tolist(), high.tolist(), test.tolist(), rating.tolist(), strict=True)
    return [
        _part(
            f"bench-led-{k + 1:04d}",
            "led",
            f"Synthetic {c} LED for benchmarks",
            {"color": c, "vf_typ_v": t, "vf_min_v": lo, "vf_max_v": hi, "if_test_a": it, "if_max_a": im},
        )
        for k, (c, t, lo, hi, it, im) in enumerate(rows)
    ]


def supplies(n: int, rng: np.random.Generator) -> list[PartView]:
    """Adapters and battery packs from 5 to 24 V, ±1–15 %; about a third carry a capacity."""
    volts = np.round(rng.uniform(5.0, 24.0, n), 1)
    tolerance = np.round(rng.uniform(0.01, 0.15, n), 3)
    current = np.round(rng.uniform(0.5, 5.0, n), 2)
    capacity = np.where(rng.random(n) < 0.3, np.round(rng.uniform(1.0, 10.0, n), 1), np.nan)
    parts = []
    for k, (v, t, i, c) in enumerate(
        zip(volts.tolist(), tolerance.tolist(), current.tolist(), capacity.tolist(), strict=True)
    ):
        parameters = {"supply_v": v, "supply_tolerance": t, "current_max_a": i}
        if c == c:  # not NaN: a battery
            parameters["capacity_ah"] = c
        parts.append(_part(f"bench-supply-{k + 1:02d}", "supply", "Synthetic supply for benchmarks", parameters))
    return parts


def npn_transistors(n: int, rng: np.random.Generator) -> list[PartView]:
    """Small-signal to power NPNs: hFE 20–300, Vce_sat 0.05–1 V, 0.1–3 A, 0.3–2.5 W."""
    hfe_min = np.round(rng.uniform(20.0, 300.0, n))
    columns = {
        "hfe_min": hfe_min,
        "hfe_typ": np.round(hfe_min * rng.uniform(1.5, 3.0, n)),
        "vbe_sat_v": np.round(rng.uniform(0.7, 1.6, n), 2),
        "vce_sat_v": np.round(rng.uniform(0.05, 1.0, n), 3),
        "ic_max_a": np.round(rng.uniform(0.1, 3.0, n), 2),
        "vceo_max_v": np.round(rng.uniform(20.0, 100.0, n)),
        "power_max_w": np.round(rng.uniform(0.3, 2.5, n), 2),
    }
    values = [dict(zip(columns, row, strict=True)) for row in zip(*(c.tolist() for c in columns.values()), strict=True)]
    return [
        _part(f"bench-npn-{k + 1:02d}", "bjt", "Synthetic NPN for benchmarks", {"polarity": "npn", **row})
        for k, row in enumerate(values)
    ]


def store(url: str, parts: list[PartView]) -> None:
    """Create or upgrade the schema of ``url`` and add ``parts``, approved, as a seed adds its parts."""
    upgrade(url)
    database = Database(url)
    try:
        with database.transaction() as session:
            parts_table = PartStore(session)
            for part in parts:
                parts_table.create(part.part_id, part.kind, part.description, part.parameters, AUTHOR, approve=True)
    finally:
        database.dispose()
