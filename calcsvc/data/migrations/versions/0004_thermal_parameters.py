"""Thermal parameters, written into every stored part and revision with a stated conservative default.

Each default is the cautious end of its class, so no stored part is judged more leniently than its datasheet
would allow; edit a part to its datasheet's values (a new, reviewed revision) where they differ:

- bjt ``tj_max_c`` = 125 °C: silicon parts in plastic are commonly rated 150 °C; 125 °C is the lower end
  (common practice). ``rth_ja_k_per_w`` is not written: it then follows from the part's own power rating at
  25 °C, (tj_max_c − 25)/power_max_w, which with 125 °C is the stricter figure above 25 °C ambient.
- led ``tj_max_c`` = 100 °C (the lower end for indicator LEDs, from memory), ``rth_jb_k_per_w`` = 300 and
  ``rth_ba_k_per_w`` = 200 K/W (above a 5 mm LED's leads and an unsinked board, from memory: a high-power part
  stored without them is judged as if it had no heat sink), ``vf_tempco_v_per_k`` = −0.004 V/K (the steep end
  of the usual −2 to −4 mV/K, from memory: more current when hot). ``if_derating_knee_c`` is not written:
  without a curve, the junction-temperature check still bounds the LED.

Nothing is removed and no revision is added: the values are written into each revision's stored parameters.
A value already present is never overwritten. Downgrade removes the keys again only where they still hold the
default written here.

Revision ID: 0004
Revises: 0003
Create Date: 2026-12-03
"""

import json
from collections.abc import Callable
from typing import Any

import sqlalchemy as sa
from alembic import op

revision = "0004"
down_revision = "0003"
branch_labels = None
depends_on = None

DEFAULTS: dict[str, dict[str, Any]] = {
    "bjt": {"tj_max_c": 125.0},
    "led": {"tj_max_c": 100.0, "rth_jb_k_per_w": 300.0, "rth_ba_k_per_w": 200.0, "vf_tempco_v_per_k": -0.004},
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
        added.setdefault(name, default)
    return added


def _without_defaults(kind: str, parameters: dict[str, Any]) -> dict[str, Any]:
    kept = dict(parameters)
    for name, default in DEFAULTS.get(kind, {}).items():
        if name in kept and kept[name] == default:
            del kept[name]
    return kept


def upgrade() -> None:
    _rewrite(_with_defaults)


def downgrade() -> None:
    _rewrite(_without_defaults)
