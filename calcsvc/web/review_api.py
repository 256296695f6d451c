"""``/v1/review/channel``: one verdict for a whole channel, from the driver pin to the LEDs to the supply.

The review itself is calcsvc.service.review; this module reads the request and answers JSON, a report or an image.
"""

from __future__ import annotations

from typing import Any

from flask import Response, request
from flask.views import MethodView
from flask_smorest import Blueprint
from marshmallow import Schema, fields, validate

from calcsvc.core import channel
from calcsvc.core.channel_spec import CHECK_UNITS
from calcsvc.service.review import distribution, heat_of, run_review
from calcsvc.web import plots
from calcsvc.web.auth import database, guard_reads
from calcsvc.web.images import check_histogram, image_response
from calcsvc.web.metrics import record_calculation
from calcsvc.web.problems import error_response
from calcsvc.web.review_report import render_html, render_markdown
from calcsvc.web.review_schemas import REVIEW_REQUEST, ReviewSchema

blp = Blueprint(
    "review",
    __name__,
    url_prefix="/v1/review",
    description="Whole-channel design review with worst case and production yield. Send Accept: text/markdown "
    "or text/html for a report a reviewer can read.",
)
guard_reads(blp)  # a review reads the parts table, so it follows its read protection


class HistogramQuery(Schema):
    check = fields.String(
        validate=validate.OneOf(list(CHECK_UNITS)),
        metadata={"description": "the check to plot; absent: the most failing one, else the tightest"},
    )


REPORTS = {"text/markdown": render_markdown, "text/html": render_html}


@blp.route("/channel", endpoint="channel")
class ChannelReview(MethodView):
    @blp.arguments(REVIEW_REQUEST)
    @blp.response(200, ReviewSchema())
    @error_response(blp, 404, "a referenced part does not exist")
    @blp.doc(
        responses={
            "200": {
                "description": "the review; a Markdown or HTML report of the same numbers when asked for by Accept",
                "content": {
                    "application/json": {"schema": {"$ref": "#/components/schemas/Review"}},
                    "text/markdown": {"schema": {"type": "string"}},
                    "text/html": {"schema": {"type": "string"}},
                },
            }
        }
    )
    def post(self, body: dict[str, Any]) -> Any:
        """Review a whole channel: nominal checks, worst case over tolerances, and production yield."""
        document = run_review(database(), body)
        record_calculation(channel.NAME, 1)
        best = request.accept_mimetypes.best_match(["application/json", *REPORTS])
        if best in REPORTS:
            return Response(REPORTS[best](document), mimetype=best)
        return document


def _register_histogram(fmt: str) -> None:
    class Histogram(MethodView):
        @blp.arguments(HistogramQuery, location="query")
        @blp.arguments(REVIEW_REQUEST)
        @blp.response(200, {"type": "string"}, content_type=plots.FORMATS[fmt], description=f"the histogram ({fmt})")
        @error_response(blp, 404, "a referenced part does not exist")
        def post(self, query: dict[str, Any], body: dict[str, Any]) -> Response:
            """Monte Carlo histogram of one check over the simulated builds, its limit marked: the check named by
            ?check=, else the one that fails most often, else (every build passes) the tightest one, whose least
            margin is smallest. Same body as the review."""
            return image_response(check_histogram(distribution(database(), body, query.get("check")), fmt))

    Histogram.__name__ = f"Histogram{fmt.capitalize()}"
    blp.route(f"/channel/histogram.{fmt}", endpoint=f"histogram-{fmt}")(Histogram)


def _register_heat(fmt: str) -> None:
    class Heat(MethodView):
        @blp.arguments(REVIEW_REQUEST)
        @blp.response(200, {"type": "string"}, content_type=plots.FORMATS[fmt], description=f"the plot ({fmt})")
        @error_response(blp, 404, "a referenced part does not exist")
        def post(self, body: dict[str, Any]) -> Response:
            """Each part's temperature against the ambient, with its limit; same body as the review."""
            return image_response(plots.heat_plot(heat_of(database(), body), fmt))

    Heat.__name__ = f"Heat{fmt.capitalize()}"
    blp.route(f"/channel/heat.{fmt}", endpoint=f"heat-{fmt}")(Heat)


for _fmt in plots.FORMATS:
    _register_histogram(_fmt)
    _register_heat(_fmt)
