"""Op-amp parameters the stage's windows, DC error, noise and stability read, written into every stored op-amp
and revision with a stated default.

Each default is the conservative choice for the general-purpose classes, so no stored part is judged more
leniently than its datasheet would allow; edit a part to its datasheet's values (a new, reviewed revision)
where they differ:

- ``input_low_headroom_v`` = ``input_high_headroom_v`` = 2 V: classic general-purpose inputs stop about
  1.5–2 V short of each rail (from memory); a rail-to-rail input is judged stricter than it is until edited.
- ``output_low_headroom_v`` = ``output_high_headroom_v`` = the part's ``output_headroom_v``: the symmetric
  value it already states, so each rail is judged as the output swing was before.
- ``input_bias_current_a`` = 1 µA, above the bipolar general-purpose class (from memory); FET inputs are
  judged far stricter until edited. ``input_offset_current_a`` = the part's ``input_bias_current_a`` (the
  offset current, a difference of the two inputs' currents, rarely exceeds their mean).
- ``voltage_noise_v_per_rthz`` = 100 nV/√Hz and ``current_noise_a_per_rthz`` = 2 pA/√Hz: above the
  general-purpose and micropower classes (from memory).
- ``second_pole_hz`` = the part's ``gbw_hz``: the lowest second pole of a part sold as unity-gain stable
  (52° of phase margin as a follower, common practice). A decompensated part (stable only above some gain) has
  it lower: edit it, or it is judged too leniently.
- ``output_resistance_ohm`` = 1 kΩ: above general-purpose parts (tens to a few hundred ohms, from memory);
  micropower parts can exceed it: edit them.

Nothing is removed and no revision is added: the values are written into each revision's stored parameters, so
a pinned old revision computes as it did. A value already present is never overwritten. Downgrade removes the
keys again only where they still hold the default written here.

Revision ID: 0006
Revises: 0005
Create Date: 2026-12-03
"""

import json
from collections.abc import Callable
from typing import Any

import sqlalchemy as sa
from alembic import op

revision = "0006"
down_revision = "0005"
branch_labels = None
depends_on = None

INPUT_HEADROOM_V = 2.0
BIAS_CURRENT_A = 1e-6
VOLTAGE_NOISE_V_PER_RTHZ = 100e-9
CURRENT_NOISE_A_PER_RTHZ = 2e-12
OUTPUT_RESISTANCE_OHM = 1000.0


def _constant(value: float) -> Callable[[dict[str, Any]], float]:
    return lambda p: value


def _copy(name: str, fallback: float | None = None) -> Callable[[dict[str, Any]], float | None]:
    def value(p: dict[str, Any]) -> float | None:
        found = p.get(name)
        return found if isinstance(found, int | float) else fallback

    return value


# In writing order: the offset current copies the bias current, written (where missing) just before it.
DEFAULTS: dict[str, Callable[[dict[str, Any]], Any]] = {
    "input_low_headroom_v": _constant(INPUT_HEADROOM_V),
    "input_high_headroom_v": _constant(INPUT_HEADROOM_V),
    "output_low_headroom_v": _copy("output_headroom_v"),
    "output_high_headroom_v": _copy("output_headroom_v"),
    "input_bias_current_a": _constant(BIAS_CURRENT_A),
    "input_offset_current_a": _copy("input_bias_current_a", BIAS_CURRENT_A),
    "voltage_noise_v_per_rthz": _constant(VOLTAGE_NOISE_V_PER_RTHZ),
    "current_noise_a_per_rthz": _constant(CURRENT_NOISE_A_PER_RTHZ),
    "second_pole_hz": _copy("gbw_hz"),
    "output_resistance_ohm": _constant(OUTPUT_RESISTANCE_OHM),
}


def _load(value: Any) -> dict[str, Any]:
    return dict(json.loads(value) if isinstance(value, str) else value)


def _rewrite(change: Callable[[dict[str, Any]], dict[str, Any]]) -> None:
    connection = op.get_bind()
    for table, keys in (("parts", ("part_id",)), ("part_revisions", ("part_id", "revision"))):
        query = f"SELECT {', '.join(keys)}, parameters FROM {table} WHERE kind = 'opamp'"
        for row in connection.execute(sa.text(query)).all():
            before = _load(row.parameters)
            after = change(before)
            if after != before:
                where = " AND ".join(f"{k} = :{k}" for k in keys)
                values = {k: getattr(row, k) for k in keys}
                connection.execute(
                    sa.text(f"UPDATE {table} SET parameters = :parameters WHERE {where}"),
                    {**values, "parameters": json.dumps(after)},
                )


def _with_defaults(parameters: dict[str, Any]) -> dict[str, Any]:
    added = dict(parameters)
    for name, default in DEFAULTS.items():
        if name not in added and (value := default(added)) is not None:
            added[name] = value
    return added


def _without_defaults(parameters: dict[str, Any]) -> dict[str, Any]:
    kept = dict(parameters)
    for name, default in reversed(DEFAULTS.items()):
        if name in kept and kept[name] == default({k: v for k, v in kept.items() if k != name}):
            del kept[name]
    return kept


def upgrade() -> None:
    _rewrite(_with_defaults)


def downgrade() -> None:
    _rewrite(_without_defaults)
