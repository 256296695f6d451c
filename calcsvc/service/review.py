"""The whole-channel review for one request: parts resolved, the channel validated once, reviewed at nominal
values, taken to its worst tolerance corner and, with samples, through Monte Carlo; and the distribution of one
check over the Monte Carlo's builds, for the histogram."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from calcsvc.core import channel, channel_stages, monte_carlo, thermal_limit, usable_runtime, worst_case
from calcsvc.core.channel_mosfet import BIPOLAR_REQUIRED, MOSFET_ONLY
from calcsvc.core.channel_spec import ALTERNATIVE_ROLES, CHANNEL_INPUTS, CHECK_UNITS, STAGES
from calcsvc.core.heat_curves import HeatCurves, heat_curves
from calcsvc.core.outcome import Check, FloatArray, Outcome, raise_violations
from calcsvc.data.database import Database
from calcsvc.service.bill_of_materials import bill_of_materials
from calcsvc.service.calculate import columns_of, complete
from calcsvc.service.envelope import fingerprint, row_notices, to_json_value
from calcsvc.service.errors import InvalidInput
from calcsvc.service.resolve import Resolved, resolve_parts
from calcsvc.service.safety import SAFETY_LINE

_BAND = ("supply_min_v", "supply_max_v")


def duty_of(values: Mapping[str, Any]) -> float:
    """The duty cycle as given, or from on-time and period; neither: always on."""
    timed = [name for name in ("on_time_s", "period_s") if name in values]
    if "duty_cycle" in values and timed:
        raise InvalidInput.on("duty_cycle", "give duty_cycle or on_time_s with period_s, not both")
    if len(timed) == 1:
        missing = "period_s" if timed == ["on_time_s"] else "on_time_s"
        raise InvalidInput.on(missing, f"{missing} is required with {timed[0]}")
    if timed:
        if values["on_time_s"] > values["period_s"]:
            raise InvalidInput.on("on_time_s", f"on_time_s ({values['on_time_s']:g} s) cannot exceed period_s")
        return float(values["on_time_s"] / values["period_s"])
    return float(values.get("duty_cycle", 1.0))


def pwm_frequency_of(values: Mapping[str, Any]) -> float:
    """The PWM frequency as given, or 1/period_s; NaN: neither (no PWM stage). Both must agree."""
    given = values.get("pwm_frequency_hz")
    if "period_s" not in values:
        return math.nan if given is None else float(given)
    implied = 1.0 / float(values["period_s"])
    if given is not None and not math.isclose(float(given), implied, rel_tol=1e-9):
        message = f"pwm_frequency_hz ({float(given):g} Hz) disagrees with 1/period_s ({implied:g} Hz): give one"
        raise InvalidInput.on("pwm_frequency_hz", message)
    return implied


def switch_kind_of(values: Mapping[str, Any]) -> str:
    """A channel's switch by the inputs given: "mosfet" when any input only a MOSFET has is, else "bjt"."""
    return "mosfet" if any(name in values for name in MOSFET_ONLY) else "bjt"


def complete_channel(values: dict[str, Any]) -> dict[str, Any]:
    """``complete`` for the review: an NPN switch's own inputs are required for one (a MOSFET has its own)."""
    filled = complete(CHANNEL_INPUTS, values)
    if switch_kind_of(filled) == "bjt":
        missing = {
            name: [f"required: give {name} or reference a part that provides it"]
            for name in BIPOLAR_REQUIRED
            if name not in filled
        }
        if missing:
            raise InvalidInput("missing inputs: " + ", ".join(missing), missing)
    return filled


def channel_inputs(values: Mapping[str, Any]) -> channel.ChannelInputs:
    """The core's one-row inputs from completed values (``complete(CHANNEL_INPUTS, ...)``)."""
    return channel_rows([values])


def channel_rows(rows: list[Mapping[str, Any]]) -> channel.ChannelInputs:
    """The core's inputs with one row per channel of completed values, built column by column."""
    columns = columns_of(CHANNEL_INPUTS, [dict(values) for values in rows])
    columns["duty_cycle"] = np.array([duty_of(values) for values in rows], dtype=np.float64)
    columns["pwm_frequency_hz"] = np.array([pwm_frequency_of(values) for values in rows], dtype=np.float64)
    columns["inverting"] = columns["configuration"] == "inverting"
    return channel.ChannelInputs(**{name: columns[name] for name in channel.ChannelInputs.__dataclass_fields__})


INDEPENDENT_VF_WARNING = (
    "yield drawn with every LED's forward voltage independent: LEDs of one reel share a forward-voltage bin, so "
    "for strings built from one reel this understates the spread between builds and overstates the yield"
)


def vf_options(values: Mapping[str, Any]) -> dict[str, Any]:
    """The Monte Carlo's forward-voltage model from completed values."""
    return {"vf_model": str(values["vf_model"]), "vf_bin_width_v": float(values["vf_bin_width_v"])}


@dataclass(frozen=True)
class Reviewed:
    """One channel through the core: validated once, then each stage evaluated once at nominal values and the
    checks once per corner; ``found`` is the Monte Carlo run (None without samples)."""

    inputs: channel.ChannelInputs
    worst: worst_case.WorstCase
    found: monte_carlo.Yield | None


def _nominal(values: Mapping[str, Any], samples: int, seed: int) -> tuple[channel.ChannelInputs, channel.ChannelReview]:
    """The channel validated once (with the run's limits) and reviewed at nominal values; raises DomainError
    naming the fields when it (or the run) is physically impossible."""
    inputs = channel_inputs(values)
    raise_violations(monte_carlo.validate_monte_carlo(inputs, max(samples, 1), seed, **vf_options(values)))
    return inputs, channel.review(inputs, validated=True)


def review_channel(values: Mapping[str, Any], samples: int, seed: int) -> Reviewed:
    """Raises DomainError naming the fields when the channel (or the run) is physically impossible."""
    inputs, nominal = _nominal(values, samples, seed)
    worst = worst_case.worst_case(inputs, nominal)
    found = monte_carlo.monte_carlo(inputs, samples, seed, nominal, **vf_options(values)) if samples else None
    return Reviewed(inputs, worst, found)


def _stage_results(outcome: Outcome) -> dict[str, Any]:
    return {
        name: to_json_value(values[0])
        for name, values in outcome.results.items()
        if values.ndim == 1 and not name.startswith("load_")
    }


# The part each thermal check judges, by the name's start (the review's roles; the string resistor has none).
_HEATED = {"led_": "led", "transistor_": "transistor", "resistor_": "string resistor"}


def _check_entry(nominal: Check, worst: worst_case.WorstCheck, stage: str) -> dict[str, Any] | None:
    limit = float(nominal.limit[0])
    if math.isnan(limit):
        return None  # does not apply to this design (e.g. no front stage, pin rating unknown)
    part = next((name for start, name in _HEATED.items() if nominal.name.startswith(start)), None)
    return {
        "name": nominal.name,
        "unit": CHECK_UNITS[nominal.name],
        "stage": stage,
        **({"part": part} if stage == "thermal" and part else {}),
        "ok": bool(worst.check.ok[0]),
        "value": to_json_value(float(nominal.value[0])),
        "limit": limit,
        "margin": to_json_value(float(nominal.margin()[0])),
        "detail": nominal.detail,
        "nominal_ok": bool(nominal.ok[0]),
        "worst_case": {
            "value": to_json_value(float(worst.check.value[0])),
            "limit": to_json_value(float(worst.check.limit[0])),
            "margin": to_json_value(float(worst.margin()[0])),
            "corner": worst.corner(0),
        },
    }


def yield_entry(found: monte_carlo.Yield) -> dict[str, Any]:
    """A Monte Carlo run as the review (and a channel search) answers it."""
    return {
        "fraction": found.fraction,
        "ci_low": found.ci_low,
        "ci_high": found.ci_high,
        "samples": found.samples,
        "seed": found.seed,
        "vf_model": found.vf_model,
        "vf_bin_width_v": found.vf_bin_width_v,
        "most_failing_check": found.most_failing_check,
        "failures": found.failures,
        "tightest_check": found.tightest_check,
        "least_margin": None if found.tightest_check is None else found.least_margins[found.tightest_check],
    }


def review_document(
    values: dict[str, Any], parts: list[dict[str, Any]], warnings: list[str], cautions: list[str]
) -> dict[str, Any]:
    """The review of one channel from completed values, as JSON-ready data; ``cautions`` are the standing ones of
    the parts used (a supply's kind), after the design's own."""
    done = review_channel(values, int(values["samples"]), int(values["seed"]))
    worst = done.worst
    nominal = worst.nominal
    stage_of = {check.name: stage for stage in STAGES for check in getattr(nominal, stage).checks}
    checks = [
        entry
        for check, wc in zip(nominal.checks, worst.checks, strict=True)
        if (entry := _check_entry(check, wc, stage_of[check.name])) is not None
    ]
    stages: dict[str, Any] = {stage: _stage_results(getattr(nominal, stage)) for stage in STAGES}
    if not bool(nominal.has_front_stage[0]):
        stages["front_stage"] = None
    if nominal.switch_kind == "mosfet":  # its section's numbers are at this current (an NPN's name it collector)
        stages["switch"]["drain_current_max_a"] = to_json_value(float(nominal.collector_current_max_a[0]))
    stages["supply"]["max_duty_cycle"] = to_json_value(float(nominal.max_duty_cycle[0]))
    usable = usable_runtime.usable_runtime(done.inputs, nominal)
    stages["supply"]["stop_v"] = to_json_value(float(usable.stop_v[0]))
    stages["supply"]["usable_runtime_h"] = to_json_value(float(usable.usable_runtime_h[0]))
    max_ambient = float(thermal_limit.max_ambient(done.inputs, nominal)[0])
    stages["thermal"]["max_ambient_c"] = to_json_value(max_ambient)
    notes = row_notices(nominal.warnings, 0)
    if not math.isnan(usable.usable_runtime_h[0]):
        notes.append(
            "usable_runtime_h lasts until the falling battery voltage reaches stop_v, below which the design "
            "fails its checks; it assumes the voltage falls linearly with delivered charge from fresh to end of "
            "discharge (a simplification), beside runtime_h from the capacity alone"
        )
    independent = done.found is not None and done.found.vf_model == "independent"
    optimistic = [INDEPENDENT_VF_WARNING] if independent else []
    document: dict[str, Any] = {
        "review": channel.NAME,
        "inputs": {k: to_json_value(v) for k, v in values.items()},
        "parts": parts,
        "verdict": "pass" if all(c["ok"] for c in checks) else "fail",
        "failing": [c["name"] for c in checks if not c["ok"]],
        "failing_nominal": [c["name"] for c in checks if not c["nominal_ok"]],
        "max_duty_cycle": to_json_value(float(nominal.max_duty_cycle[0])),
        "max_ambient_c": to_json_value(max_ambient),
        "stages": stages,
        "checks": checks,
        "yield": None if done.found is None else yield_entry(done.found),
        "warnings": warnings + notes + optimistic,
        "cautions": row_notices(nominal.cautions, 0) + cautions,
        "safety": SAFETY_LINE,
        "bill_of_materials": bill_of_materials(
            values, parts, stages, float(channel_stages.resistor_tolerance(done.inputs)[0])
        ),
    }
    document["fingerprint"] = fingerprint(channel.NAME, channel.VERSION, document["inputs"], parts)
    return document


def without_band(body: Mapping[str, Any], resolved: Resolved) -> Resolved:
    """A supply_tolerance given explicitly wins over a supply part's band."""
    if "supply_tolerance" in body and not any(name in body for name in _BAND):
        for name in _BAND:
            resolved.values.pop(name, None)
    return resolved


def _resolve(database: Database, body: Mapping[str, Any]) -> Resolved:
    """The parts resolved, the band rule applied."""
    return without_band(body, resolve_parts(database, CHANNEL_INPUTS.roles, body, ALTERNATIVE_ROLES))


def run_review(database: Database, body: Mapping[str, Any]) -> dict[str, Any]:
    """The review of one channel request (values in SI, part references by role name), as JSON-ready data."""
    resolved = _resolve(database, body)
    values = complete_channel(resolved.values)
    return review_document(values, resolved.parts, resolved.warnings, resolved.cautions)


@dataclass(frozen=True)
class Distribution:
    """The Monte Carlo values of one check, with its limit. ``relative``: the limit varies per build (the hfe of
    each transistor, the supply of each build), so the values are each build's value over its own limit and the
    limit is 1."""

    check: str
    values: FloatArray
    limit: float
    unit: str
    relative: bool


def distribution(database: Database, body: Mapping[str, Any], check: str | None = None) -> Distribution:
    """The Monte Carlo distribution of ``check``, else of the check that fails most often, else (every build
    passes) of the tightest check, the one whose least margin is smallest (samples 0: the default count)."""
    resolved = _resolve(database, body)
    values = complete_channel(resolved.values)
    samples = int(values["samples"]) or monte_carlo.DEFAULT_SAMPLES
    seed = int(values["seed"])
    if check is not None and check not in CHECK_UNITS:
        raise InvalidInput.on(
            "check", f"{check!r} is not a check of the channel review; one of {', '.join(CHECK_UNITS)}"
        )
    inputs, nominal = _nominal(values, samples, seed)
    found = monte_carlo.monte_carlo(inputs, samples, seed, nominal, **vf_options(values), plot=check)
    name, drawn, limits = found.plotted_check, found.plotted_values, found.plotted_limits
    if name is None or drawn is None or limits is None or not np.isfinite(limits).all():
        message = f"the check {check} does not apply to this design" if check else "no check applies to this design"
        raise InvalidInput.on("check", message)
    if np.ptp(limits) > 1e-9 * np.abs(limits).max():
        return Distribution(name, drawn / limits, 1.0, "", relative=True)
    return Distribution(name, drawn, float(limits[0]), CHECK_UNITS[name], relative=False)


def heat_of(database: Database, body: Mapping[str, Any]) -> HeatCurves:
    """Each heated part's temperature against the ambient for the request's design, held as reviewed."""
    values = complete_channel(_resolve(database, body).values)
    inputs, nominal = _nominal(values, 1, int(values["seed"]))
    return heat_curves(inputs, nominal)
