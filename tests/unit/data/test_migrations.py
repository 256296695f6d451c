"""A lab server upgrades in place: from the first migration to head, every part and revision is kept."""

from __future__ import annotations

import json
import os
from collections.abc import Iterator
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pytest
from alembic import command
from alembic.script import ScriptDirectory
from sqlalchemy import create_engine, text
from sqlalchemy import inspect as sa_inspect

from calcsvc.data.database import Database, alembic_config
from calcsvc.data.design_store import DesignContent, DesignStore
from calcsvc.data.store import PartStore

PARTS = {
    "led-amber-3mm": (
        "led",
        [{"color": "amber", "vf_typ_v": 2.1}, {"color": "amber", "vf_typ_v": 2.05, "tj_max_c": 110.0}],
    ),
    "npn-spare": ("bjt", [{"polarity": "npn", "hfe_min": 100}]),
    "supply-bench-12v": ("supply", [{"supply_v": 12.0, "supply_tolerance": 0.05}, {"supply_v": 12.0}]),
    "driver-pin-3v3": ("driver", [{"voh_v": 2.9, "vol_v": 0.4}]),
}
STATUS = {
    "led-amber-3mm": "draft",
    "npn-spare": "retired",  # retired by an old server: no history of it then
    "supply-bench-12v": "draft",
    "driver-pin-3v3": "draft",
}
# What 0004 writes (the conservative thermal defaults its docstring states); a value already present stays.
LED_HEAT = {"tj_max_c": 100.0, "rth_jb_k_per_w": 300.0, "rth_ba_k_per_w": 200.0, "vf_tempco_v_per_k": -0.004}
# What 0003 and 0004 write into every stored revision that lacks it (the conservative defaults they state).
ADDED = {
    ("led-amber-3mm", 1): LED_HEAT,
    ("led-amber-3mm", 2): {k: v for k, v in LED_HEAT.items() if k != "tj_max_c"},  # its own 110 °C is kept
    ("npn-spare", 1): {"vce_sat_forced_beta": 10, "base_junctions": 1, "tj_max_c": 125.0},
    ("supply-bench-12v", 1): {"supply_min_v": 11.4, "supply_max_v": 12.6},  # 12 V ± 5 %
    ("supply-bench-12v", 2): {"supply_min_v": 12.0, "supply_max_v": 12.0},  # no tolerance: the band is the point
    ("driver-pin-3v3", 1): {"vdd_v": 3.3},  # the smallest common logic supply at or above a 2.9 V high level
}
APPROVED_BY = {("led-amber-3mm", 1): "rita", ("npn-spare", 1): "rita"}


@pytest.fixture
def empty_url(database_url: str, tmp_path: Path) -> Iterator[str]:
    """A database of the same kind as the suite's, holding nothing yet."""
    if database_url.startswith("sqlite"):
        yield f"sqlite:///{tmp_path / 'upgrade.sqlite'}"
        return
    name = f"calcsvc_upgrade_{os.getpid()}"
    admin = create_engine(database_url, isolation_level="AUTOCOMMIT")
    with admin.connect() as connection:
        connection.execute(text(f"DROP DATABASE IF EXISTS {name}"))
        connection.execute(text(f"CREATE DATABASE {name}"))
    try:
        yield database_url.rsplit("/", 1)[0] + f"/{name}"
    finally:
        with admin.connect() as connection:
            connection.execute(text(f"DROP DATABASE IF EXISTS {name} WITH (FORCE)"))
        admin.dispose()


def test_upgrade_from_the_first_migration_keeps_every_part(empty_url: str) -> None:
    config = alembic_config(empty_url)
    first = ScriptDirectory.from_config(config).get_base()
    command.upgrade(config, first)
    now = datetime(2026, 1, 1, tzinfo=UTC)
    engine = create_engine(empty_url)
    # Written with the first migration's columns, as an old server would have stored them.
    with engine.begin() as connection:
        for part_id, (kind, revisions) in PARTS.items():
            connection.execute(
                text(
                    "INSERT INTO parts (part_id, kind, description, parameters, status, revision, updated_at,"
                    " updated_by, approved_by) VALUES (:p, :k, '', :params, :s, :r, :t, 'edna', NULL)"
                ),
                {
                    "p": part_id,
                    "k": kind,
                    "params": json.dumps(revisions[-1]),
                    "s": STATUS[part_id],
                    "r": len(revisions),
                    "t": now,
                },
            )
            for number, parameters in enumerate(revisions, start=1):
                connection.execute(
                    text(
                        "INSERT INTO part_revisions (part_id, revision, kind, description, parameters, author,"
                        " created_at, approved_by, approved_at) VALUES (:p, :n, :k, '', :params, 'edna', :t, :a, :t)"
                    ),
                    {
                        "p": part_id,
                        "n": number,
                        "k": kind,
                        "params": json.dumps(parameters),
                        "t": now,
                        "a": APPROVED_BY.get((part_id, number)),
                    },
                )
    engine.dispose()

    command.upgrade(config, "head")

    database = Database(empty_url)
    with database.transaction() as session:
        store = PartStore(session)
        for part_id, (kind, revisions) in PARTS.items():
            upgraded = [{**p, **ADDED.get((part_id, n), {})} for n, p in enumerate(revisions, start=1)]
            part = store.get(part_id)
            assert (part.kind, part.revision, part.parameters) == (kind, len(revisions), upgraded[-1])
            history = store.revisions(part_id)
            assert [r.parameters for r in history] == upgraded
            assert {r.author for r in history} == {"edna"}
            assert part.status == STATUS[part_id]
        # The history carries over as events: each revision's writing and approval, and the retirement.
        events = {
            part_id: [[(e.action, e.actor) for e in r.events] for r in store.revisions(part_id)] for part_id in PARTS
        }
        assert events == {
            "led-amber-3mm": [[("created", "edna"), ("approved", "rita")], [("edited", "edna")]],
            "npn-spare": [[("created", "edna"), ("approved", "rita"), ("retired", "edna")]],
            "supply-bench-12v": [[("created", "edna")], [("edited", "edna")]],
            "driver-pin-3v3": [[("created", "edna")]],
        }
        # A retired part of the old server is restored as a new draft revision, as any other.
        store.restore("npn-spare", 1, "edna", "back in stock")
        assert (store.get("npn-spare").status, store.get("npn-spare").revision) == ("draft", 2)
    database.dispose()

    command.downgrade(config, first)  # the new table and the defaults go; every part and revision stays
    database = Database(empty_url)
    with database.transaction() as session:
        assert session.scalar(text("SELECT count(*) FROM part_revisions")) == 7
        stored = session.execute(text("SELECT part_id, revision, parameters FROM part_revisions")).all()
        for part_id, number, parameters in stored:
            kept = json.loads(parameters) if isinstance(parameters, str) else parameters
            if part_id != "npn-spare":  # its revision 2, the restore, was written after the upgrade
                assert kept == PARTS[part_id][1][number - 1]
    database.dispose()


def test_saved_designs_tables_come_and_go_keeping_every_part(empty_url: str) -> None:
    config = alembic_config(empty_url)
    command.upgrade(config, "0004")
    database = Database(empty_url)
    with database.transaction() as session:
        store = PartStore(session)
        store.create("led-amber-3mm", "led", "", AMBER, "edna", approve=True)
        store.update("led-amber-3mm", 1, "", {**AMBER, "vf_typ_v": 2.05}, "edna")
    database.dispose()
    before = _dump(empty_url)

    command.upgrade(config, "head")
    assert _dump(empty_url) == before
    database = Database(empty_url)
    content = DesignContent("channel", "edna", "", {"led": "led-amber-3mm"}, {"led": "led-amber-3mm"},
                            [{"role": "led", "part_id": "led-amber-3mm", "revision": 2, "status": "draft"}],
                            {"verdict": "pass"})  # fmt: skip
    with database.transaction() as session:
        DesignStore(session).create("bench-lamp", content, "edna")
        assert DesignStore(session).using_part("led-amber-3mm") == ["bench-lamp"]
    database.dispose()
    assert _dump(empty_url) == before

    command.downgrade(config, "0004")  # the design tables go; every part, revision and event stays
    assert _dump(empty_url) == before
    engine = create_engine(empty_url)
    with engine.connect() as connection:
        tables = set(sa_inspect(connection).get_table_names())
    engine.dispose()
    assert not tables & {"designs", "design_revisions", "design_parts"}


AMBER = {"color": "amber", "vf_typ_v": 2.1, "vf_min_v": 1.9, "vf_max_v": 2.5, "if_test_a": 0.02, "if_max_a": 0.03}


def _dump(url: str) -> list[list[Any]]:
    """Every row of the parts tables, in a stable order, as plain values."""
    engine = create_engine(url)
    with engine.connect() as connection:
        found = [
            [tuple(str(v) for v in row) for row in connection.execute(text(f"SELECT * FROM {table} ORDER BY 1, 2"))]
            for table in ("parts", "part_revisions", "part_events")
        ]
    engine.dispose()
    return found


# What 0006 writes into stored op-amps (the conservative defaults its docstring states): a part stored with only
# the parameters of its time gets every one; a value already there is kept, and defaults that copy one of the
# part's own values (output per rail, offset current, second pole) take the part's.
OLD_OPAMP = {
    "gbw_hz": 1e6,
    "slew_rate_v_per_s": 5e5,
    "open_loop_gain": 1e5,
    "supply_min_v": 5.0,
    "supply_max_v": 30.0,
    "output_headroom_v": 1.5,
}
OPAMP_0006 = {
    "input_low_headroom_v": 2.0,
    "input_high_headroom_v": 2.0,
    "output_low_headroom_v": 1.5,
    "output_high_headroom_v": 1.5,
    "input_bias_current_a": 1e-6,
    "input_offset_current_a": 1e-6,
    "voltage_noise_v_per_rthz": 100e-9,
    "current_noise_a_per_rthz": 2e-12,
    "second_pole_hz": 1e6,
    "output_resistance_ohm": 1000.0,
}


def test_0006_writes_opamp_stage_defaults_and_takes_back_only_its_own(empty_url: str) -> None:
    config = alembic_config(empty_url)
    command.upgrade(config, "0003")
    stated = {**OLD_OPAMP, "input_bias_current_a": 2e-9, "output_resistance_ohm": 50.0}  # from a datasheet
    revisions = {("opamp-old", 1): OLD_OPAMP, ("opamp-old", 2): stated}
    now = datetime(2026, 1, 1, tzinfo=UTC)
    engine = create_engine(empty_url)
    with engine.begin() as connection:
        connection.execute(
            text(
                "INSERT INTO parts (part_id, kind, description, parameters, status, revision, updated_at,"
                " updated_by, approved_by) VALUES ('opamp-old', 'opamp', '', :params, 'draft', 2, :t, 'edna', NULL)"
            ),
            {"params": json.dumps(stated), "t": now},
        )
        for (part_id, number), parameters in revisions.items():
            connection.execute(
                text(
                    "INSERT INTO part_revisions (part_id, revision, kind, description, parameters, author,"
                    " created_at) VALUES (:p, :n, 'opamp', '', :params, 'edna', :t)"
                ),
                {"p": part_id, "n": number, "params": json.dumps(parameters), "t": now},
            )
    engine.dispose()

    command.upgrade(config, "0006")
    database = Database(empty_url)
    with database.transaction() as session:
        store = PartStore(session)
        history = [r.parameters for r in store.revisions("opamp-old")]
        kept = {**OPAMP_0006, "input_offset_current_a": 2e-9, **stated}  # the offset current copies the stated Ib
        assert history == [{**OLD_OPAMP, **OPAMP_0006}, kept]
        assert store.get("opamp-old").parameters == kept
        assert store.get("opamp-old").revision == 2  # no revision added
    database.dispose()

    command.downgrade(config, "0003")
    engine = create_engine(empty_url)
    with engine.connect() as connection:
        stored = connection.execute(text("SELECT revision, parameters FROM part_revisions ORDER BY revision")).all()
        current = connection.execute(text("SELECT parameters FROM parts")).scalar_one()
    engine.dispose()
    load = lambda value: json.loads(value) if isinstance(value, str) else value  # noqa: E731
    assert [load(p) for _, p in stored] == [OLD_OPAMP, stated]
    assert load(current) == stated
