"""Every calculation of the core, by name, in the order the API lists them.

Adding a calculation is a core module that declares its ``SPEC`` (see calcsvc.core.spec) and one line here; the
endpoints, batch columns, query form, command line, searches and the OpenAPI document follow from it. Budgets (one
row of inputs with a list of items, such as a supply and its loads) are listed apart: they have no batch, search
or plot.
"""

from __future__ import annotations

from calcsvc.core import (
    bjt_switch,
    closed_loop,
    duty_power,
    led_string,
    mosfet_switch,
    opamp_dc_error,
    opamp_noise,
    opamp_stability,
    opamp_windows,
    slew,
)
from calcsvc.core.spec import BudgetSpec, CalculationSpec, InputSet

CALCULATIONS: dict[str, CalculationSpec] = {
    spec.name: spec
    for spec in (
        closed_loop.SPEC,
        slew.SPEC,
        opamp_windows.SPEC,
        opamp_dc_error.SPEC,
        opamp_noise.SPEC,
        opamp_stability.SPEC,
        bjt_switch.SPEC,
        mosfet_switch.SPEC,
        led_string.SPEC,
    )
}
BUDGETS: dict[str, BudgetSpec] = {duty_power.SPEC.name: duty_power.SPEC}
EVERY: dict[str, InputSet] = {**CALCULATIONS, **BUDGETS}  # what /v1/calc and the command line offer
