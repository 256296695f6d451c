"""``make bench``: calcsvc's speed figures, measured side by side in one run and printed as one table with ratios.

1. Endpoint overhead: requests/s and server CPU per request of ``POST /v1/calc/led-string`` against a bare JSON
   route of the same app (benchmarks/echo_app.py) under the same gunicorn settings, driven by wrk when installed
   (benchmarks/wrk_load.py) and by Python clients otherwise.
2. Batch: a 100,000-row LED-string batch over HTTP (rows in and out, columns in and out, CSV in and out, end
   to end) against its targets, the core in-process and single-row requests, with each worker's peak memory.
3. Candidate search: 1,000 synthetic LEDs in one role of an LED string, and 100,000 combinations of synthetic
   supplies, NPN transistors and LEDs for a whole channel, in-process (calcsvc.service.search) against loops of
   the single-row path, and end to end over HTTP with the same parts in the server's database.
4. Core: closed-loop sweep and LED string against plain Python loops of the same formulas and against a minimal
   numpy expression of the LED string's formulas; the fixed cost of one call; channel Monte Carlo; the cost of
   an ambient range against a fixed 25 °C.
5. Memory: peak RSS (VmHWM) of the gunicorn workers after the batches.
6. Impact: what a part edit does to 1,000 saved designs (one batched pass) against re-reviewing them one by one
   (benchmarks/design_impact.py).

Speed targets live here, never in unit tests. ``--write-results`` also writes the table to benchmarks/RESULTS.md.
"""

from __future__ import annotations

import argparse
import bisect
import csv
import datetime
import io
import math
import os
import platform
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass
from importlib.metadata import version
from pathlib import Path
from typing import Any

import design_impact
import numpy as np
import orjson
import synthetic_parts
from server import LOOPBACK, REPO, Server, gunicorn, peak_rss_bytes, reset_peak_rss
from traffic import Client, drive
from wrk_load import WRK_INSTALL, Window, measured, run_wrk, wrk_path

from calcsvc.core import closed_loop, eseries, led_string, monte_carlo, thermal_inputs, worst_case
from calcsvc.core.channel import ChannelInputs
from calcsvc.core.channel_front import OPAMP_STAGE_FIELDS
from calcsvc.core.channel_mosfet import MOSFET_ONLY
from calcsvc.core.channel_spec import CHANNEL_INPUTS
from calcsvc.core.led_string import SPEC as LED_STRING
from calcsvc.core.outcome import DomainError, take
from calcsvc.core.spec import InputSet, Role
from calcsvc.data.store import PartView
from calcsvc.service.calculate import columns_of, complete
from calcsvc.service.demo import demo_si
from calcsvc.service.review import channel_inputs
from calcsvc.service.search.channel import ChannelSearch, search_channel
from calcsvc.service.search.role import RoleSearch, search_role

RESULTS = REPO / "benchmarks" / "RESULTS.md"
ANALYSIS = "## Targets and their causes"
JSON = {"Content-Type": "application/json"}
ENDPOINT_TARGET = 0.7  # calculation endpoint at least 0.7 of the bare route's requests/s
BATCH_TARGETS = {"rows": 80_000, "columns": 400_000, "csv": 100_000}  # rows/s end to end, 100,000 rows
CORE_OVER_MINIMAL_TARGET = 1.5  # the core per row at 1,000,000 rows against a minimal numpy expression
FIXED_COST_TARGET_S = 50e-6  # one call of the core on one row
RSS_TARGET = 300 * 2**20  # a worker's peak resident memory during any 100,000-row batch
SINGLE_REQUESTS = 1_000
CORE_ROWS = 1_000_000
LOOP_ROWS = 10_000  # the plain Python loop runs on these and is extrapolated
SWEEP_POINTS = closed_loop.MAX_SWEEP_POINTS
MONTE_CARLO_SAMPLES = (1_000_000, 100_000)

# The greenhouse grow-light demo (calcsvc.service.demo): three red LEDs in each of two strings at 20 mA, from a
# 12 V adapter, switched by a small-signal NPN from a 3.3 V microcontroller pin; six such channels at 50 % duty.
DEMO = demo_si()
ARRANGEMENT = {name: DEMO[name] for name in ("leds_in_series", "strings", "current_a")}
LED = {"vf_typ_v": 2.1, "vf_min_v": 1.9, "vf_max_v": 2.5, "if_max_a": 0.03}  # the seed red LED's
SINGLE_BODY = {"supply_v": 12.0, "supply_tolerance": 0.05, **LED, **ARRANGEMENT, "switch_drop_v": 0.2}
PARTS_BODY = {role: DEMO[role] for role in ("supply", "led", "transistor")} | ARRANGEMENT

# Candidate search. The single LED string above with the LED open; the whole greenhouse channel from numbers
# (the 3.3 V pin and the 1 MHz preamp at gain 20) with supply, transistor and LED open.
SEARCH_TARGET_S = 1.0  # every search, in-process and over HTTP, answers in (well) under a second
SEARCH_LEDS = 1_000
CHANNEL_PARTS = {"supply": 50, "transistor": 40, "led": 50}  # 100,000 combinations; LEDs: the first 50 above
REVIEW_SAMPLE = 500  # single reviews timed and extrapolated per combination
SEARCH_REQUESTS = 5  # per search over HTTP, after the warm-up
IMPACT_DESIGNS = 1_000
IMPACT_SAMPLE = 50  # designs re-reviewed one by one, extrapolated
LED_SEARCH = {name: value for name, value in SINGLE_BODY.items() if name not in LED}
ROLES = {role.name for role in CHANNEL_INPUTS.roles}
CHANNEL_SEARCH = {
    **{name: value for name, value in DEMO.items() if name not in ROLES and name not in ("samples", "seed")},
    # The seed 3.3 V pin's and 1 MHz op-amp's values.
    "drive_high_v": 2.9, "drive_low_v": 0.4, "source_current_max_a": 0.008,
    "gbw_hz": 1e6, "open_loop_gain": 2e5, "slew_rate_v_per_s": 5e5, "output_headroom_v": 1.5,
}  # fmt: skip


# ---- formatting ------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Row:
    section: str
    measured: str
    figure: str
    baseline: str
    baseline_figure: str
    ratio: str
    target: str = ""
    verdict: str = ""


HEADER = ("", "measured", "figure", "compared with", "figure", "ratio", "target", "verdict")


def duration(seconds: float) -> str:
    for unit, scale in (("s", 1.0), ("ms", 1e-3), ("µs", 1e-6)):
        if seconds >= scale:
            return f"{seconds / scale:.3g} {unit}"
    return f"{seconds / 1e-9:.3g} ns"


def rate(per_second: float, unit: str) -> str:
    return f"{per_second:,.0f} {unit}/s"


def mib(size: int) -> str:
    return f"{size / 2**20:,.0f} MiB"


def verdict(ok: bool) -> str:
    return "met" if ok else "MISSED"


def markdown_table(rows: list[Row]) -> str:
    cells = [HEADER] + [
        (r.section, r.measured, r.figure, r.baseline, r.baseline_figure, r.ratio, r.target, r.verdict) for r in rows
    ]
    widths = [max(len(line[k]) for line in cells) for k in range(len(HEADER))]

    def line(values: tuple[str, ...]) -> str:
        return "| " + " | ".join(v.ljust(w) for v, w in zip(values, widths, strict=True)) + " |"

    return "\n".join(
        [line(cells[0]), "|" + "|".join("-" * (w + 2) for w in widths) + "|"] + [line(c) for c in cells[1:]]
    )


def machine() -> dict[str, str]:
    memory = next(line.split()[1] for line in Path("/proc/meminfo").read_text().splitlines() if "MemTotal" in line)
    load = ", ".join(f"{x:.2f}" for x in os.getloadavg())
    return {
        "date": datetime.datetime.now(datetime.UTC).strftime("%Y-%m-%d %H:%M UTC"),
        "command": " ".join([Path(sys.executable).name, *sys.argv]),
        "nproc": str(len(os.sched_getaffinity(0))),
        "memory": f"{int(memory) / 2**20:.1f} GiB",
        "python": platform.python_version(),
        "numpy": np.__version__,
        "gunicorn": version("gunicorn"),
        # The architecture and core count say what the figures need; a processor's brand and product line do not.
        "cpu": f"{platform.machine()}, {os.cpu_count()} cores",
        "load average (1, 5, 15 min) at start": load,
    }


def best_of(repeats: int, run: Callable[[], Any]) -> tuple[float, Any]:
    """Shortest wall time of ``repeats`` runs (the least disturbed by other work on the machine), and what the
    last run returned."""
    times, value = [], None
    for _ in range(repeats):
        began = time.perf_counter()
        value = run()
        times.append(time.perf_counter() - began)
    return min(times), value


def side_by_side(repeats: int, first: Callable[[], Any], second: Callable[[], Any]) -> tuple[float, float, Any]:
    """Shortest wall times of ``repeats`` runs of each of two, alternated with the order swapped every round (what
    ran just before leaves the allocator and caches in a state that favours or slows the next), and what the
    first returned."""
    times: tuple[list[float], list[float]] = ([], [])
    value = None
    for k in range(repeats * 2):
        order = (0, 1) if k % 2 == 0 else (1, 0)
        for which in order:
            began = time.perf_counter()
            returned = (first, second)[which]()
            times[which].append(time.perf_counter() - began)
            if which == 0:
                value = returned
    return min(times[0]), min(times[1]), value


# ---- the rows --------------------------------------------------------------------------------------------


def designs(n: int, seed: int) -> dict[str, np.ndarray]:
    """Input columns of ``n`` valid, varied LED-string designs: red LEDs three to a string or green two to a
    string, 7.5–24 V, 4–25 mA, one to three strings, three resistor series."""
    rng = np.random.default_rng(seed)
    green = rng.random(n) < 0.5
    return {
        "supply_v": np.round(rng.uniform(7.5, 24.0, n), 3),
        "supply_tolerance": np.full(n, 0.05),
        "vf_typ_v": np.where(green, 3.0, LED["vf_typ_v"]),
        "vf_min_v": np.where(green, 2.7, LED["vf_min_v"]),
        "vf_max_v": np.where(green, 3.5, LED["vf_max_v"]),
        "if_max_a": np.full(n, LED["if_max_a"]),
        "leds_in_series": np.where(green, 2.0, 3.0),
        "strings": rng.integers(1, 4, n).astype(np.float64),
        "current_a": np.round(rng.uniform(0.004, 0.025, n), 5),
        "switch_drop_v": np.full(n, 0.2),
        "e_series": rng.choice(["E12", "E24", "E96"], n),
    }


def led_inputs(columns: dict[str, np.ndarray], ambient_c: float = 25.0) -> led_string.LedStringInputs:
    """The designs as the core's inputs, with the LED's declared thermal defaults at ``ambient_c``."""
    n = columns["supply_v"].shape[0]
    heat = {spec.name: np.full(n, math.nan if spec.default is None else spec.default) for spec in thermal_inputs.LED}
    return led_string.LedStringInputs(
        **columns, resistor_tolerance=np.full(n, np.nan), ambient_c=np.full(n, ambient_c), **heat
    )


def records(columns: dict[str, np.ndarray]) -> list[dict[str, Any]]:
    """The designs as request rows; counts as JSON integers."""
    whole = {"leds_in_series", "strings"}
    names = list(columns)
    values = [columns[name].astype(int).tolist() if name in whole else columns[name].tolist() for name in names]
    return [dict(zip(names, row, strict=True)) for row in zip(*values, strict=True)]


def csv_text(rows: list[dict[str, Any]]) -> str:
    out = io.StringIO()
    writer = csv.DictWriter(out, fieldnames=list(rows[0]), lineterminator="\n")
    writer.writeheader()
    writer.writerows(rows)
    return out.getvalue()


# ---- plain Python loops of the core's formulas (the yardstick for the vectorized core) -------------------

_MANTISSAS = {
    name: [m * 10.0**decade for decade in (-1, 0, 1) for m in values] + [100.0]
    for name, values in eseries.SERIES.items()
}


def _standard_at_or_above(value: float, series: str) -> float:
    decade = math.floor(math.log10(value))
    scale = 10.0**decade
    table = _MANTISSAS[series]
    return table[bisect.bisect_left(table, value / scale * (1.0 - eseries.REL_TOL))] * scale


RESULT_NAMES = (
    "resistor_exact_ohm", "resistor_ohm", "current_a", "current_min_a", "current_max_a", "resistor_power_w",
    "resistor_power_max_w", "resistor_rating_w", "led_power_w", "total_current_a", "efficiency", "headroom_v",
)  # fmt: skip
"""The results ``led_string_loop`` gives first, in this order."""


LOOP_INPUTS = (
    "supply_v", "supply_tolerance", "vf_typ_v", "vf_min_v", "vf_max_v", "if_max_a", "leds_in_series", "strings",
    "current_a", "switch_drop_v", "e_series",
)  # fmt: skip


def loop_rows(inputs: led_string.LedStringInputs, count: int) -> list[tuple[Any, ...]]:
    """The first ``count`` rows as tuples of Python values in ``LOOP_INPUTS`` order."""
    return list(zip(*(getattr(inputs, name)[:count].tolist() for name in LOOP_INPUTS), strict=True))


def led_string_loop(rows: list[tuple[Any, ...]]) -> list[tuple[float, ...]]:
    """``led_string.compute`` one row at a time with ``math`` (resistor tolerance: the series' default): the
    main preconditions, the results, the three checks and the notices' conditions."""
    ratings = led_string.POWER_RATINGS_W.tolist()
    out = []
    for k, (vs, ts, vf_typ, vf_min, vf_max, if_max, leds, strings, target, drop_sw, series) in enumerate(rows):
        if not (vs > 0 and 0 <= ts < 1 and 0 < vf_min <= vf_typ <= vf_max and if_max > 0 and target > 0):
            raise ValueError(f"row {k} is not a valid design")
        drop = leds * vf_typ + drop_sw
        if vs <= drop:
            raise ValueError(f"row {k}: the supply does not exceed the string's drop")
        tr = eseries.DEFAULT_TOLERANCE[series]
        v_r = vs - drop
        r_exact = v_r / target
        r = _standard_at_or_above(r_exact, series)
        current = v_r / r
        v_r_low = vs * (1.0 - ts) - leds * vf_max - drop_sw
        v_r_high = vs * (1.0 + ts) - leds * vf_min - drop_sw
        current_min = max(v_r_low / (r * (1.0 + tr)), 0.0)
        current_max = v_r_high / (r * (1.0 - tr))
        power_max = v_r_high**2 / (r * (1.0 - tr))
        need = led_string.DERATING_FACTOR * power_max
        rating = next((w for w in ratings if w >= need), math.nan)
        notices = (
            v_r < led_string.HEADROOM_FRACTION * vs,
            current_min <= 0.0,
            power_max >= led_string.HOT_RESISTOR_W,
            if_max >= led_string.HIGH_POWER_LED_A,
            current_max > if_max,
            need > ratings[-1],
        )
        out.append(
            (
                r_exact, r, current, current_min, current_max, current**2 * r, power_max, rating,
                leds * vf_typ * current, strings * current, leds * vf_typ / vs, v_r,
                current_max <= if_max, v_r >= led_string.HEADROOM_FRACTION * vs, need <= ratings[-1], *notices,
            )
        )  # fmt: skip
    return out


def led_string_minimal(inputs: led_string.LedStringInputs) -> dict[str, np.ndarray]:
    """The LED string's results as one plain numpy expression each: the yardstick for the core's own overhead
    (its validation, checks, notices and bookkeeping)."""
    vs, ts, nl, vsw = inputs.supply_v, inputs.supply_tolerance, inputs.leds_in_series, inputs.switch_drop_v
    tr = eseries.default_tolerance_rows(inputs.e_series)
    v_r = vs - nl * inputs.vf_typ_v - vsw
    r_exact = v_r / inputs.current_a
    r = eseries.pick_at_or_above_rows(r_exact, inputs.e_series)
    current = v_r / r
    v_r_high = vs * (1.0 + ts) - nl * inputs.vf_min_v - vsw
    power_max = v_r_high**2 / (r * (1.0 - tr))
    return {
        "resistor_exact_ohm": r_exact,
        "resistor_ohm": r,
        "current_a": current,
        "current_min_a": np.maximum(vs * (1.0 - ts) - nl * inputs.vf_max_v - vsw, 0.0) / (r * (1.0 + tr)),
        "current_max_a": v_r_high / (r * (1.0 - tr)),
        "resistor_power_w": current**2 * r,
        "resistor_power_max_w": power_max,
        "led_power_w": nl * inputs.vf_typ_v * current,
        "total_current_a": inputs.strings * current,
        "efficiency": nl * inputs.vf_typ_v / vs,
    }


def sweep_inputs() -> closed_loop.ClosedLoopInputs:
    """The sensor preamp: non-inverting, gain 20 on a 1 MHz op-amp, swept from 10 Hz to 1 MHz."""

    def one(x: float) -> np.ndarray:
        return np.array([x])

    return closed_loop.ClosedLoopInputs(
        inverting=np.array([False]), gain=one(20.0), rf_ohm=one(math.nan), rg_ohm=one(math.nan), gbw_hz=one(1e6),
        open_loop_gain=one(2e5), stages=one(1.0), signal_hz=one(1e3), sweep_start_hz=one(10.0),
        sweep_stop_hz=one(1e6), sweep_points=one(SWEEP_POINTS), input_offset_v=one(math.nan),
        output_offset_max_v=one(math.nan),
    )  # fmt: skip


def sweep_loop(inputs: closed_loop.ClosedLoopInputs) -> list[tuple[float, float, float]]:
    """``closed_loop.compute``'s sweep for one non-inverting row, one frequency at a time with ``math``."""
    gain, gbw, a0, stages = float(inputs.gain[0]), float(inputs.gbw_hz[0]), float(inputs.open_loop_gain[0]), 1.0
    start, stop, points = float(inputs.sweep_start_hz[0]), float(inputs.sweep_stop_hz[0]), int(inputs.sweep_points[0])
    dc_gain = gain / (1.0 + gain / a0)
    bandwidth = gbw / gain + gbw / a0
    dc_db = 20.0 * math.log10(abs(dc_gain))
    low, step = math.log10(start), (math.log10(stop) - math.log10(start)) / (points - 1)
    out = []
    for k in range(points):
        f = 10.0 ** (low + k * step)
        x = f / bandwidth
        out.append(
            (f, stages * (dc_db - 10.0 * math.log1p(x * x) / math.log(10.0)), -stages * math.degrees(math.atan(x)))
        )
    return out


def channel(ambient_c: float = 25.0, ambient_min_c: float = math.nan, ambient_max_c: float = math.nan) -> ChannelInputs:
    """One greenhouse channel (see SINGLE_BODY) with the seed parts' values and no front stage, pushed to 27 mA
    per string: some builds then exceed the LEDs' rating, so the failing samples' path is timed too. The ambient
    as given (default: a fixed 25 °C)."""

    def one(x: float) -> np.ndarray:
        return np.array([x])

    nan = one(math.nan)
    return ChannelInputs(
        supply_v=one(12.0), supply_tolerance=one(0.05), supply_min_v=nan, supply_max_v=nan, current_max_a=one(2.0),
        capacity_ah=nan,
        drive_high_v=one(2.9), drive_low_v=one(0.4), source_current_max_a=one(0.008),
        hfe_min=one(100.0), hfe_typ=one(200.0), vbe_sat_v=one(0.85), vce_sat_v=one(0.2), ic_max_a=one(0.2),
        power_max_w=one(0.625), vf_typ_v=one(2.1), vf_min_v=one(1.9), vf_max_v=one(2.5), if_max_a=one(0.03),
        leds_in_series=one(3.0), strings=one(2.0), current_a=one(0.027), duty_cycle=one(0.5), channels=one(6.0),
        e_series=np.array(["E24"]), forced_beta=one(10.0), vce_sat_forced_beta=one(10.0), base_junctions=one(1.0),
        vceo_max_v=one(40.0), rbe_ohm=nan, drive_supply_v=one(3.3), resistor_tolerance=nan, inverting=np.array([False]),
        gain=nan, gbw_hz=nan, open_loop_gain=nan, slew_rate_v_per_s=nan, output_headroom_v=nan, signal_hz=nan,
        amplitude_v=nan, opamp_supply_min_v=nan, opamp_supply_max_v=nan, input_offset_v=nan, output_offset_max_v=nan,
        ambient_c=one(ambient_c), ambient_min_c=one(ambient_min_c), ambient_max_c=one(ambient_max_c),
        tj_max_c=one(150.0), rth_ja_k_per_w=one(250.0), rth_jc_k_per_w=nan, heatsink_k_per_w=nan,
        led_tj_max_c=one(100.0), led_rth_jb_k_per_w=one(200.0), led_rth_ba_k_per_w=one(150.0),
        vf_tempco_v_per_k=one(-0.002), if_derating_knee_c=one(60.0), resistor_rated_to_c=one(70.0),
        resistor_zero_power_c=one(155.0),
        **{name: nan for name in OPAMP_STAGE_FIELDS}, phase_margin_min_deg=one(45.0),
        td_s=one(4e-8), tr_s=one(4e-8), ts_s=one(2.5e-7), tf_s=one(8e-8), pwm_frequency_hz=nan,
        pwm_resolution_bits=one(8.0), modulation_depth=one(1.0), camera_frame_rate_hz=nan,
        **{name: nan for name in MOSFET_ONLY},
    )  # fmt: skip


# ---- sections --------------------------------------------------------------------------------------------


def core_section(repeats: int) -> tuple[list[Row], list[str]]:
    rows: list[Row] = []
    notes: list[str] = []

    sweep = sweep_inputs()
    vectorized, outcome = best_of(repeats * 3, lambda: closed_loop.compute(sweep))
    plain, looped = best_of(repeats * 3, lambda: sweep_loop(sweep))
    for k, name in enumerate(("sweep_frequency_hz", "sweep_gain_db", "sweep_phase_deg")):
        np.testing.assert_allclose(np.array(looped)[:, k], outcome.results[name], rtol=1e-9, err_msg=name)
    rows.append(
        Row(
            "core",
            f"closed-loop sweep, {SWEEP_POINTS:,} points (numpy, incl. validation)",
            f"{duration(vectorized)} ({duration(vectorized / SWEEP_POINTS)}/point)",
            "plain Python loop, same points",
            f"{duration(plain)} ({duration(plain / SWEEP_POINTS)}/point)",
            f"{plain / vectorized:.1f}× faster",
        )
    )

    inputs = led_inputs(designs(CORE_ROWS, seed=2))
    vectorized, minimal, outcome = side_by_side(
        repeats, lambda: led_string.compute(inputs), lambda: led_string_minimal(inputs)
    )
    subset = loop_rows(inputs, LOOP_ROWS)
    plain, looped = best_of(repeats, lambda: led_string_loop(subset))
    plain *= CORE_ROWS / LOOP_ROWS
    for k, name in enumerate(RESULT_NAMES):
        np.testing.assert_allclose([r[k] for r in looped], outcome.results[name][:LOOP_ROWS], rtol=1e-12, err_msg=name)
    rows.append(
        Row(
            "core",
            f"LED string, {CORE_ROWS:,} rows (numpy, incl. validation)",
            f"{duration(vectorized)} ({duration(vectorized / CORE_ROWS)}/row)",
            f"plain Python loop, {LOOP_ROWS:,} rows extrapolated",
            f"{duration(plain)} ({duration(plain / CORE_ROWS)}/row)",
            f"{plain / vectorized:.0f}× faster",
        )
    )

    rows.append(
        Row(
            "core",
            f"LED string, {CORE_ROWS:,} rows (numpy, incl. validation)",
            f"{duration(vectorized)} ({duration(vectorized / CORE_ROWS)}/row)",
            "a minimal numpy expression of its results (no validation, checks or notices)",
            f"{duration(minimal)} ({duration(minimal / CORE_ROWS)}/row)",
            f"{vectorized / minimal:.2f}×",
            f"≤ {CORE_OVER_MINIMAL_TARGET}×",
            verdict(vectorized / minimal <= CORE_OVER_MINIMAL_TARGET),
        )
    )
    single = led_inputs(designs(1, seed=3))
    calls = 2_000
    per_call = statistics.median(best_of(1, lambda: led_string.compute(single))[0] for _ in range(calls))
    rows.append(
        Row(
            "core",
            "LED string, one row: fixed cost of a call",
            duration(per_call),
            "the target",
            duration(FIXED_COST_TARGET_S),
            f"{per_call / FIXED_COST_TARGET_S:.1f}× the target",
            f"≤ {duration(FIXED_COST_TARGET_S)}",
            verdict(per_call <= FIXED_COST_TARGET_S),
        )
    )
    notes.append(f"Fixed cost of a call: median of {calls:,} calls of led_string.compute on one row.")

    one = channel()
    times = {}
    for samples in MONTE_CARLO_SAMPLES:
        runs = 1 if samples >= 1_000_000 else repeats
        times[samples], result = best_of(runs, lambda s=samples: monte_carlo.monte_carlo(one, samples=s, seed=1))
        notes.append(
            f"Monte Carlo of one greenhouse channel at 27 mA per string, {samples:,} samples (best of {runs}): "
            f"yield {result.fraction:.4f} (95 % interval {result.ci_low:.4f}–{result.ci_high:.4f}); most failing "
            f"check: {result.most_failing_check or 'none'}."
        )
    large, small = MONTE_CARLO_SAMPLES
    rows.append(
        Row(
            "core",
            f"channel Monte Carlo, {large:,} samples",
            f"{duration(times[large])} ({duration(times[large] / large)}/sample)",
            f"{small:,} samples",
            f"{duration(times[small])} ({duration(times[small] / small)}/sample)",
            f"{(times[large] / large) / (times[small] / small):.2f} (time per sample)",
        )
    )
    rows += temperature_rows(repeats, notes)
    return rows, notes


def temperature_rows(repeats: int, notes: list[str]) -> list[Row]:
    """The cost of an ambient range (a cold start at 0 °C to a 45 °C summer enclosure) against the same run at a
    fixed 25 °C: the Monte Carlo judges each build at both ends, the worst case doubles its corners. Both runs
    solve the LEDs' coupled electro-thermal point (it is part of the model at any ambient)."""
    fixed, ranged = channel(), channel(25.0, 0.0, 45.0)
    samples = MONTE_CARLO_SAMPLES[1]
    times = {}
    for name, one in (("fixed", fixed), ("range", ranged)):
        times[name], found = best_of(repeats, lambda one=one: monte_carlo.monte_carlo(one, samples=samples, seed=1))
        notes.append(f"Monte Carlo at {name} ambient, {samples:,} samples: yield {found.fraction:.4f}.")
    rows = [
        Row(
            "core",
            f"channel Monte Carlo, {samples:,} samples, ambient 0–45 °C",
            duration(times["range"]),
            "same run at a fixed 25 °C",
            duration(times["fixed"]),
            f"{times['range'] / times['fixed']:.2f}× the time",
        )
    ]
    count = 10_000
    many = {name: take(one, np.zeros(count, dtype=np.intp)) for name, one in (("fixed", fixed), ("range", ranged))}
    for name, inputs in many.items():
        times[name], _ = best_of(repeats, lambda inputs=inputs: worst_case.worst_case(inputs))
    rows.append(
        Row(
            "core",
            f"channel worst case, {count:,} rows, ambient 0–45 °C",
            duration(times["range"]),
            "same rows at a fixed 25 °C",
            duration(times["fixed"]),
            f"{times['range'] / times['fixed']:.2f}× the time",
        )
    )
    # The single calculation: led-string over a 100,000-row batch's designs, whose coupled point is solved at
    # any ambient; the constant-drop design alone is the cost without heat.
    count = 100_000  # the server's batch limit
    columns = designs(count, seed=3)
    warm, cool = led_inputs(columns, 45.0), led_inputs(columns, 25.0)
    times["warm"], _ = best_of(repeats, lambda: led_string.compute(warm))
    times["cool"], _ = best_of(repeats, lambda: led_string.compute(cool))
    times["design"], _ = best_of(repeats, lambda: led_string.design(cool))
    for label, other in (("same rows at a fixed 25 °C", "cool"), ("same rows, constant-drop design only", "design")):
        rows.append(
            Row(
                "core",
                f"led-string, {count:,} rows, ambient 45 °C",
                duration(times["warm"]),
                label,
                duration(times[other]),
                f"{times['warm'] / times[other]:.2f}× the time",
            )
        )
    return rows


def python_window(server: Server, path: str, body: bytes, seconds: float, args: argparse.Namespace) -> Window:
    """One window of the Python load generator (when wrk is missing); its warm-up runs before the server's CPU is
    read, so CPU per request counts only the requests counted."""
    drive(server.port, lambda client, _rng: client.request(path, "POST", path, body, JSON), seconds=args.warmup,
          warmup=0.0, processes=args.clients, threads=args.threads)  # fmt: skip

    def run() -> tuple[int, float, float, int]:
        tally = drive(
            server.port,
            lambda client, _rng: client.request(path, "POST", path, body, JSON),
            seconds=seconds,
            warmup=0.0,
            processes=args.clients,
            threads=args.threads,
        )
        bad = sum(count for key, count in tally.statuses.items() if key[1] != 200)
        return tally.requests, tally.seconds, tally.client_cpu_s, bad

    return measured(server, run)


def endpoint_window(server: Server, path: str, body: bytes, seconds: float, args: argparse.Namespace) -> Window:
    if args.no_wrk or wrk_path() is None:
        window = python_window(server, path, body, seconds, args)
    else:
        run_wrk(server, path, body, args.warmup, args.connections)  # warm-up, not counted
        window = run_wrk(server, path, body, seconds, args.connections)
    if window.errors:
        raise RuntimeError(f"{path} answered other than 200 ({window.errors} times)")
    return window


def endpoint_section(args: argparse.Namespace) -> tuple[list[Row], list[str]]:
    single, parts = orjson.dumps(SINGLE_BODY), orjson.dumps(PARTS_BODY)
    runs = {"echo": ("/bench/echo", single), "numbers": ("/v1/calc/led-string", single),
            "parts": ("/v1/calc/led-string", parts)}  # fmt: skip
    totals = {name: Window() for name in runs}
    ratios: dict[str, list[float]] = {"numbers": [], "parts": []}
    cpu_ratios: dict[str, list[float]] = {"numbers": [], "parts": []}
    with gunicorn("echo_app:app") as server:
        workers = len(server.workers())
        # Alternating short windows: a change in the machine's other load hits every endpoint alike; the ratio
        # of each round is taken, and the median of the rounds reported.
        for _ in range(args.rounds):
            found = {name: endpoint_window(server, path, body, args.seconds / args.rounds, args)
                     for name, (path, body) in runs.items()}  # fmt: skip
            for name, window in found.items():
                totals[name].add(window)
            for name in ratios:
                ratios[name].append(found[name].per_s / found["echo"].per_s)
                cpu_ratios[name].append(found["echo"].server_cpu_per_request_s / found[name].server_cpu_per_request_s)
    echo = totals["echo"]
    rows = []
    for name, label in (("numbers", "numbers"), ("parts", "3 part references")):
        ratio, cpu_ratio = statistics.median(ratios[name]), statistics.median(cpu_ratios[name])
        rows += [
            Row(
                "endpoint",
                f"POST /v1/calc/led-string, {label}",
                rate(totals[name].per_s, "req"),
                "POST /bench/echo (bare JSON route, same app)",
                rate(echo.per_s, "req"),
                f"{ratio:.2f} (rounds: {', '.join(f'{r:.2f}' for r in ratios[name])})",
                f"≥ {ENDPOINT_TARGET}",
                verdict(ratio >= ENDPOINT_TARGET),
            ),
            Row(
                "endpoint",
                f"server CPU per request, {label}",
                duration(totals[name].server_cpu_per_request_s),
                "server CPU per request, echo",
                duration(echo.server_cpu_per_request_s),
                f"{cpu_ratio:.2f} (echo CPU / this CPU)",
                f"≥ {ENDPOINT_TARGET}",
                verdict(cpu_ratio >= ENDPOINT_TARGET),
            ),
        ]
    cores = len(os.sched_getaffinity(0))
    share = ", ".join(f"{name} {w.client_share:.0%}" for name, w in totals.items())
    if args.no_wrk or wrk_path() is None:
        generator = (
            f"the Python load generator ({args.clients} processes × {args.threads} threads, http.client; wrk was "
            f"{'not wanted' if args.no_wrk else f'not found: {WRK_INSTALL} gives it'}), so compare the server "
            "CPU per request rather than the rates"
        )
    else:
        generator = f"wrk (Debian's package, {WRK_INSTALL}), 1 thread, {args.connections} kept-alive connections"
    notes = [
        f"Endpoint load: {generator}, against {workers} gunicorn threaded workers; per endpoint {args.seconds:g} s "
        f"counted, in {args.rounds} alternating rounds, each after {args.warmup:g} s of uncounted warm-up; the "
        "ratio is the median of the rounds' ratios. The load generator runs on the same "
        f"{cores} cores as the server; its share of the CPU both used: {share}. Server CPU per request is the "
        "user + system time of the master and workers (/proc) over the requests of the window.",
    ]
    return rows, notes


def post(port: int, path: str, body: bytes, headers: dict[str, str]) -> tuple[int, bytes]:
    client = Client(port)
    status, _headers, answer = client.request(path, "POST", path, body, headers)
    client.connection.close()
    return status, answer


def batch_post(port: int, path: str, body: bytes, headers: dict[str, str]) -> tuple[int, bytes, float, float]:
    """One batch request: status, answer, seconds from sending the body to the answer's last byte, and the
    client's own CPU seconds. Driven by curl when installed: a Python client's receiving and joining of a 60 MiB
    answer costs some 60 ms of CPU on the cores the server shares, a C client's about a fifth of that."""
    curl = shutil.which("curl")
    if curl is None:
        began, cpu = time.perf_counter(), time.process_time()
        status, answer = post(port, path, body, headers)
        return status, answer, time.perf_counter() - began, time.process_time() - cpu
    with tempfile.TemporaryDirectory() as folder:
        sent, received = Path(folder) / "body", Path(folder) / "answer"
        sent.write_bytes(body)
        command = [curl, "-sS", "-o", str(received), "-w", "%{http_code} %{time_total}", "--data-binary", f"@{sent}"]
        for name, value in {**headers, "Expect": ""}.items():  # no 100-continue round trip
            command += ["-H", f"{name}: {value}"]
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        done = subprocess.run([*command, f"http://{LOOPBACK}:{port}{path}"], capture_output=True, check=True)
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        status, seconds = done.stdout.decode().split()
        cpu = after.ru_utime + after.ru_stime - before.ru_utime - before.ru_stime
        return int(status), received.read_bytes(), float(seconds), cpu


def batch_section(args: argparse.Namespace) -> tuple[list[Row], list[str]]:
    columns = designs(args.rows, seed=1)
    n = args.rows
    inputs = led_inputs(columns)
    rows_in = records(columns)
    json_body = orjson.dumps(rows_in)
    columns_body = orjson.dumps({name: [row[name] for row in rows_in] for name in rows_in[0]})
    csv_body = csv_text(rows_in).encode()
    csv_headers = {"Content-Type": "text/csv", "Accept": "text/csv"}
    core_time, _ = best_of(args.repeats, lambda: led_string.compute(inputs))

    with gunicorn() as server:
        workers = server.workers()
        status, _ = post(server.port, "/v1/calc/led-string", orjson.dumps(rows_in[0]), JSON)
        before = max(peak_rss_bytes(pid) for pid in workers)

        client = Client(server.port)
        singles = rows_in[:SINGLE_REQUESTS]
        began = time.perf_counter()
        for design in singles:
            status, _h, _b = client.request("single", "POST", "/v1/calc/led-string", orjson.dumps(design), JSON)
            if status != 200:
                raise RuntimeError(f"single request answered {status}")
        single_time = time.perf_counter() - began
        client.connection.close()

        variants = {
            "rows": ("/v1/batch/led-string", json_body, JSON),
            "columns": ("/v1/batch/led-string?layout=columns", columns_body, JSON),
            "csv": ("/v1/batch/led-string", csv_body, csv_headers),
        }
        timings: dict[str, list[float]] = {kind: [] for kind in variants}
        client_cpu: dict[str, list[float]] = {kind: [] for kind in variants}
        sizes: dict[str, int] = {}
        peaks: dict[str, int] = {kind: 0 for kind in variants}
        answers: dict[str, Any] = {}
        for _ in range(args.repeats):
            for kind, (path, body, headers) in variants.items():
                reset = all(reset_peak_rss(pid) for pid in workers)
                status, answer, seconds, cpu = batch_post(server.port, path, body, headers)
                timings[kind].append(seconds)
                client_cpu[kind].append(cpu)
                if status != 200:
                    raise RuntimeError(f"{kind} batch answered {status}: {answer[:300]!r}")
                peaks[kind] = max(peaks[kind], max(peak_rss_bytes(pid) for pid in workers)) if reset else 0
                sizes[kind] = len(answer)
                answers[kind] = answer
        overall = {pid: peak_rss_bytes(pid) for pid in workers}
    check_batch_answers(answers, n)

    rates = {kind: n / statistics.median(times) for kind, times in timings.items()}
    single_rate = SINGLE_REQUESTS / single_time
    labels = {
        "rows": "rows in (a JSON array of objects), rows out",
        "columns": "columns in (a JSON object of arrays), ?layout=columns out",
        "csv": "CSV in and out",
    }
    rows: list[Row] = []
    for kind, target in BATCH_TARGETS.items():
        median = statistics.median(timings[kind])
        rows.append(
            Row(
                "batch",
                f"POST /v1/batch/led-string, {n:,} rows, {labels[kind]}",
                f"{rate(rates[kind], 'rows')} ({duration(median)})",
                f"{SINGLE_REQUESTS:,} single-row requests, one after another",
                f"{rate(single_rate, 'rows')} ({duration(single_time / SINGLE_REQUESTS)}/request)",
                f"{rates[kind] / single_rate:.0f}× singles; {rates[kind] / (n / core_time):.3f} of the core",
                f"≥ {target:,} rows/s",
                verdict(rates[kind] >= target),
            )
        )
    for kind in variants:
        rows.append(
            Row(
                "memory",
                f"worker peak RSS (VmHWM) during the {kind} batch",
                mib(peaks[kind]) if peaks[kind] else "not measured",
                "the same after one single-row request",
                mib(before),
                f"{peaks[kind] / before:.1f}×" if peaks[kind] else "",
                f"< {mib(RSS_TARGET)}",
                verdict(0 < peaks[kind] < RSS_TARGET),
            )
        )
    notes = [
        f"Batch: median of {args.repeats} runs each, timed from sending the body to the last byte of the answer "
        f"(request {len(json_body) / 2**20:.1f} MiB JSON rows / {len(columns_body) / 2**20:.1f} MiB JSON columns / "
        f"{len(csv_body) / 2**20:.1f} MiB CSV; answer {sizes['rows'] / 2**20:.1f} MiB JSON rows / "
        f"{sizes['columns'] / 2**20:.1f} MiB JSON columns / {sizes['csv'] / 2**20:.1f} MiB CSV), the three answers "
        f"checked to agree. The core figure is the best of {args.repeats} calls of led_string.compute on the same "
        f"rows as arrays ({rate(n / core_time, 'rows')}). Single-row requests: one client, one request at a time.",
        f"Batch client: {'curl (time_total)' if shutil.which('curl') else 'http.client (curl not installed)'}; its "
        "own CPU time per batch (median): "
        + ", ".join(f"{kind} {duration(statistics.median(cpu))}" for kind, cpu in client_cpu.items())
        + ", on the cores the server shares.",
        "Peak RSS: every worker's VmHWM is reset (/proc/<pid>/clear_refs) before each batch and the highest read "
        "after it; over the whole run, per worker: "
        + ", ".join(f"{pid}: {mib(size)}" for pid, size in sorted(overall.items()))
        + ".",
    ]
    return rows, notes


def check_batch_answers(answers: dict[str, bytes], n: int) -> None:
    """The three layouts answered every row, computed, with the same resistors."""
    by_rows = orjson.loads(answers["rows"])
    by_columns = orjson.loads(answers["columns"])
    sheet = list(csv.DictReader(io.StringIO(answers["csv"].decode())))
    if not by_rows["ok_count"] == by_columns["ok_count"] == n == len(sheet):
        raise RuntimeError("a batch rejected rows or lost some")
    resistors = [row["results"]["resistor_ohm"] for row in by_rows["rows"]]
    if resistors != by_columns["results"]["resistor_ohm"] or [float(r["resistor_ohm"]) for r in sheet] != resistors:
        raise RuntimeError("the batch layouts disagree")


def provided(role: Role, part: PartView) -> dict[str, Any]:
    """The inputs ``part`` gives in ``role``, as a single request resolves a part reference."""
    return {name: part.parameters[parameter] for parameter, name in role.provides if parameter in part.parameters}


def role_of(form: InputSet, name: str) -> Role:
    return next(role for role in form.roles if role.name == name)


def led_singles(search: RoleSearch) -> Callable[[], list[Any]]:
    """The single-row path of ``POST /v1/calc/led-string`` (service.calculate.run_calculation's core call) over every
    candidate, one part at a time; the inputs are resolved and completed beforehand, outside the timing."""
    rows = [complete(LED_STRING, {**LED_SEARCH, **provided(search.role, part)}) for part in search.parts]

    def run() -> list[Any]:
        return [LED_STRING.compute(LED_STRING.make_inputs(columns_of(LED_STRING, [values]))) for values in rows]

    return run


def review_singles(search: ChannelSearch, sample: np.ndarray) -> Callable[[], list[worst_case.WorstCase | None]]:
    """The single review of ``POST /v1/review/channel`` (inputs, then the worst case, which runs the nominal
    review first) for the combinations ``sample``; None where the core refuses one (a single review's 422)."""

    def values(row: int) -> dict[str, Any]:
        given: dict[str, Any] = {**CHANNEL_SEARCH, "samples": 0}
        for role, part in zip(search.roles, search.parts_of(row), strict=True):
            given.update(provided(role, part))
        return complete(CHANNEL_INPUTS, given)

    rows = [values(row) for row in sample.tolist()]

    def one(values: dict[str, Any]) -> worst_case.WorstCase | None:
        try:
            return worst_case.worst_case(channel_inputs(values))
        except DomainError:
            return None

    return lambda: [one(values) for values in rows]


def timed_posts(server: Server, path: str, body: bytes, runs: int) -> tuple[list[float], dict[str, Any], int]:
    """Wall times of ``runs`` requests, one after another, after as many uncounted ones as there are workers
    (each has its own caches and database connection to warm); the last answer and its size."""
    times, answer = [], b""
    for k in range(len(server.workers()) + runs):
        began = time.perf_counter()
        status, answer = post(server.port, path, body, JSON)
        if status != 200:
            raise RuntimeError(f"{path} answered {status}: {answer[:300]!r}")
        if k >= len(server.workers()):
            times.append(time.perf_counter() - began)
    return times, orjson.loads(answer), len(answer)


def select_section(args: argparse.Namespace) -> tuple[list[Row], list[str]]:
    rng = np.random.default_rng(4)
    leds = synthetic_parts.leds(SEARCH_LEDS, rng)
    by_role = {
        "supply": synthetic_parts.supplies(CHANNEL_PARTS["supply"], rng),
        "transistor": synthetic_parts.npn_transistors(CHANNEL_PARTS["transistor"], rng),
        "led": leds[: CHANNEL_PARTS["led"]],
    }
    combinations = math.prod(CHANNEL_PARTS.values())

    led_role = role_of(LED_STRING, "led")
    role_time, found = best_of(args.repeats * 3, lambda: search_role(LED_STRING, LED_SEARCH, led_role, leds))
    loop_time, outcomes = best_of(args.repeats, led_singles(found))
    searched = found.evaluations[0]
    if not searched.accepted.all():
        raise RuntimeError("the core refused some synthetic LEDs; the loop assumes it takes them all")
    for name in ("resistor_ohm", "current_max_a", "resistor_power_max_w"):
        looped = [outcome.results[name][0] for outcome in outcomes]
        np.testing.assert_allclose(looped, searched.column(name), rtol=1e-12, err_msg=name)

    channel_time, space = best_of(args.repeats * 2, lambda: search_channel(CHANNEL_SEARCH, by_role))
    sample = np.sort(np.random.default_rng(5).choice(combinations, REVIEW_SAMPLE, replace=False))
    review_time, reviews = best_of(args.repeats, review_singles(space, sample))
    review_time *= combinations / REVIEW_SAMPLE
    positions = np.cumsum(space.accepted) - 1
    for row, worst in zip(sample.tolist(), reviews, strict=True):
        if (worst is None) == bool(space.accepted[row]):
            raise RuntimeError(f"combination {row}: the single review and the search disagree on refusing it")
        searched_worst = space.passes[0].worst  # every synthetic transistor is bipolar: one pass
        if worst is not None and searched_worst is not None:
            k = int(positions[row])
            same = bool(worst.ok[0]) == bool(searched_worst.ok[k]) and math.isclose(
                worst.nominal.led_string.results["resistor_ohm"][0],
                searched_worst.nominal.led_string.results["resistor_ohm"][k],
            )
            if not same:
                raise RuntimeError(f"combination {row}: the single review and the search disagree")

    led_body = orjson.dumps({**LED_SEARCH, "led": [part.part_id for part in leds]})
    channel_body = orjson.dumps(
        {**CHANNEL_SEARCH, **{name: [p.part_id for p in parts] for name, parts in by_role.items()}, "samples": 0}
    )
    runs = SEARCH_REQUESTS
    with tempfile.TemporaryDirectory(prefix="calcsvc-bench-select-") as folder:
        url = f"sqlite:///{Path(folder) / 'calcsvc.sqlite'}"
        synthetic_parts.store(url, leds + by_role["supply"] + by_role["transistor"])
        with gunicorn(database_url=url) as server:
            led_http, led_answer, led_size = timed_posts(server, "/v1/select/led-string", led_body, runs)
            channel_http, channel_answer, channel_size = timed_posts(server, "/v1/select/channel", channel_body, runs)
    if [c["part_id"] for c in led_answer["candidates"]] != [found.parts[int(r)].part_id for r in found.rows]:
        raise RuntimeError("the LED search over HTTP ranked other candidates than in-process")
    designs = [[p["part_id"] for p in d["parts"]] for d in channel_answer["designs"]]
    if designs != [[p.part_id for p in space.parts_of(int(r))] for r in space.rows]:
        raise RuntimeError("the channel search over HTTP ranked other designs than in-process")
    if channel_answer["combinations"] != combinations:
        raise RuntimeError("the channel search over HTTP evaluated another number of combinations")

    led_median, channel_median = statistics.median(led_http), statistics.median(channel_http)
    target = f"< {SEARCH_TARGET_S:g} s"
    shape = "{supply} supplies × {transistor} NPN × {led} LEDs".format(**CHANNEL_PARTS)
    rows = [
        Row(
            "select",
            f"search_role led-string, {SEARCH_LEDS:,} LED candidates, in-process",
            f"{duration(role_time)} ({duration(role_time / SEARCH_LEDS)}/candidate)",
            f"{SEARCH_LEDS:,} single calculations (the single-row path), in-process",
            f"{duration(loop_time)} ({duration(loop_time / SEARCH_LEDS)}/candidate)",
            f"{loop_time / role_time:.0f}× faster",
            target,
            verdict(role_time < SEARCH_TARGET_S),
        ),
        Row(
            "select",
            f"POST /v1/select/led-string, {SEARCH_LEDS:,} listed LEDs, end to end",
            duration(led_median),
            "search_role in-process (above)",
            duration(role_time),
            f"{led_median / role_time:.0f}× the in-process time",
            target,
            verdict(led_median < SEARCH_TARGET_S),
        ),
        Row(
            "select",
            f"search_channel, {combinations:,} combinations ({shape}), in-process",
            f"{duration(channel_time)} ({duration(channel_time / combinations)}/combination)",
            f"{REVIEW_SAMPLE:,} single reviews (worst_case), extrapolated",
            f"{duration(review_time)} ({duration(review_time / combinations)}/combination)",
            f"{review_time / channel_time:.0f}× faster",
            target,
            verdict(channel_time < SEARCH_TARGET_S),
        ),
        Row(
            "select",
            f"POST /v1/select/channel, {combinations:,} combinations, end to end",
            duration(channel_median),
            "search_channel in-process (above)",
            duration(channel_time),
            f"{channel_median / channel_time:.2f}× the in-process time",
            target,
            verdict(channel_median < SEARCH_TARGET_S),
        ),
    ]
    refused = combinations - int(space.accepted.sum())
    notes = [
        f"Candidate search: synthetic generic parts from numpy's Generator (seed 4): {SEARCH_LEDS:,} LEDs "
        f"(bench-led-0001 …), {CHANNEL_PARTS['supply']} supplies, {CHANNEL_PARTS['transistor']} NPN transistors; the "
        f"channel uses the first {CHANNEL_PARTS['led']} LEDs. LED search: the greenhouse string "
        "(12 V ±5 %, three LEDs in series, two strings, 20 mA, 0.2 V switch drop) with the LED open; "
        f"{int(found.scores.ok.sum()):,} of {SEARCH_LEDS:,} pass. Channel search: the greenhouse channel from "
        f"numbers with supply, transistor and LED open; {int(space.scores.ok.sum()):,} combinations pass, "
        f"{refused:,} are refused by the core. In-process figures are the best of {args.repeats * 3} "
        f"(LED search), {args.repeats * 2} (channel search) and {args.repeats} (loops) runs and include scoring "
        f"and ranking the top {len(found.rows)}; the loops only compute. The single-row loop runs "
        "LED_STRING.compute(make_inputs(columns_of(...))) per candidate on inputs resolved beforehand (the results "
        f"are checked equal to the search's); the single reviews run channel_inputs and worst_case.worst_case on "
        f"{REVIEW_SAMPLE} randomly sampled combinations ({len([r for r in reviews if r is None])} of them refused, "
        "a 422 over HTTP) and agree with the search on refusal, verdict and resistor.",
        f"Search over HTTP: median of {runs} requests each, one after another, after as many uncounted ones as "
        "there are workers (the kernel picks the worker, so a cold one can still show as an outlier), timed from "
        "sending the body to the last byte of the answer; the parts were stored, approved, in "
        "the server's SQLite database before it started and listed by part_id in the request "
        f"({len(led_body) / 1024:.0f} KiB / {len(channel_body) / 1024:.1f} KiB). Answers: the top "
        f"{len(led_answer['candidates'])} candidates ({led_size / 1024:.0f} KiB) and top "
        f"{len(channel_answer['designs'])} designs ({channel_size / 1024:.0f} KiB), checked identical to the "
        "in-process ranking. All runs (s): LED "
        + ", ".join(f"{t:.3f}" for t in led_http)
        + "; channel "
        + ", ".join(f"{t:.3f}" for t in channel_http)
        + ".",
    ]
    return rows, notes


def impact_section(repeats: int) -> tuple[list[Row], list[str]]:
    """``GET /v1/parts/<id>/impact``'s work on 1,000 saved designs against re-reviewing them one by one."""
    f = design_impact.measure(IMPACT_DESIGNS, repeats, IMPACT_SAMPLE)
    rows = [
        Row(
            "impact",
            f"part_impact, {f.designs:,} saved designs using the edited LED, in-process",
            duration(f.batched_s),
            f"{f.designs:,} designs re-reviewed one by one, twice each (today, draft), extrapolated",
            duration(f.one_by_one_s),
            f"{f.one_by_one_s / f.batched_s:.0f}× faster",
            "< 1 s",
            verdict(f.batched_s < SEARCH_TARGET_S),
        ),
        Row(
            "impact",
            "part_impact (above)",
            duration(f.batched_s),
            "the same one by one without the Monte Carlo",
            duration(f.without_monte_carlo_s),
            f"{f.without_monte_carlo_s / f.batched_s:.1f}× faster",
        ),
    ]
    notes = [
        f"Impact: {f.designs:,} variations of the greenhouse channel (numpy Generator, seed 7: supply, transistor, "
        "LEDs in series, strings, current, channels, duty, gain), every one with the red LED, stored in SQLite; the "
        f"draft is a higher forward-voltage reel of it ({f.changed:,} designs change, {f.pass_to_fail:,} from pass "
        f"to fail). part_impact reads the designs and both revisions' parts once, resolves each design twice "
        "(today's approved parts, the draft in its place) and reviews all 2,000 at their worst-case corners in one "
        "vectorised pass (nominal review and corners batch across designs); it runs no Monte Carlo, since the "
        "verdict, failing checks and margins are the worst-case checks'. One by one: run_review (the review "
        f"endpoint's work, Monte Carlo of {f.samples_per_review:,} samples included) on {f.sample} designs x 2, "
        "extrapolated; the second row leaves the Monte Carlo out of the one-by-one runs, so its ratio is what "
        "batching across designs gains alone. Best of the runs for part_impact; one pass for the loops.",
    ]
    return rows, notes


def report(info: dict[str, str], rows: list[Row], notes: list[str]) -> str:
    lines = [
        "# calcsvc benchmark results",
        "",
        "Written by `make bench` (`benchmarks/run.py --write-results`); each run overwrites it. Speed targets live "
        "here, not in the unit tests.",
        "",
        *(f"- {key}: {value}" for key, value in info.items()),
        "",
        markdown_table(rows),
        "",
        *(f"- {note}" for note in notes),
        "",
    ]
    return "\n".join(lines)


SECTIONS = ("endpoint", "batch", "select", "core", "impact")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0] if __doc__ else None)
    parser.add_argument("--seconds", type=float, default=5.0, help="counted seconds per endpoint (default 5)")
    parser.add_argument("--warmup", type=float, default=1.0, help="uncounted seconds before each (default 1)")
    parser.add_argument("--rounds", type=int, default=3, help="alternating endpoint rounds (default 3)")
    parser.add_argument("--connections", type=int, default=8, help="wrk's kept-alive connections (default 8)")
    parser.add_argument("--no-wrk", action="store_true", help="drive the endpoints with the Python clients")
    parser.add_argument("--clients", type=int, default=2, help="Python load generator processes (default 2)")
    parser.add_argument("--threads", type=int, default=2, help="connections per client process (default 2)")
    parser.add_argument("--rows", type=int, default=100_000, help="rows in the batch (default 100,000)")
    parser.add_argument("--repeats", type=int, default=3, help="runs per batch and core figure (default 3)")
    parser.add_argument("--write-results", action="store_true", help=f"also write {RESULTS.relative_to(REPO)}")
    parser.add_argument(
        "--only",
        choices=SECTIONS,
        action="append",
        help="measure only this section (may be repeated; not with --write-results, which records the whole run)",
    )
    args = parser.parse_args(argv)
    if not 1 <= args.rows <= 100_000 or args.seconds <= 0 or args.repeats < 1:
        parser.error("--rows must be 1..100000 (the server's batch limit), --seconds positive, --repeats ≥ 1")
    if args.only and args.write_results:
        parser.error("--write-results records a whole run: leave out --only")

    began = time.monotonic()
    info = machine()
    for key, value in info.items():
        print(f"{key}: {value}", flush=True)
    rows: list[Row] = []
    notes: list[str] = []
    for name, title, section in (
        ("endpoint", "endpoint overhead", lambda: endpoint_section(args)),
        ("batch", "batch and memory", lambda: batch_section(args)),
        ("select", "candidate search", lambda: select_section(args)),
        ("core", "core", lambda: core_section(args.repeats)),
        ("impact", "impact of a part edit", lambda: impact_section(args.repeats)),
    ):
        if args.only and name not in args.only:
            continue
        print(f"measuring {title} …", flush=True)
        found, said = section()
        rows += found
        notes += said
    info["load average (1, 5, 15 min) at end"] = ", ".join(f"{x:.2f}" for x in os.getloadavg())
    info["wall time of the run"] = f"{time.monotonic() - began:.0f} s"
    notes.append(
        "Core figures are the best of several runs; the machine may be shared, so compare the load averages above "
        "with its core count before trusting small differences."
    )
    text = report(info, rows, notes)
    print()
    print(text)
    if args.write_results:
        # The hand-written analysis below the figures (what each miss was measured to come from) is kept.
        kept = RESULTS.read_text().partition(ANALYSIS)[2] if RESULTS.exists() else ""
        RESULTS.write_text(text + (f"\n{ANALYSIS}{kept}" if kept else ""))
        print(f"written to {RESULTS.relative_to(REPO)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
