"""Plots as the HTTP layer serves them: their endpoints, their panels, and the image answered with headers that keep
a browser from treating it as anything else."""

from __future__ import annotations

from flask import Response

from calcsvc.core import closed_loop, led_string, slew
from calcsvc.service.review import Distribution
from calcsvc.web import plots

# An SVG opened on its own is a document: forbid it any script or outside resource.
SVG_POLICY = "default-src 'none'; style-src 'unsafe-inline'"


def image_response(plot: plots.Plot) -> Response:
    response = Response(plot.content, mimetype=plot.mimetype)
    response.headers["Cache-Control"] = "no-cache"
    response.headers["X-Content-Type-Options"] = "nosniff"
    if plot.mimetype == plots.FORMATS["svg"]:
        response.headers["Content-Security-Policy"] = SVG_POLICY
    return response


# The calculation each plot draws, by the plot's path name.
PLOT_CALCULATIONS = {"closed-loop": closed_loop.NAME, "slew-limit": slew.NAME, "led-string": led_string.NAME}

# Panels stacked in each plot (one where not listed), for pages that reserve the image's space.
PANELS = {"closed-loop": plots.CLOSED_LOOP_PANELS}


def endpoint(name: str, fmt: str) -> str:
    """The endpoint of one plot in one format, for url_for (blueprint endpoints may not hold dots)."""
    return f"{name}-{fmt}"


def check_histogram(found: Distribution, fmt: str) -> plots.Plot:
    """The Monte Carlo distribution of one check of the channel review, with its limit marked."""
    if found.relative:
        # Only the value relative to its own limit shows which builds fail.
        return plots.histogram(found.values, found.limit, f"{found.check} (value / its limit)", "", fmt)
    return plots.histogram(found.values, found.limit, found.check, found.unit, fmt)
