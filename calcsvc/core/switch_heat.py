"""Heat in one NPN switch design (``bjt_switch``): its junction and derated power limit at ``ambient_c``, with
the channel review's models and check names (``channel_thermal``).

Thermal Ohm's law (``thermal``): Tj = Ta + P·Rθ, P the switch's average dissipation. Rθ is
``rth_ja_k_per_w`` as given, else (Tj,max − 25 °C)/P_rated (the rating at 25 °C without a heat sink); with
``heatsink_k_per_w``, Rθjc + the sink's figure. The derated limit is (Tj,max − Ta)/Rθ, capped at the rating
without a heat sink, so at 25 °C in free air it is the rating itself.

Checks: ``transistor_junction_temperature`` (20 K below ``tj_max_c``, common practice) and
``transistor_derated_power``.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from calcsvc.core import thermal
from calcsvc.core.outcome import Check, FloatArray, Notice, Outcome, Violation, add_notice, first_bad, require

if TYPE_CHECKING:  # ``bjt_switch`` builds on this module: its inputs type is for the annotations only
    from calcsvc.core.bjt_switch_inputs import BjtSwitchInputs
    from calcsvc.core.channel_inputs import ChannelInputs

ABSOLUTE_ZERO_C = -273.15
OPTIONAL = ("rth_ja_k_per_w", "rth_jc_k_per_w", "heatsink_k_per_w")
DETAILS = {
    "transistor_junction_temperature": "The transistor's junction (Ta + P·Rθ) must stay 20 K below its tj_max_c "
    "(common practice).",
    "transistor_derated_power": "The transistor's average dissipation must not exceed (tj_max_c − Ta)/Rθ, its rating "
    "derated to the ambient.",
}


def validate(i: BjtSwitchInputs | ChannelInputs) -> list[Violation]:
    """The thermal inputs' preconditions (the channel review's too: its inputs carry the same names); never
    raises."""
    v: list[Violation] = []
    with np.errstate(invalid="ignore"):
        for name in ("ambient_c", "tj_max_c"):
            x = getattr(i, name)
            require(v, ~np.isfinite(x), name, f"{name} must be a finite number (got {first_bad(x, ~np.isfinite(x))})")
        bad = i.ambient_c <= ABSOLUTE_ZERO_C
        require(v, bad, "ambient_c", f"ambient_c ({first_bad(i.ambient_c, bad)} °C) must lie above absolute zero")
        bad = i.tj_max_c <= thermal.REFERENCE_C
        message = "must exceed 25 °C, where ratings are stated"
        require(v, bad, "tj_max_c", f"tj_max_c ({first_bad(i.tj_max_c, bad)} °C) {message}")
        for name in OPTIONAL:
            x = getattr(i, name)
            bad = np.isinf(x) | (x < 0)
            require(v, bad, name, f"{name} ({first_bad(x, bad)} K/W) must be a finite thermal resistance of at least 0")
        bad = ~np.isnan(i.heatsink_k_per_w) & np.isnan(i.rth_jc_k_per_w)
        require(v, bad, "rth_jc_k_per_w", "rth_jc_k_per_w (junction to case) is required with heatsink_k_per_w")
    return v


def outcome(i: BjtSwitchInputs, power_w: FloatArray) -> Outcome:
    """The junction, the derated limit and the two checks at average dissipation ``power_w``."""
    rth, cap = thermal.transistor_rth(i.tj_max_c, i.power_max_w, i.rth_ja_k_per_w, i.rth_jc_k_per_w, i.heatsink_k_per_w)
    junction = thermal.junction_temperature(i.ambient_c, power_w, rth)
    junction_limit = i.tj_max_c - thermal.JUNCTION_MARGIN_K
    derated = thermal.derated_power(i.tj_max_c, i.ambient_c, rth, cap)
    checks = [
        Check("transistor_junction_temperature", junction <= junction_limit, junction, junction_limit, "max",
              DETAILS["transistor_junction_temperature"]),
        Check("transistor_derated_power", power_w <= derated, power_w, derated, "max",
              DETAILS["transistor_derated_power"]),
    ]  # fmt: skip
    results = {"transistor_rth_k_per_w": rth, "junction_c": junction, "derated_power_limit_w": derated}
    return Outcome(results=results, checks=checks, cautions=_cautions(i, junction, power_w > derated))


def _cautions(i: BjtSwitchInputs, junction_c: FloatArray, over: np.ndarray) -> list[Notice]:
    found: list[Notice] = []
    hot, warm = junction_c > thermal.TOUCH_SAFE_C, i.ambient_c >= thermal.WARM_ENCLOSURE_C
    add_notice(
        found,
        hot,
        "Hot surface: the transistor runs above 60 °C at this ambient; keep it clear of fingers, plastics, wiring "
        "and plant material.",
    )
    add_notice(
        found,
        over,
        "The transistor dissipates more than its rating derated to this ambient: it will overheat and can fail.",
    )
    add_notice(found, warm, thermal.WARM_CAUTION)
    add_notice(found, hot | warm | over, thermal.ASSUMPTIONS_CAUTION)  # wherever a temperature is relied upon
    return found
