"""``/v1/plots/<name>.svg|png``: calculations drawn as images, from the same query inputs as ``GET /v1/calc/<name>``.

Each plot runs the calculation exactly as the JSON endpoint does (``run_calculation``: part references, defaults,
checks), then asks the core for the curves around that answer, so a marked point is the calculation's number.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import numpy as np
from flask import Response, current_app
from flask.views import MethodView
from flask_smorest import Blueprint
from marshmallow import RAISE, Schema

from calcsvc.core import closed_loop, eseries, led_string, slew
from calcsvc.core.outcome import Outcome
from calcsvc.core.registry import CALCULATIONS
from calcsvc.core.spec import CalculationSpec
from calcsvc.service.calculate import columns_of, run_calculation
from calcsvc.web import plots
from calcsvc.web.calc_schemas import camel, request_schema
from calcsvc.web.metrics import record_calculation
from calcsvc.web.problems import Problem, error_response

blp = Blueprint(
    "plots",
    __name__,
    url_prefix="/v1/plots",
    description="Calculations drawn as SVG or PNG images. The query parameters are those of GET /v1/calc/<name> "
    "(part references included); an invalid input is a 422 problem document naming the field.",
)

SWEEP_POINTS = 400
GRID_POINTS = 300
# The plotted range reaches this factor beyond the frequencies of interest on each side.
MARGIN = 30.0
# An SVG opened on its own is a document: forbid it any script or outside resource.
SVG_POLICY = "default-src 'none'; style-src 'unsafe-inline'"


def _span(low: float, high: float, field: str) -> None:
    """The range a plot draws must be finite and positive; the input extreme enough to break it is named."""
    if not (0.0 < low < high < math.inf):
        message = f"{field} is too extreme to plot: the axis would run from {low:g} to {high:g}"
        raise Problem(422, message, "validation", {field: [message]})


def _core(calc: CalculationSpec, rows: list[dict[str, Any]]) -> Outcome:
    """The core over rows of already completed inputs (one row per point of a curve)."""
    return calc.compute(calc.make_inputs(columns_of(calc, rows)))


def closed_loop_curves(args: dict[str, Any]) -> plots.ClosedLoopCurves:
    calc = CALCULATIONS[closed_loop.NAME]
    record_calculation(calc.name, 1)
    answer = run_calculation(current_app.extensions["calcsvc.db"], calc, args)
    values, results = answer["inputs"], answer["results"]
    stages = int(values["stages"])
    corner_name = "bandwidth_hz" if stages == 1 else "cascade_bandwidth_hz"
    corner_hz = results[corner_name]
    gbw, a0 = values["gbw_hz"], values.get("open_loop_gain")
    start = corner_hz / 100.0 if a0 is None else min(corner_hz / 100.0, gbw / a0 / 10.0)
    sweep = {"sweep_start_hz": start, "sweep_stop_hz": 10.0 * gbw, "sweep_points": SWEEP_POINTS}
    if values.get("sweep_points"):
        sweep = {name: values[name] for name in sweep}  # the caller's own sweep
    _span(sweep["sweep_start_hz"], sweep["sweep_stop_hz"], "gbw_hz")
    # signal_hz at the corner makes the core report the gain and phase there, for the marker.
    swept = _core(calc, [{**values, **sweep, "signal_hz": corner_hz}]).results
    return plots.ClosedLoopCurves(
        frequency_hz=swept["sweep_frequency_hz"],  # one row: the whole flat sweep
        gain_db=swept["sweep_gain_db"],
        phase_deg=swept["sweep_phase_deg"],
        corner_hz=corner_hz,
        corner_name=corner_name,
        corner_gain_db=float(swept["gain_at_signal_db"][0]),
        corner_phase_deg=float(swept["phase_at_signal_deg"][0]),
        gbw_hz=gbw,
        open_loop_gain=a0,
        stages=stages,
        signal_hz=values.get("signal_hz"),
    )


def slew_curves(args: dict[str, Any]) -> plots.SlewCurves:
    calc = CALCULATIONS[slew.NAME]
    record_calculation(calc.name, 1)
    answer = run_calculation(current_app.extensions["calcsvc.db"], calc, args)
    values, results = answer["inputs"], answer["results"]
    swing = results["swing_limited_amplitude_v"]
    frequency, amplitude = values.get("frequency_hz"), values.get("amplitude_v")
    # The knee: the full-power bandwidth of the whole swing (or of the amplitude asked about, or of 1 V).
    reference_v = swing or amplitude or 1.0
    knee = float(_core(calc, [{**values, "amplitude_v": reference_v}]).results["full_power_bandwidth_hz"][0])
    around = [f for f in (frequency, knee, results["full_power_bandwidth_hz"]) if f]
    low, high = min(around) / MARGIN, max(around) * MARGIN
    _span(low, high, "frequency_hz" if frequency else "slew_rate_v_per_s")
    grid = np.geomspace(low, high, GRID_POINTS)
    curve = _core(calc, [{**values, "frequency_hz": float(f)} for f in grid]).results
    return plots.SlewCurves(
        frequency_hz=grid,
        slew_limited_amplitude_v=curve["slew_limited_amplitude_v"],
        swing_limited_amplitude_v=swing,
        max_amplitude_v=curve["max_amplitude_v"],
        operating_hz=frequency,
        operating_amplitude_v=amplitude,
        operating_ok=all(check["ok"] for check in answer["checks"]),
    )


def led_curves(args: dict[str, Any]) -> plots.LedCurves:
    calc = CALCULATIONS[led_string.NAME]
    record_calculation(calc.name, 1)
    answer = run_calculation(current_app.extensions["calcsvc.db"], calc, args)
    values, results = answer["inputs"], answer["results"]
    leds, switch_v, supply_v = values["leds_in_series"], values["switch_drop_v"], values["supply_v"]
    tolerance = values.get("resistor_tolerance")
    if tolerance is None:
        tolerance = float(eseries.default_tolerance_rows([values["e_series"]])[0])
    resistor = results["resistor_ohm"]
    low, high = 0.9 * (leds * values["vf_min_v"] + switch_v), 1.3 * supply_v * (1.0 + values["supply_tolerance"])
    _span(low, high, "supply_v")
    grid = np.linspace(low, high, GRID_POINTS)
    return plots.LedCurves(
        supply_v=grid,
        current_a=plots.string_current(grid, leds * values["vf_typ_v"] + switch_v, resistor),
        current_low_a=plots.string_current(grid, leds * values["vf_max_v"] + switch_v, resistor * (1.0 + tolerance)),
        current_high_a=plots.string_current(grid, leds * values["vf_min_v"] + switch_v, resistor * (1.0 - tolerance)),
        resistor_ohm=resistor,
        operating_supply_v=supply_v,
        supply_tolerance=values["supply_tolerance"],
        operating_current_a=results["current_a"],
        worst_min_a=results["current_min_a"],
        worst_max_a=results["current_max_a"],
        if_max_a=values["if_max_a"],
    )


def closed_loop_image(args: dict[str, Any], fmt: str) -> plots.Plot:
    return plots.closed_loop_plot(closed_loop_curves(args), fmt)


def slew_image(args: dict[str, Any], fmt: str) -> plots.Plot:
    return plots.slew_limit_plot(slew_curves(args), fmt)


def led_image(args: dict[str, Any], fmt: str) -> plots.Plot:
    return plots.led_string_plot(led_curves(args), fmt)


# Panels stacked in each plot (one where not listed), for pages that reserve the image's space.
PANELS = {"closed-loop": plots.CLOSED_LOOP_PANELS}

# path name → (calculation, drawing, summary)
PLOTS: dict[str, tuple[str, Callable[[dict[str, Any], str], plots.Plot], str]] = {
    "closed-loop": (
        closed_loop.NAME,
        closed_loop_image,
        "Open-loop and closed-loop gain and phase against frequency, the -3 dB point marked",
    ),
    "slew-limit": (
        slew.NAME,
        slew_image,
        "Largest undistorted peak amplitude against frequency: slew and swing limits, operating point marked",
    ),
    "led-string": (
        led_string.NAME,
        led_image,
        "String current against supply voltage for the chosen resistor, worst-case band and LED rating",
    ),
}


def image_response(plot: plots.Plot) -> Response:
    response = Response(plot.content, mimetype=plot.mimetype)
    response.headers["Cache-Control"] = "no-cache"
    response.headers["X-Content-Type-Options"] = "nosniff"
    if plot.mimetype == plots.FORMATS["svg"]:
        response.headers["Content-Security-Policy"] = SVG_POLICY
    return response


def endpoint(name: str, fmt: str) -> str:
    """The endpoint of one plot in one format, for url_for (blueprint endpoints may not hold dots)."""
    return f"{name}-{fmt}"


def _register(name: str, calc_name: str, draw: Callable[[dict[str, Any], str], plots.Plot], summary: str) -> None:
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


for _name, (_calc_name, _draw, _summary) in PLOTS.items():
    _register(_name, _calc_name, _draw, _summary)
