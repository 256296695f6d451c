"""Every row-wise calculation of the core, by name, in the order the API lists them.

Adding a calculation is a core module that declares its ``SPEC`` (see calcsvc.core.spec) and one line here; the
endpoints, batch columns, query form, command line, searches and the OpenAPI document follow from it.
"""

from __future__ import annotations

from calcsvc.core import bjt_switch, closed_loop, led_string, slew
from calcsvc.core.spec import CalculationSpec

CALCULATIONS: dict[str, CalculationSpec] = {
    spec.name: spec for spec in (closed_loop.SPEC, slew.SPEC, bjt_switch.SPEC, led_string.SPEC)
}
