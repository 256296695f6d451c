"""The impact of a part edit on 1,000 saved designs: ``part_impact`` (one batched pass) against re-reviewing the
designs one by one, as a client re-running each saved request twice (today's parts, then the draft) would.

The designs are variations of the greenhouse demo channel drawn from a seeded numpy Generator, every one using
the red LED (the worst case: the edit touches all of them), stored in a temporary SQLite database with the seed
parts; the edit is a higher forward-voltage reel of that LED, left a draft.
"""

from __future__ import annotations

import tempfile
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from calcsvc.config import REPO_SEED_DIR
from calcsvc.data.database import Database, upgrade
from calcsvc.data.design_store import DesignContent, DesignStore
from calcsvc.data.seed import load_seed
from calcsvc.data.store import PartStore
from calcsvc.service.demo import demo_channel, demo_si
from calcsvc.service.design_batch import CHANNEL, Request, review_many
from calcsvc.service.designs import today_requests
from calcsvc.service.impact import part_impact
from calcsvc.service.review import run_review

PART = "led-red-5mm"
HIGHER_REEL = {"vf_typ_v": 2.9, "vf_min_v": 2.6, "vf_max_v": 3.4}  # invented, class-typical values
SUPPLIES = ("supply-adapter-12v-2a", "supply-battery-9v-6aa")
TRANSISTORS = ("npn-small-signal", "npn-medium-power")


@dataclass(frozen=True)
class ImpactFigures:
    designs: int
    batched_s: float
    changed: int
    pass_to_fail: int
    one_by_one_s: float  # extrapolated from ``sample`` designs, each reviewed twice as its endpoint does
    without_monte_carlo_s: float  # the same, with the Monte Carlo left out (samples 0)
    sample: int
    samples_per_review: int


def variations(n: int, seed: int) -> list[dict[str, Any]]:
    """``n`` greenhouse channels in SI, each with the red LED and its own arrangement, supply and transistor."""
    rng = np.random.default_rng(seed)
    base = demo_si()
    found = []
    for k in range(n):
        supply = SUPPLIES[int(rng.integers(len(SUPPLIES)))]
        found.append(
            {
                **base,
                "supply": supply,
                "transistor": TRANSISTORS[int(rng.integers(len(TRANSISTORS)))],
                "leds_in_series": int(rng.integers(1, 4 if supply == SUPPLIES[0] else 3)),
                "strings": int(rng.integers(1, 4)),
                "current_a": round(float(rng.uniform(0.008, 0.022)), 4),
                "channels": int(rng.integers(1, 9)),
                "duty_cycle": round(float(rng.uniform(0.1, 0.9)), 3),
                "gain": int(rng.integers(5, 25)),
                "seed": k,
            }
        )
    return found


def _store(database: Database, bodies: list[dict[str, Any]]) -> None:
    """Save every body as a design, with the summary the batched pass gives at today's parts (saving each through
    its full review would take minutes and measures nothing here)."""
    with database.transaction() as session:
        summaries = review_many(session, [Request(CHANNEL, body) for body in bodies])
        store = DesignStore(session)
        for k, (body, summary) in enumerate(zip(bodies, summaries, strict=True)):
            content = DesignContent(CHANNEL, "bench", "", demo_channel(), body, summary["parts"], summary)
            store.create(f"bench-design-{k:04d}", content, "bench")


def measure(n: int, repeats: int, sample: int) -> ImpactFigures:
    with tempfile.TemporaryDirectory() as folder:
        url = f"sqlite:///{Path(folder) / 'impact.sqlite'}"
        upgrade(url)
        database = Database(url)
        with database.transaction() as session:
            load_seed(session, REPO_SEED_DIR)
        _store(database, variations(n, seed=7))
        with database.transaction() as session:
            parts = PartStore(session)
            led = parts.get(PART)
            parts.update(PART, led.revision, led.description, {**led.parameters, **HIGHER_REEL}, "bench")
            draft = parts.get(PART).revision
        times = []
        for _ in range(repeats):
            began = time.perf_counter()
            impact = part_impact(database, PART)
            times.append(time.perf_counter() - began)
        with database.transaction() as session:
            views, _ = DesignStore(session).list("active", limit=sample)
            requests = today_requests(session, views) + today_requests(session, views, {PART: draft})
        bodies = [r.body for r in requests if isinstance(r, Request)]
        one_by_one = _one_by_one(database, bodies)
        without = _one_by_one(database, [{**body, "samples": 0} for body in bodies])
        database.dispose()
    summary = impact["summary"]
    scale = n / sample
    return ImpactFigures(
        n,
        min(times),
        summary["changed"],
        summary["pass_to_fail"],
        one_by_one * scale,
        without * scale,
        sample,
        int(demo_si()["samples"]),
    )


def _one_by_one(database: Database, bodies: list[dict[str, Any]]) -> float:
    began = time.perf_counter()
    for body in bodies:
        try:
            run_review(database, body)
        except Exception:  # a design the core refuses is answered (422) all the same: its time counts
            continue
    return time.perf_counter() - began
