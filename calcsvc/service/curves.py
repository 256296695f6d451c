"""The curves of a plot for one request: parts resolved and defaults filled as for the calculation itself, then
the core's curves around that design (calcsvc.core.curves)."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any, TypeVar

from calcsvc.core import closed_loop, curves, led_string, slew
from calcsvc.core.registry import CALCULATIONS
from calcsvc.data.database import Database
from calcsvc.service.calculate import columns_of, complete
from calcsvc.service.errors import InvalidInput
from calcsvc.service.resolve import resolve_parts

C = TypeVar("C")


def core_inputs(database: Database, name: str, body: Mapping[str, Any]) -> Any:
    """The core's one-row inputs of calculation ``name`` for a request body, as a single request builds them."""
    calc = CALCULATIONS[name]
    values = complete(calc, resolve_parts(database, calc.roles, body).values)
    return calc.make_inputs(columns_of(calc, [values]))


def _curves(name: str, build: Callable[[Any], C]) -> Callable[[Database, Mapping[str, Any]], C]:
    def curves_of(database: Database, body: Mapping[str, Any]) -> C:
        inputs = core_inputs(database, name, body)
        try:
            return build(inputs)
        except curves.OffScale as error:
            raise InvalidInput.on(error.field, error.message) from error

    return curves_of


closed_loop_curves = _curves(closed_loop.NAME, curves.closed_loop_curves)
slew_curves = _curves(slew.NAME, curves.slew_curves)
led_curves = _curves(led_string.NAME, curves.led_curves)
