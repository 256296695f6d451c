"""Whole-channel design review: drive pin → NPN or N-MOSFET low-side switch → LED strings → shared supply
("channel-review").

A MOSFET switch (its own inputs given instead of the NPN's, ``channel_mosfet``) takes the NPN's place in steps 1,
2 and 5: the strings see its on-resistance in their return instead of a fixed Vce(sat), the switch section is
``mosfet_switch`` at Ic_max (its heat checks left to the thermal stage), and the thermal stage uses its
self-heated dissipation. A review takes rows of one switch kind.

Circuit
    A logic pin (``drive_high_v``/``drive_low_v``, sourcing at most ``source_current_max_a``) drives an NPN
    low-side switch through a base resistor Rb. The collector switches ``strings`` parallel strings of
    ``leds_in_series`` LEDs, each string with its own series resistor, from a supply of ``supply_v``
    (±``supply_tolerance``, rated ``current_max_a``). ``channels`` identical channels share that supply, each
    PWM-switched at ``duty_cycle``. Optionally (per row: ``gbw_hz`` given) an op-amp front stage, powered
    from the same supply, amplifies a sine of ``amplitude_v`` peak at ``signal_hz``. The supply spans
    [``supply_min_v``, ``supply_max_v``] in service (a battery: end of discharge to fresh); without that
    band, ``supply_v`` ± ``supply_tolerance`` (``channel_stages.supply_band``).

Chain (each step is an existing core calculation; this module only wires them together)
    1. ``led_string`` with the transistor's ``vce_sat_v`` as the switch drop: string resistor, nominal and
       worst-case string current. Nominal collector current Ic = strings × nominal string current;
       worst-case Ic_max = strings × the highest string current: at the top of the supply band, the lowest
       Vf, the lowest resistor within its tolerance and the hottest ambient (the string's coupled
       electro-thermal point, ``channel_thermal``: a warm string's forward voltage falls and its current rises).
    2. ``bjt_switch`` with collector current **Ic_max**: base resistor, saturation, pin current, ratings.
       The base is sized for the worst-case maximum collector current, not the nominal one: the base
       resistor's job is to guarantee saturation, and a base sized for the nominal current runs short of
       drive exactly when the LED current is highest (high supply, low Vf, low resistor), which is also when
       a transistor dropping out of saturation would dissipate most. The price is a little more pin current,
       which the ``driver_current`` check verifies at the pin's stress corner.
       Consequently the switch's ``collector_current_rating`` and ``power_rating`` checks use Ic_max too.
    3. ``duty_power`` with one rectangular load per row: ``channels`` units of peak current Ic (nominal) at
       ``duty_cycle``: average and peak supply current, utilization, and ``max_duty_cycle``, the largest
       duty cycle all channels can share within ``current_max_a``. (The tolerance analysis in
       ``calcsvc.core.tolerance`` checks the supply at the worst-case current.)
    4. Front stage, where given: ``closed_loop`` (one stage; ``signal_in_band``, ``gain_achievable``) and
       ``slew`` for a sine at ``signal_hz`` and ``amplitude_v`` with the supply as the op-amp's rail span
       (``slew_rate``, ``output_swing``, and the supply against the op-amp's rated range: ``opamp_supply_min``,
       ``opamp_supply_max``); the output offset from ``input_offset_v`` against ``output_offset_max_v``
       (``output_offset``); the single-supply windows, the DC output error, the output noise and the
       stability with a capacitive load (``channel_front``).
    5. Heat at ``ambient_c`` (``channel_thermal``): the strings' coupled electro-thermal point, each part's
       temperature and derated limit, and the thermal checks.

Assumptions
    Those of the four calculations; a base-emitter pull-down only where ``rbe_ohm`` is given; the base current
    comes from the logic supply, not from ``supply_v``; the LED supply feeds nothing but the channels.
    Units: SI (V, A, Ω, W, Hz, V/s).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from calcsvc.core import bjt_switch, channel_mosfet, channel_thermal, duty_power, led_string, mosfet_inputs
from calcsvc.core.channel_front import FRONT_STAGE_FIELDS, front_stage, front_violations
from calcsvc.core.channel_inputs import ChannelInputs
from calcsvc.core.channel_stages import collector_currents, has_front_stage, led_inputs, supply_inputs, switch_inputs
from calcsvc.core.outcome import (
    BoolArray,
    Check,
    FloatArray,
    Notice,
    Outcome,
    Violation,
    first_bad,
    raise_violations,
    require,
    row_count,
    take,
)

NAME = "channel-review"
VERSION = "6"

__all__ = ["FRONT_STAGE_FIELDS", "ChannelInputs", "ChannelReview", "review", "validate"]


@dataclass(frozen=True)
class ChannelReview:
    """Nominal review of every row. Sections are the underlying calculations' outcomes; ``front_stage``
    merges the closed-loop and slew outcomes and holds NaN results (checks ok, not applicable) on rows
    without a front stage. ``checks`` lists every section's checks in chain order; names are unique."""

    led_string: Outcome
    switch: Outcome
    supply: Outcome
    front_stage: Outcome
    thermal: Outcome  # at ambient_c: ``channel_thermal``
    has_front_stage: BoolArray
    collector_current_a: FloatArray  # nominal: strings × nominal string current
    collector_current_max_a: FloatArray  # worst case; the base resistor is sized for this
    max_duty_cycle: FloatArray
    checks: list[Check]
    ok: BoolArray  # every check passes
    warnings: list[Notice]
    cautions: list[Notice]
    switch_kind: str = "bjt"  # or "mosfet": every row's switch is of one kind (``channel_mosfet``)

    def check(self, name: str) -> Check:
        return next(c for c in self.checks if c.name == name)

    def failing(self) -> list[list[str]]:
        """Names of the failing checks, per row."""
        return failing_names(self.checks)


def failing_names(checks: list[Check]) -> list[list[str]]:
    """Per row, the names of the checks in ``checks`` that fail there."""
    if not checks:
        return []
    failed = ~np.stack([c.ok for c in checks], axis=1)
    names = [c.name for c in checks]
    return [[names[j] for j in np.flatnonzero(row)] for row in failed]


# ---- validation ------------------------------------------------------------------------------------------


class _Collector:
    """Violations under the flat input names, at most one message per field and row: several stages check
    the same input (e.g. supply_v, e_series), and the first stage to object speaks for it."""

    def __init__(self, n: int) -> None:
        self.n = n
        self.found: list[Violation] = []
        self.seen: dict[str, BoolArray] = {}

    def add(self, violation: Violation) -> None:
        seen = self.seen.setdefault(violation.field, np.zeros(self.n, dtype=bool))
        fresh = violation.rows & ~seen
        if fresh.any():
            self.found.append(Violation(violation.field, violation.message, fresh))
            seen |= fresh

    def stage(
        self,
        violations: list[Violation],
        fields: dict[str, str] | None = None,
        words: dict[str, str] | None = None,
        subset: BoolArray | None = None,
    ) -> None:
        """Add a stage's violations: ``fields`` renames fields, ``words`` rewrites names in messages, and
        ``subset`` maps rows of a stage run on some rows only back to all rows."""
        for v in violations:
            message = v.message
            for old, new in (words or {}).items():
                message = re.sub(rf"\b{old}\b", new, message)
            rows = v.rows
            if subset is not None:
                rows = np.zeros(self.n, dtype=bool)
                rows[subset] = v.rows
            self.add(Violation((fields or {}).get(v.field, v.field), message, rows))


def _rows_of(violations: list[Violation], n: int) -> BoolArray:
    bad = np.zeros(n, dtype=bool)
    for v in violations:
        bad |= v.rows
    return bad


def _own_violations(i: ChannelInputs) -> list[Violation]:
    """Preconditions on inputs that no stage calculation checks (or checks under another name)."""
    v: list[Violation] = []
    mosfet = channel_mosfet.is_mosfet(i)
    with np.errstate(invalid="ignore"):
        for name in ("hfe_typ", "channels", "current_max_a"):
            x = getattr(i, name)
            bad = ~np.isfinite(x) & ~(mosfet & (name == "hfe_typ"))  # a MOSFET has no gain
            require(v, bad, name, f"{name} is required and must be a finite number (got {first_bad(x, bad)})")
        for name in channel_mosfet.BIPOLAR_ONLY:
            bad = mosfet & ~np.isnan(getattr(i, name))
            require(
                v,
                bad,
                name,
                f"{name} is an NPN switch's input, but this switch is a MOSFET (its own inputs, such as rds_on_1_ohm, "
                "are given): give one switch kind's inputs",
            )
        bad = i.hfe_typ < i.hfe_min
        if bad.any():
            k = int(np.argmax(bad))
            require(
                v,
                bad,
                "hfe_typ",
                f"hfe_typ ({i.hfe_typ[k]:g}) must not be below hfe_min ({i.hfe_min[k]:g})",
            )
        bad = np.isfinite(i.channels) & ((i.channels < 1) | (i.channels != np.floor(i.channels)))
        require(v, bad, "channels", f"channels ({first_bad(i.channels, bad)}) must be a whole number of at least 1")
        bad = i.current_max_a <= 0
        require(v, bad, "current_max_a", f"current_max_a ({first_bad(i.current_max_a, bad)} A) must be positive")

        front = has_front_stage(i)
        stray = np.zeros(front.shape, dtype=bool)
        for name in FRONT_STAGE_FIELDS:
            stray |= ~np.isnan(getattr(i, name)) & ~front
        require(
            v,
            stray,
            "gbw_hz",
            "gbw_hz is required for a front stage: give it, or leave out every front-stage value "
            f"({', '.join(FRONT_STAGE_FIELDS)})",
        )
        require(v, front & np.isnan(i.gain), "gain", "gain is required for a front stage (give the magnitude, V/V)")
        _band_violations(v, i)
    return v


def _band_violations(v: list[Violation], i: ChannelInputs) -> None:
    """The supply band, when given, is given whole and holds the nominal voltage."""
    low, high = i.supply_min_v, i.supply_max_v
    for name, missing, other in (("supply_min_v", low, high), ("supply_max_v", high, low)):
        together = "supply_min_v and supply_max_v (the supply's band in service) go together"
        require(v, np.isnan(missing) & ~np.isnan(other), name, f"{name} is required: {together}")
    for name, value in (("supply_min_v", low), ("supply_max_v", high)):
        bad = np.isinf(value) | (value <= 0)
        require(v, bad, name, f"{name} ({first_bad(value, bad)} V) must be a finite voltage above 0 V")
    bad = low > i.supply_v
    require(v, bad, "supply_min_v", f"supply_min_v ({first_bad(low, bad)} V) cannot be above supply_v")
    bad = high < i.supply_v
    require(v, bad, "supply_max_v", f"supply_max_v ({first_bad(high, bad)} V) cannot be below supply_v")


_SUPPLY = {"supply_max_v": "supply_v"}


def _unstated_gate(found: _Collector, i: ChannelInputs, gate_v: FloatArray, rows: BoolArray) -> None:
    """A pin at or over vgs_1_v whose gate, less the pull-down's share across the gate resistor, ends below it:
    the on-resistance the strings are designed around is then unstated, so the row is refused like a pin under
    vgs_1_v (``mosfet_inputs``), naming the pin's level rather than the LED stage's switch drop."""
    if not rows.any():
        return
    v: list[Violation] = []
    require(
        v,
        rows,
        "drive_high_v",
        f"drive_high_v ({first_bad(i.drive_high_v, rows)} V) leaves the gate at {first_bad(gate_v, rows)} V once "
        f"the gate pull-down takes its share (gate_pulldown_ohm {first_bad(i.gate_pulldown_ohm, rows)} Ω against "
        f"the gate resistor), below vgs_1_v ({first_bad(i.vgs_1_v, rows)} V), the lowest gate voltage at which the "
        "part states its on-resistance: give a larger gate_pulldown_ohm, a part stated at a lower gate voltage, or "
        "a gate driver",
    )
    found.stage(v)


def validate(inputs: ChannelInputs) -> list[Violation]:
    """Every physical precondition of every stage, per row, under the flat input names; never raises."""
    i = inputs
    n = row_count(i)
    found = _Collector(n)
    found.stage(_own_violations(i))
    heat_found = channel_thermal.validate(i)
    found.stage(heat_found)

    mosfet = channel_mosfet.is_mosfet(i)
    mosfet_ok = mosfet.copy()  # a MOSFET valid on its own: its on-resistance bounds the LED stage's drop
    if mosfet.any():
        own = mosfet_inputs.validate(channel_mosfet.switch_inputs(take(i, mosfet), np.ones(int(mosfet.sum()))))
        mosfet_ok[mosfet] = ~_rows_of(own, int(mosfet.sum()))
    gate_v, rds = channel_mosfet.gate_and_rds_max(i, mosfet_ok)
    _unstated_gate(found, i, gate_v, mosfet_ok & (gate_v < i.vgs_1_v))
    rds = np.where(np.isnan(rds), 0.0, rds)  # refused rows (here or below): keep the LED stage's names clean
    led_in = led_inputs(i, rds)
    drop = {"switch_drop_v": "vce_sat_v"}
    led_found = led_string.validate(led_in)
    found.stage(led_found, drop, drop)
    led_ok = ~_rows_of(led_found, n)
    if led_found and led_ok.any():
        # The resistor-range rule runs only when nothing else is wrong: run it on the clean rows.
        extra = led_string.validate(take(led_in, led_ok))
        found.stage(extra, drop, drop, subset=led_ok)
        led_ok[led_ok] = ~_rows_of(extra, int(led_ok.sum()))

    led_ok &= ~_rows_of(heat_found, n)  # the highest current needs the thermal inputs too
    # The switch and supply stages need the LED stage's currents; rows it rejects get a harmless 1 A.
    ic_nominal, ic_max = np.ones(n), np.ones(n)
    if led_ok.any():
        ic_nominal[led_ok], ic_max[led_ok] = collector_currents(
            take(i, led_ok), led_string.design(take(led_in, led_ok))
        )
    bipolar = ~mosfet
    switch_found = bjt_switch.validate(switch_inputs(take(i, bipolar), ic_max[bipolar])) if bipolar.any() else []
    for v in switch_found:
        if v.field == "collector_current_a":  # derived from current_a; meaningless where that was replaced
            v = Violation(v.field, v.message, v.rows & led_ok[bipolar])
        found.stage(
            [v],
            {"collector_current_a": "current_a", "driver_current_max_a": "source_current_max_a", **_SUPPLY},
            {"collector_current_a": "collector current", "driver_current_max_a": "source_current_max_a", **_SUPPLY},
            subset=bipolar,
        )
    if mosfet.any():
        for v in mosfet_inputs.validate(channel_mosfet.switch_inputs(take(i, mosfet), ic_max[mosfet])):
            if v.field == "drain_current_a":  # as collector_current_a above
                v = Violation(v.field, v.message, v.rows & led_ok[mosfet])
            names = {"drain_current_a": "current_a", "driver_current_max_a": "source_current_max_a", **_SUPPLY}
            found.stage([v], names, {**names, "drain_current_a": "drain current"}, subset=mosfet)
    found.stage(
        duty_power.validate(supply_inputs(i, ic_nominal)),
        {"count": "channels", "peak_current_a": "current_a"},
        {"count": "channels"},
    )

    front = has_front_stage(i)
    if front.any():
        for violations, names in front_violations(i):
            found.stage(violations, names, names, subset=front)
    return found.found


# ---- review ----------------------------------------------------------------------------------------------


def review(inputs: ChannelInputs, validated: bool = False) -> ChannelReview:
    """Review every row's channel at nominal values (chain: module docstring).

    Raises DomainError when any row violates ``validate``; ``validated``: the caller has just run ``validate``
    on these inputs and found nothing, so it is not run again.
    """
    if not validated:
        raise_violations(validate(inputs))
    i = inputs
    # ``validate`` checked every stage at exactly these inputs (the currents too), so none validates again.
    # The LED and switch stages without heat: the thermal stage and the corners judge it over the ambient range.
    mosfet = channel_mosfet.all_mosfet(i)
    led = led_string.design(led_inputs(i))
    ic_nominal, ic_max = collector_currents(i, led)
    switch = channel_mosfet.section(i, ic_max) if mosfet else bjt_switch.design(switch_inputs(i, ic_max))
    supply = duty_power.compute(supply_inputs(i, ic_nominal), validated=True)
    front = front_stage(i, validated=True)
    heat = channel_thermal.stage(i, led, switch)

    sections = (led, switch, supply, front, heat)
    checks = [c for s in sections for c in s.checks]
    ok = np.ones(i.supply_v.shape[0], dtype=bool)
    for c in checks:
        ok &= c.ok
    return ChannelReview(
        led_string=led,
        switch=switch,
        supply=supply,
        front_stage=front,
        thermal=heat,
        has_front_stage=has_front_stage(i),
        collector_current_a=ic_nominal,
        collector_current_max_a=ic_max,
        max_duty_cycle=supply.results["max_common_duty_cycle"],
        checks=checks,
        ok=ok,
        warnings=[note for s in sections for note in s.warnings],
        cautions=[note for s in sections for note in s.cautions],
        switch_kind="mosfet" if mosfet else "bjt",
    )
