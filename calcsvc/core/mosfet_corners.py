"""A MOSFET switch's checks at the tolerance corners (or Monte Carlo builds) of a reviewed channel, with its gate
resistor and the drain current of each point (``tolerance``; quantities in ``corners``).

    gate edges     t_on, t_off by Q = I·t through Rg (``pwm_timing.gate_times``): slowest at Rg's high end
    pin            V_dd/Rg into the uncharged gate: highest at Rg's low end, the pin's high level at its supply
    dissipation    Id²·Rds(Tj)·D + V·Id·(t_on + t_off)·f/6 at the self-heated junction (``channel_mosfet``),
                   with Rds at the gate voltage the pin's rated high level gives
    ratings        Id against id_max_a; the supply against vds_max_v/1.2 (common practice)

The gate voltage, and so the on-resistance at 25 °C, are the nominal review's: the pin's rated (lowest) high level
is already the worst for them, and the gate pull-down's share shifts with Rg by far less than a millivolt.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from calcsvc.core import bjt_drive, channel_mosfet, channel_thermal, mosfet_switch, pwm_timing
from calcsvc.core.channel_inputs import ChannelInputs
from calcsvc.core.outcome import Outcome

if TYPE_CHECKING:  # ``corners`` builds on the review; the point type is needed for annotations only
    from calcsvc.core.corners import Point

CheckArrays = channel_thermal.CheckArrays


def checks(
    i: ChannelInputs, switch: Outcome, at: Point, drain_a: np.ndarray
) -> tuple[dict[str, CheckArrays], np.ndarray]:
    """The MOSFET's checks at the points (module docstring) as (value, limit, ok), and its average dissipation."""
    row = at.row
    r = switch.results
    rg = at.drive_resistor_ohm
    pin_low = mosfet_switch.pin_low_ohm(i.drive_low_v, i.source_current_max_a)
    turn_on, turn_off = pwm_timing.gate_times(
        row(i.qg_total_c), rg, row(r["gate_v"]), row(pin_low), row(i.vgs_th_max_v)
    )
    switching = pwm_timing.switching_loss(at.supply_v, drain_a, turn_on, turn_off, row(i.pwm_frequency_hz))
    rth, _ = channel_thermal.transistor_rth(i)
    power = channel_mosfet.dissipation(
        drain_a, row(r["rds_on_ohm"]), row(i.duty_cycle), at.ambient_c, row(rth), switching
    )
    pin = row(bjt_drive.pin_high(i.drive_high_v, i.drive_supply_v)) / rg
    pin_limit = row(i.source_current_max_a)
    slowest = np.maximum(turn_on, turn_off)
    asked = ~np.isnan(i.switching_time_s)
    wanted = row(np.where(asked, r["switching_time_wanted_s"], np.nan))
    edges = pwm_timing.edges_limit(turn_on, turn_off)
    shortest = row(r["shortest_on_time_s"])
    no_pwm = row(np.isnan(i.pwm_frequency_hz))
    id_max = row(i.id_max_a)
    voltage = row(bjt_drive.voltage_limit(i.vds_max_v))
    with np.errstate(invalid="ignore"):
        found: dict[str, CheckArrays] = {
            "edges_within_wanted_time": (slowest, wanted, ~row(asked) | (slowest <= wanted * (1 + 1e-9))),
            "pin_peak_current": (pin, pin_limit, ~(pin > pin_limit)),
            "drain_current_rating": (drain_a, id_max, drain_a <= id_max),
            "drain_voltage_rating": (at.supply_v, voltage, at.supply_v <= voltage),
            "shortest_pulse_covers_edges": (edges, shortest, no_pwm | (edges <= shortest)),
        }
    return found, power
