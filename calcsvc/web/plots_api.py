"""``/v1/plots/<name>.svg|png``: calculations drawn as images, from the same query inputs as ``GET /v1/calc/<name>``.

Each plot resolves its query exactly as the JSON endpoint does (part references, defaults), then asks the core for
the curves around that design (calcsvc.core.curves), so a marked point is the calculation's number.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any, TypeVar

from flask import Response
from flask.views import MethodView
from flask_smorest import Blueprint
from marshmallow import RAISE, Schema

from calcsvc.core import closed_loop, led_string, slew
from calcsvc.core.registry import CALCULATIONS
from calcsvc.data.database import Database
from calcsvc.service import curves
from calcsvc.web import plots
from calcsvc.web.auth import database
from calcsvc.web.calc_schemas import camel, request_schema
from calcsvc.web.images import PLOT_CALCULATIONS, endpoint, image_response
from calcsvc.web.metrics import record_calculation
from calcsvc.web.problems import error_response

C = TypeVar("C")
Draw = Callable[[dict[str, Any], str], plots.Plot]

blp = Blueprint(
    "plots",
    __name__,
    url_prefix="/v1/plots",
    description="Calculations drawn as SVG or PNG images. The query parameters are those of GET /v1/calc/<name> "
    "(part references included); an invalid input is a 422 problem document naming the field.",
)


def _drawn(
    name: str, curves_of: Callable[[Database, Mapping[str, Any]], C], draw: Callable[[C, str], plots.Plot]
) -> Draw:
    """Resolve the query as the calculation ``name`` does, ask the core for its curves and draw them."""

    def image(args: dict[str, Any], fmt: str) -> plots.Plot:
        record_calculation(name, 1)
        return draw(curves_of(database(), args), fmt)

    return image


# path name → (drawing, summary); the calculation each draws: PLOT_CALCULATIONS
PLOTS: dict[str, tuple[Draw, str]] = {
    "closed-loop": (
        _drawn(closed_loop.NAME, curves.closed_loop_curves, plots.closed_loop_plot),
        "Open-loop and closed-loop gain and phase against frequency, the -3 dB point marked",
    ),
    "slew-limit": (
        _drawn(slew.NAME, curves.slew_curves, plots.slew_limit_plot),
        "Largest undistorted peak amplitude against frequency: slew and swing limits, operating point marked",
    ),
    "led-string": (
        _drawn(led_string.NAME, curves.led_curves, plots.led_string_plot),
        "String current against supply voltage for the chosen resistor, worst-case band and LED rating",
    ),
}


def _register(name: str, calc_name: str, draw: Draw, summary: str) -> None:
    calc = CALCULATIONS[calc_name]
    query = Schema.from_dict(dict(request_schema(calc)._declared_fields), name=f"{camel(name)}PlotQuery")
    for fmt, mimetype in plots.FORMATS.items():
        schema = {"type": "string"} if fmt == "svg" else {"type": "string", "contentMediaType": mimetype}

        def get(self: MethodView, args: dict[str, Any], fmt: str = fmt) -> Response:
            return image_response(draw(args, fmt))

        # Applied innermost first, as the decorator stacks of calc_api read.
        get = blp.doc(
            summary=f"{summary} ({fmt.upper()})",
            description=f"The inputs of GET /v1/calc/{calc_name}, as query parameters.",
        )(get)
        get = error_response(blp, 404, "a referenced part does not exist")(get)
        get = blp.response(200, schema, content_type=mimetype, description=f"the plot as {mimetype}")(get)
        get = blp.arguments(query, location="query", unknown=RAISE)(get)  # a misspelt input is refused
        view = type(f"{camel(name)}{fmt.capitalize()}Plot", (MethodView,), {"get": get})
        blp.route(f"/{name}.{fmt}", endpoint=endpoint(name, fmt))(view)


for _name, (_draw, _summary) in PLOTS.items():
    _register(_name, PLOT_CALCULATIONS[_name], _draw, _summary)
