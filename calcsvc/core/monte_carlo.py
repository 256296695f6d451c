"""Monte Carlo yield of a reviewed LED channel: the share of built channels that pass every check.

The resistors are chosen once, at nominal values, by ``channel.review``; every sample is evaluated with them
held fixed, exactly as the worst-case corners are (calcsvc.core.tolerance, whose docstring states the model).

``np.random.default_rng(seed)`` draws, per sample: the supply uniform within its band (a battery: anywhere
between end of discharge and fresh, as over its life); the LEDs' forward voltages by ``vf_model`` (below; each
string's drop is the sum of its own LEDs' draws); each
string's resistor and the base (or gate) resistor independently uniform within their tolerance; an NPN's
gain log-uniform between hfe_min and hfe_max (gain spreads are multiplicative); a MOSFET's on-resistance uniform
from none to Rds_max (``channel_mosfet``: a part states only its largest, so a build may lie anywhere below).
The other channels on the supply are taken as copies of the sampled one, which overstates the spread of the
total supply current (conservative). Every build is evaluated at both ends of the ambient range
(``channel_thermal``) and passes only if it passes at both. Each sample stays inside the corners' box, so a
design that passes the worst case yields exactly 1. The passing fraction carries a Wilson score interval (Wilson 1927).

Forward voltage (``vf_model``)
    ``one_reel`` (the default): the channel is built from one reel, and the LEDs of a reel are sorted into
    one forward-voltage bin (common practice of LED makers). Per sample the reel's bin, ``vf_bin_width_v``
    wide, lies uniformly within [vf_min_v, vf_max_v] and each LED is uniform within that bin, so every
    string of a build sits near the same end of the range and builds differ by up to the whole range times
    the LEDs in series. The default bin width, 0.1 V, is a typical forward-voltage bin step (from memory);
    a narrower bin is the more pessimistic assumption. A bin at least as wide as the range is no binning.
    ``independent``: every LED uniform in [vf_min_v, vf_max_v] on its own, as LEDs mixed from many reels;
    the spread of a string's drop is then only √N times one LED's, so for strings from one reel this model
    understates the spread between builds and overstates the yield.
    Either way every draw stays within [vf_min_v, vf_max_v].
Samples are drawn in chunks of about a million LED draws, so the same seed, inputs and sample count
always give the same result.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from calcsvc.core import channel_mosfet
from calcsvc.core.channel import ChannelInputs, ChannelReview, review, validate
from calcsvc.core.channel_stages import resistor_tolerance, supply_band
from calcsvc.core.channel_thermal import ambient_range
from calcsvc.core.corners import Point, hfe_max
from calcsvc.core.outcome import Check, FloatArray, Violation, raise_violations, require, row_count
from calcsvc.core.tolerance import evaluate_at

Z_95 = 1.959963984540054  # standard normal quantile for a two-sided 95 % interval
DEFAULT_SAMPLES = 10_000
MAX_SAMPLES = 1_000_000
MAX_LED_DRAWS = 100_000_000  # samples × strings × leds_in_series: bounds the run time (≈2 s measured at the cap)
_CHUNK_DRAWS = 1 << 20  # LED draws per chunk: bounds memory
VF_MODELS = ("one_reel", "independent")
DEFAULT_VF_MODEL = "one_reel"
DEFAULT_VF_BIN_WIDTH_V = 0.1  # a typical forward-voltage bin step (from memory)
MAX_VF_BIN_WIDTH_V = 10.0


def wilson_interval(successes: npt.ArrayLike, trials: npt.ArrayLike, z: float = Z_95) -> tuple[FloatArray, FloatArray]:
    """Wilson score interval for a binomial proportion (E. B. Wilson, JASA 22, 1927), without continuity
    correction; broadcasts. The exact interval always contains successes/trials; the bounds are kept there
    against rounding at 0 and 1."""
    k = np.asarray(successes, dtype=np.float64)
    n = np.asarray(trials, dtype=np.float64)
    p = k / n
    z2n = z * z / n
    centre = (p + z2n / 2.0) / (1.0 + z2n)
    half = z / (1.0 + z2n) * np.sqrt(p * (1.0 - p) / n + z2n / (4.0 * n))
    return np.clip(np.minimum(centre - half, p), 0.0, 1.0), np.clip(np.maximum(centre + half, p), 0.0, 1.0)


@dataclass(frozen=True)
class Yield:
    """Monte Carlo result for one row. ``failures`` counts the failing samples per check (every check, in
    the review's order). The per-sample values and limits of the most-failing check (most failures; ties:
    the first in order) are kept; all three are None when every sample passes. ``least_margins``: each check's
    smallest margin over the builds (a fraction of its limit; checks that do not apply are left out), and
    ``tightest_check`` the check whose least margin is smallest, the one that came closest to failing.
    ``plotted_*``: the per-sample values and limits of the check asked for by ``plot``, else of the most
    failing check, else of the tightest one, so a passing design has a distribution to show too."""

    samples: int
    seed: int
    vf_model: str
    vf_bin_width_v: float | None  # the bin width used; None for independent draws
    passed: int
    fraction: float
    ci_low: float
    ci_high: float
    failures: dict[str, int]
    most_failing_check: str | None
    most_failing_values: FloatArray | None
    most_failing_limits: FloatArray | None
    least_margins: dict[str, float]
    tightest_check: str | None
    plotted_check: str | None
    plotted_values: FloatArray | None
    plotted_limits: FloatArray | None


def _whole(x: object) -> bool:
    return isinstance(x, int | np.integer) and not isinstance(x, bool)


def validate_monte_carlo(
    inputs: ChannelInputs,
    samples: int,
    seed: int,
    vf_model: str = DEFAULT_VF_MODEL,
    vf_bin_width_v: float = DEFAULT_VF_BIN_WIDTH_V,
) -> list[Violation]:
    """``channel.validate`` plus the run's own limits (``run_limits``); never raises."""
    return run_limits(inputs, samples, seed, validate(inputs), vf_model, vf_bin_width_v)


def run_limits(
    inputs: ChannelInputs,
    samples: int,
    seed: int,
    found: list[Violation] | None = None,
    vf_model: str = DEFAULT_VF_MODEL,
    vf_bin_width_v: float = DEFAULT_VF_BIN_WIDTH_V,
) -> list[Violation]:
    """The run's own limits (fields ``samples`` and ``seed``, checked to be whole numbers whatever their type;
    ``vf_model`` and ``vf_bin_width_v``) added to ``found``, the channel's violations (the LED-draw bound
    applies only to a valid channel); never raises."""
    v = [] if found is None else found
    every = np.ones(row_count(inputs), dtype=bool)
    if vf_model not in VF_MODELS:
        require(v, every, "vf_model", f"vf_model ({vf_model!r}) must be one of {', '.join(VF_MODELS)}")
    width_ok = isinstance(vf_bin_width_v, int | float) and not isinstance(vf_bin_width_v, bool)
    if not width_ok or not 0.0 <= vf_bin_width_v <= MAX_VF_BIN_WIDTH_V:
        message = f"vf_bin_width_v ({vf_bin_width_v!r}) must be from 0 to {MAX_VF_BIN_WIDTH_V:g} V"
        require(v, every, "vf_bin_width_v", message)
    if not _whole(samples) or not 1 <= samples <= MAX_SAMPLES:
        require(v, every, "samples", f"samples ({samples!r}) must be a whole number from 1 to {MAX_SAMPLES:,}")
    elif not v:
        draws = samples * inputs.strings * inputs.leds_in_series
        bad = draws > MAX_LED_DRAWS
        if bad.any():
            k = int(np.argmax(bad))
            per_sample = int(inputs.strings[k] * inputs.leds_in_series[k])
            require(
                v,
                bad,
                "samples",
                f"samples ({samples}) × strings × leds_in_series ({per_sample}) LED draws exceed "
                f"{MAX_LED_DRAWS:,}: use at most {MAX_LED_DRAWS // per_sample:,} samples for this design",
            )
    if not _whole(seed) or seed < 0:
        require(v, every, "seed", f"seed ({seed!r}) must be a whole number of at least 0")
    return v


def forward_voltages(
    rng: np.random.Generator,
    vf_min_v: float,
    vf_max_v: float,
    shape: tuple[int, int, int],
    vf_model: str = DEFAULT_VF_MODEL,
    vf_bin_width_v: float = DEFAULT_VF_BIN_WIDTH_V,
) -> FloatArray:
    """Every LED's forward voltage, shape ``(samples, strings, leds_in_series)``, by ``vf_model`` (module
    docstring); one reel per sample."""
    if vf_model == "independent":
        return rng.uniform(vf_min_v, vf_max_v, shape)
    width = min(vf_bin_width_v, vf_max_v - vf_min_v)
    bin_low = rng.uniform(vf_min_v, vf_max_v - width, (shape[0], 1, 1))
    return bin_low + width * rng.uniform(0.0, 1.0, shape)


def _draw(
    inputs: ChannelInputs,
    nominal: ChannelReview,
    rng: np.random.Generator,
    count: int,
    vf_model: str,
    vf_bin_width_v: float,
) -> Point:
    """``count`` samples of the single row's toleranced values, drawn in a fixed order."""
    i = inputs
    strings, leds = int(i.strings[0]), int(i.leds_in_series[0])
    tol = resistor_tolerance(i)[0]

    def spread(nominal_value: float, fraction: float, shape: tuple[int, ...]) -> FloatArray:
        return nominal_value * (1.0 + fraction * rng.uniform(-1.0, 1.0, shape))

    low, high = supply_band(i)
    supply = rng.uniform(low[0], high[0], (1, count))
    drawn = forward_voltages(rng, i.vf_min_v[0], i.vf_max_v[0], (count, strings, leds), vf_model, vf_bin_width_v)
    vf = drawn.sum(axis=-1)[None]
    led_r = spread(nominal.led_string.results["resistor_ohm"][0], tol, (1, count, strings))
    if nominal.switch_kind == "mosfet":
        drive_r = spread(nominal.switch.results["rg_ohm"][0], tol, (1, count))
        switch_value = rng.uniform(0.0, channel_mosfet.rds_max_of(i, nominal.switch)[0], (1, count))
    else:
        drive_r = spread(nominal.switch.results["rb_ohm"][0], tol, (1, count))
        switch_value = np.exp(rng.uniform(np.log(i.hfe_min[0]), np.log(hfe_max(i)[0]), (1, count)))
    cold, _ = ambient_range(i)
    return Point((count,), supply, vf, led_r, drive_r, switch_value, cold.reshape(1, 1))


def _over_ambient(inputs: ChannelInputs, nominal: ChannelReview, at: Point) -> list[Check]:
    """Every check of the builds at ``at`` at both ends of the ambient range, each at the end worse for it."""
    cold, hot = ambient_range(inputs)
    found = evaluate_at(inputs, nominal, at)
    if hot[0] == cold[0]:
        return found
    warm = evaluate_at(inputs, nominal, dataclasses.replace(at, ambient_c=hot.reshape(1, 1)))
    both = []
    for a, b in zip(found, warm, strict=True):
        a_ok, a_value, a_limit = _every_sample(a, at.points[0])
        b_ok, b_value, b_limit = _every_sample(b, at.points[0])
        with np.errstate(invalid="ignore"):
            hotter = np.nan_to_num(b.margin(), nan=np.inf) < np.nan_to_num(a.margin(), nan=np.inf)
        hotter = np.broadcast_to(hotter, a_ok.shape)
        pick = np.where(hotter, b_value, a_value), np.where(hotter, b_limit, a_limit)
        both.append(Check(a.name, a_ok & b_ok, *pick, a.sense, a.detail))
    return both


def _every_sample(check: Check, count: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """ok, value and limit of a one-row check at each of ``count`` samples, shape ``(1, count)``."""
    shape = (1, count)
    return np.broadcast_to(check.ok, shape), np.broadcast_to(check.value, shape), np.broadcast_to(check.limit, shape)


def monte_carlo(
    inputs: ChannelInputs,
    samples: int = DEFAULT_SAMPLES,
    seed: int = 0,
    nominal: ChannelReview | None = None,
    vf_model: str = DEFAULT_VF_MODEL,
    vf_bin_width_v: float = DEFAULT_VF_BIN_WIDTH_V,
    plot: str | None = None,
) -> Yield:
    """Yield of one row's design over ``samples`` random builds (model: module docstring); ``plot`` names the
    check whose per-build values to keep (ValueError when the review has no such check).

    ``inputs`` must hold exactly one row (ValueError otherwise). Raises DomainError when
    ``validate_monte_carlo`` finds a violation; ``nominal``, the review of ``inputs`` when the caller has made
    it already, leaves only the run's own limits to check.
    """
    if row_count(inputs) != 1:
        raise ValueError("monte_carlo reviews exactly one row")
    if nominal is None:
        raise_violations(validate_monte_carlo(inputs, samples, seed, vf_model, vf_bin_width_v))
        nominal = review(inputs, validated=True)
    else:
        raise_violations(run_limits(inputs, samples, seed, None, vf_model, vf_bin_width_v))
    rng = np.random.default_rng(seed)
    chunk = max(1, _CHUNK_DRAWS // int(inputs.strings[0] * inputs.leds_in_series[0]))

    parts: list[list[Check]] = []
    for start in range(0, samples, chunk):
        count = min(chunk, samples - start)
        checks = _over_ambient(inputs, nominal, _draw(inputs, nominal, rng, count, vf_model, vf_bin_width_v))
        parts.append([Check(c.name, *_every_sample(c, count), c.sense, c.detail) for c in checks])

    names = [c.name for c in nominal.checks]
    ok = {name: np.concatenate([p[j].ok[0] for p in parts]) for j, name in enumerate(names)}
    passing = np.logical_and.reduce(list(ok.values()))
    failures = {name: int(samples - np.count_nonzero(ok[name])) for name in names}
    passed = int(np.count_nonzero(passing))
    low, high = wilson_interval(passed, samples)

    if plot is not None and plot not in names:
        raise ValueError(f"no check named {plot!r}")

    def drawn(j: int) -> tuple[FloatArray, FloatArray]:
        return np.concatenate([p[j].value[0] for p in parts]), np.concatenate([p[j].limit[0] for p in parts])

    least: dict[str, float] = {}
    for j, name in enumerate(names):
        margins = np.concatenate([p[j].margin()[0] for p in parts])
        if np.isfinite(margins).any():
            least[name] = float(np.nanmin(margins))
    tightest = min(least, key=lambda name: least[name]) if least else None

    worst = max(range(len(names)), key=lambda j: (failures[names[j]], -j))
    most = names[worst] if failures[names[worst]] else None
    values = limits = None
    if most is not None:
        values, limits = drawn(worst)
    shown = plot or most or tightest
    shown_values, shown_limits = drawn(names.index(shown)) if shown is not None else (None, None)
    return Yield(
        samples=samples,
        seed=seed,
        vf_model=vf_model,
        vf_bin_width_v=float(vf_bin_width_v) if vf_model == "one_reel" else None,
        passed=passed,
        fraction=passed / samples,
        ci_low=float(low),
        ci_high=float(high),
        failures=failures,
        most_failing_check=most,
        most_failing_values=values,
        most_failing_limits=limits,
        least_margins=least,
        tightest_check=tightest,
        plotted_check=shown,
        plotted_values=shown_values,
        plotted_limits=shown_limits,
    )
