"""Heat in parts: thermal Ohm's law, derating curves and the LED string's electro-thermal operating point.

Every function takes and returns arrays that broadcast against each other, so single rows, batches, the
worst-case corners and the Monte Carlo share them. Temperatures in °C, thermal resistances in K/W.

Thermal Ohm's law (any heat-conduction text, e.g. Sedra & Smith, *Microelectronic Circuits*, the section on
power dissipation of transistors)
    Tj = Ta + P·Rθ. A part rated ``P_rated`` at 25 °C ambient without a heat sink reaches Tj,max exactly
    there, so Rθja = (Tj,max − 25 °C)/P_rated, and its derated limit at Ta is (Tj,max − Ta)/Rθja, never above
    the rating (a datasheet's curve is flat below 25 °C). With a heat sink Rθ = Rθjc + Rθca (the sink's
    figure, interface included) and the limit is not capped by the free-air rating.

Fixed resistors (IEC 60115-1, the usual derating curve; from memory)
    Full rated power up to the rated ambient (70 °C), falling linearly to zero at the zero-power temperature
    (155 °C). The curve implies the hot spot: at rated power and 70 °C the element sits at 155 °C, so
    T_hot = Ta + P·(155 − 70)/P_rated.

LED current derating (the shape datasheets draw; common practice)
    Where a part gives a knee, its maximum current is full up to the knee ambient and falls linearly to zero
    at its Tj,max.

The coupled LED point
    A string of N LEDs with series resistor R across ``headroom_v`` (supply less switch drop):
    Vf(T) = Vf25 + k·(Tj − 25) per LED (k < 0: about −2 mV/K, from memory), I(T) = max(H − N·Vf(T), 0)/R,
    P(T) = Vf(T)·I(T) per LED and Tj = Ta + Rθ·P(Tj). With g(T) = T − Ta − Rθ·P(T), g(Ta) ≤ 0; where
    g(Tj,max) < 0 there is no stable point below Tj,max: the string runs away (reported, not solved). Where the
    string conducts (N·Vf(T) < H), g is a convex quadratic in T (Vf is linear in T), so the point, the largest
    root of g in [Ta, Tj,max], is its larger root in closed form (written without cancellation) for all points
    at once; a string still dark there sits at Ta. ``iterations`` counts that one solve (0 where the string
    runs away); the tests hold the point against scipy's brentq.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from calcsvc.core.outcome import BoolArray, FloatArray

REFERENCE_C = 25.0  # the ambient at which ratings and forward voltages are stated
JUNCTION_MARGIN_K = 20.0  # keep junctions this far below Tj,max (common practice: 20–25 K)
RESISTOR_RATED_TO_C = 70.0  # IEC 60115-1 derating curve (from memory)
RESISTOR_ZERO_POWER_C = 155.0  # IEC 60115-1 derating curve (from memory)
TOUCH_SAFE_C = 60.0  # surfaces above this burn on lasting contact (common practice)
WARM_ENCLOSURE_C = 40.0  # an enclosure this warm needs its ventilation designed (common practice)
ASSUMPTIONS_CAUTION = (
    "Temperatures assume still air, each part's stated thermal resistance and derating from memory-level "
    "typical curves (resistors: IEC 60115-1); the part's datasheet, local electrical codes and a licensed "
    "practitioner's judgement take precedence."
)
WARM_CAUTION = (
    "A warm enclosure (40 °C or more): design its ventilation, keep it out of direct sun, and measure the "
    "parts' temperatures in the closed enclosure at the hottest expected day before relying on these figures."
)
RUNAWAY_CAUTION = (
    "Thermal runaway: the LED string has no stable temperature below its maximum; it will overheat and fail. "
    "Give the resistor more headroom or heat-sink the LEDs."
)


def junction_temperature(ambient_c: npt.ArrayLike, power_w: npt.ArrayLike, rth_k_per_w: npt.ArrayLike) -> FloatArray:
    """Thermal Ohm's law: Tj = Ta + P·Rθ."""
    return np.asarray(ambient_c, dtype=np.float64) + np.asarray(power_w) * np.asarray(rth_k_per_w)


def rth_from_rating(tj_max_c: npt.ArrayLike, power_rated_w: npt.ArrayLike) -> FloatArray:
    """Rθja implied by a power rating at 25 °C ambient without a heat sink: (Tj,max − 25)/P_rated."""
    return (np.asarray(tj_max_c, dtype=np.float64) - REFERENCE_C) / np.asarray(power_rated_w)


def derated_power(
    tj_max_c: npt.ArrayLike, ambient_c: npt.ArrayLike, rth_k_per_w: npt.ArrayLike, cap_w: npt.ArrayLike = np.inf
) -> FloatArray:
    """The largest dissipation keeping the junction at Tj,max at this ambient, (Tj,max − Ta)/Rθ, in [0, cap]."""
    with np.errstate(divide="ignore", invalid="ignore"):
        limit = (np.asarray(tj_max_c, dtype=np.float64) - np.asarray(ambient_c)) / np.asarray(rth_k_per_w)
    return np.clip(limit, 0.0, cap_w)


def transistor_rth(
    tj_max_c: FloatArray,
    power_max_w: FloatArray,
    rth_ja_k_per_w: FloatArray,
    rth_jc_k_per_w: FloatArray,
    heatsink_k_per_w: FloatArray,
) -> tuple[FloatArray, FloatArray]:
    """A transistor's junction-to-ambient Rθ and the cap on its derated limit: Rθjc + the sink's figure and no
    cap with a heat sink (``heatsink_k_per_w`` given), else Rθja as given or from the rating at 25 °C, capped
    at the rating."""
    sink = ~np.isnan(heatsink_k_per_w)
    free_air = np.where(np.isnan(rth_ja_k_per_w), rth_from_rating(tj_max_c, power_max_w), rth_ja_k_per_w)
    return np.where(sink, rth_jc_k_per_w + heatsink_k_per_w, free_air), np.where(sink, np.inf, power_max_w)


def resistor_derating(
    ambient_c: npt.ArrayLike,
    rated_to_c: npt.ArrayLike = RESISTOR_RATED_TO_C,
    zero_power_c: npt.ArrayLike = RESISTOR_ZERO_POWER_C,
) -> FloatArray:
    """The fraction of a fixed resistor's rated power allowed at this ambient (1 up to ``rated_to_c``, then
    linear to 0 at ``zero_power_c``)."""
    zero = np.asarray(zero_power_c, dtype=np.float64)
    return np.clip((zero - np.asarray(ambient_c)) / (zero - np.asarray(rated_to_c)), 0.0, 1.0)


def resistor_hot_spot(
    ambient_c: npt.ArrayLike,
    power_w: npt.ArrayLike,
    rating_w: npt.ArrayLike,
    rated_to_c: npt.ArrayLike = RESISTOR_RATED_TO_C,
    zero_power_c: npt.ArrayLike = RESISTOR_ZERO_POWER_C,
) -> FloatArray:
    """The hot-spot temperature the derating curve implies: Ta + P·(zero − rated_to)/P_rated."""
    rth = (np.asarray(zero_power_c, dtype=np.float64) - np.asarray(rated_to_c)) / np.asarray(rating_w)
    return junction_temperature(ambient_c, power_w, rth)


def current_derating(ambient_c: npt.ArrayLike, knee_c: npt.ArrayLike, tj_max_c: npt.ArrayLike) -> FloatArray:
    """The fraction of an LED's maximum current allowed at this ambient: 1 up to the knee, linear to 0 at
    Tj,max; 1 where no knee is given (NaN)."""
    knee = np.asarray(knee_c, dtype=np.float64)
    if np.isnan(knee).all():  # no part gives a knee (the usual case): no curve to evaluate
        return np.ones(np.broadcast_shapes(np.shape(ambient_c), knee.shape, np.shape(tj_max_c)))
    with np.errstate(divide="ignore", invalid="ignore"):
        share = np.clip((np.asarray(tj_max_c) - np.asarray(ambient_c)) / (np.asarray(tj_max_c) - knee), 0.0, 1.0)
    return np.where(np.isnan(knee), 1.0, share)


@dataclass(frozen=True)
class LedPoint:
    """The coupled operating point of LED strings; arrays in the broadcast shape of the inputs."""

    junction_c: FloatArray  # NaN where the string runs away
    string_vf_v: FloatArray  # the string's forward voltage at its junction temperature
    current_a: FloatArray
    led_power_w: FloatArray  # per LED
    iterations: npt.NDArray[np.int64]
    runaway: BoolArray  # no stable point at or below Tj,max
    heating_at_max_c: FloatArray  # Ta + Rθ·P(Tj,max): where heat at Tj,max would drive the junction


def led_operating_point(
    headroom_v: npt.ArrayLike,
    string_vf_v: npt.ArrayLike,
    resistor_ohm: npt.ArrayLike,
    leds_in_series: npt.ArrayLike,
    vf_tempco_v_per_k: npt.ArrayLike,
    rth_k_per_w: npt.ArrayLike,
    ambient_c: npt.ArrayLike,
    tj_max_c: npt.ArrayLike,
) -> LedPoint:
    """Solve Tj = Ta + Rθ·Vf(Tj)·I(Tj) for every point at once (model: module docstring).

    ``string_vf_v`` is the string's forward voltage at 25 °C; ``rth_k_per_w`` is one LED's junction to ambient.
    """
    head, vf25, r, n, k, rth, ta, tmax = (
        np.asarray(x, dtype=np.float64)
        for x in (headroom_v, string_vf_v, resistor_ohm, leds_in_series, vf_tempco_v_per_k, rth_k_per_w, ambient_c,
                  tj_max_c)
    )  # fmt: skip
    string_k = n * k

    def at(t: FloatArray) -> tuple[FloatArray, FloatArray]:
        """The string's forward voltage and current at junction temperature ``t``."""
        vf = vf25 + string_k * (t - REFERENCE_C)
        return vf, np.maximum(head - vf, 0.0) / r

    vf_top, current_top = at(tmax)
    heating = ta + rth * vf_top / n * current_top
    runaway = heating > tmax
    del vf_top, current_top  # a batch's memory peaks below: let these go first
    t = np.where(runaway, tmax, _conducting_root(head, vf25, r, n, string_k, rth, ta, tmax))
    vf, current = at(t)
    return LedPoint(
        junction_c=np.where(runaway, np.nan, t),
        string_vf_v=vf,
        current_a=current,
        led_power_w=vf / n * current,
        iterations=(~runaway).astype(np.int64),
        runaway=runaway,
        heating_at_max_c=heating,
    )


def _conducting_root(
    head: FloatArray,
    vf25: FloatArray,
    r: FloatArray,
    n: FloatArray,
    string_k: FloatArray,
    rth: FloatArray,
    ta: FloatArray,
    tmax: FloatArray,
) -> FloatArray:
    """The largest root of g in [Ta, Tj,max] where the string does not run away: with u = T − 25, s = Vf25 +
    N·k·u the string's drop and c = Rθ/(N·R), g = c·(N·k)²·u² + (1 − c·N·k·(H − 2·Vf25))·u + 25 − Ta −
    c·Vf25·(H − Vf25) while s < H; Ta where the string is dark at Ta and no conducting root lies below Tj,max."""
    # In place where an array is not needed again: at 100,000 rows each of these is 4 MiB (five points a row).
    shape = np.broadcast(head, vf25, r, n, string_k, rth, ta, tmax).shape
    c = np.divide(rth, n * r, out=np.empty(shape))
    a1 = np.subtract(head, 2.0 * vf25, out=np.empty(shape))
    a1 *= string_k
    a1 *= c
    np.subtract(1.0, a1, out=a1)
    a0 = np.subtract(head, vf25, out=np.empty(shape))
    a0 *= vf25
    a0 *= c
    np.subtract(REFERENCE_C - ta, a0, out=a0)
    a2 = c
    a2 *= string_k
    a2 *= string_k
    with np.errstate(divide="ignore", invalid="ignore"):
        root_d = a2 * a0
        root_d *= -4.0
        root_d += a1 * a1
        np.sqrt(root_d, out=root_d)
        # Each form of the larger root where it adds numbers of one sign (no cancellation).
        u = a1 + root_d
        np.divide(a0, u, out=u)
        u *= -2.0
        root_d -= a1
        a2 *= 2.0
        np.divide(root_d, a2, out=root_d)
        u = np.where(a1 > 0.0, u, root_d)
    t = REFERENCE_C + u
    conducting = (vf25 + string_k * u < head) & (t >= ta) & (t <= tmax)
    return np.where(conducting, t, ta)
