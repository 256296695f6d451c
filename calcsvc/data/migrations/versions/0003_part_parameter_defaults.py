"""Parameters the engineering checks added, written into every stored part and revision with a stated default.

Each default is the conservative choice, so no stored part is judged more leniently than its datasheet would
allow; edit a part to its datasheet's values (a new, reviewed revision) where they differ:

- bjt ``vce_sat_forced_beta`` = 10: the Ic/Ib at which small-signal parts state Vce(sat) (common practice).
  A Darlington states it at a much higher ratio (e.g. 250): until edited it is driven harder than it needs.
- bjt ``base_junctions`` = 1: the lower turn-on threshold of the off-state check (a Darlington has 2).
- driver ``vdd_v``: the smallest common logic supply (1.8, 2.5, 3.3 or 5.0 V) at or above the pin's ``voh_v``
  (``voh_v`` itself above 5 V): the pin's high level at light load, for its worst-case current.
- supply ``supply_min_v``/``supply_max_v`` = ``supply_v`` × (1 ∓ ``supply_tolerance``), the band the
  tolerance described (a tolerance absent counts as 0). A battery stored as a symmetric tolerance keeps that
  band: edit it to end of discharge and fresh.

Nothing is removed and no revision is added: the values are written into each revision's stored parameters, so
a pinned old revision computes as it did. A value already present is never overwritten. Downgrade removes the
keys again only where they still hold the default written here.

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-03
"""

import json
from collections.abc import Callable
from typing import Any

import sqlalchemy as sa
from alembic import op

revision = "0003"
down_revision = "0002"
branch_labels = None
depends_on = None

LOGIC_SUPPLIES_V = (1.8, 2.5, 3.3, 5.0)


def _vdd(p: dict[str, Any]) -> float | None:
    voh = p.get("voh_v")
    if not isinstance(voh, int | float):
        return None
    return next((v for v in LOGIC_SUPPLIES_V if v >= voh), float(voh))


def _band(side: float) -> Callable[[dict[str, Any]], float | None]:
    def end(p: dict[str, Any]) -> float | None:
        supply = p.get("supply_v")
        if not isinstance(supply, int | float):
            return None
        tolerance = p.get("supply_tolerance")
        return round(supply * (1 + side * (tolerance if isinstance(tolerance, int | float) else 0.0)), 12)

    return end


DEFAULTS: dict[str, dict[str, Callable[[dict[str, Any]], Any]]] = {
    "bjt": {"vce_sat_forced_beta": lambda p: 10, "base_junctions": lambda p: 1},
    "driver": {"vdd_v": _vdd},
    "supply": {"supply_min_v": _band(-1.0), "supply_max_v": _band(1.0)},
}


def _load(value: Any) -> dict[str, Any]:
    return dict(json.loads(value) if isinstance(value, str) else value)


def _rewrite(change: Callable[[str, dict[str, Any]], dict[str, Any]]) -> None:
    connection = op.get_bind()
    for table, keys in (("parts", ("part_id",)), ("part_revisions", ("part_id", "revision"))):
        rows = connection.execute(sa.text(f"SELECT {', '.join(keys)}, kind, parameters FROM {table}")).all()
        for row in rows:
            before = _load(row.parameters)
            after = change(row.kind, before)
            if after != before:
                where = " AND ".join(f"{k} = :{k}" for k in keys)
                values = {k: getattr(row, k) for k in keys}
                connection.execute(
                    sa.text(f"UPDATE {table} SET parameters = :parameters WHERE {where}"),
                    {**values, "parameters": json.dumps(after)},
                )


def _with_defaults(kind: str, parameters: dict[str, Any]) -> dict[str, Any]:
    added = dict(parameters)
    for name, default in DEFAULTS.get(kind, {}).items():
        if name not in added and (value := default(parameters)) is not None:
            added[name] = value
    return added


def _without_defaults(kind: str, parameters: dict[str, Any]) -> dict[str, Any]:
    kept = dict(parameters)
    for name, default in DEFAULTS.get(kind, {}).items():
        rest = {k: v for k, v in kept.items() if k != name}
        if name in kept and kept[name] == default(rest):
            del kept[name]
    return kept


def upgrade() -> None:
    _rewrite(_with_defaults)


def downgrade() -> None:
    _rewrite(_without_defaults)
