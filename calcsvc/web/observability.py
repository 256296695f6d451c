"""Wires request logging, the request id and metrics into the app: one timer feeds both log and metrics."""

from __future__ import annotations

import time

from flask import Flask, Response, g

from calcsvc.web import metrics, request_log


def install_observability(app: Flask) -> None:
    """Call once the blueprints are registered and before other hooks, so these run first and see the end."""
    request_log.configure_logging()
    metrics.add_metrics_route(app)
    app.before_request(_start)
    # after_request hooks run last-registered first: this one, registered early, sees the final response.
    app.after_request(_finish)


def _start() -> None:
    g.observed_since = time.perf_counter()
    request_log.request_id()


def _finish(response: Response) -> Response:
    seconds = time.perf_counter() - g.get("observed_since", time.perf_counter())
    response.headers[request_log.REQUEST_ID_HEADER] = request_log.request_id()
    request_log.log_request(response.status_code, seconds)
    metrics.observe_request(response.status_code, seconds)
    return response
