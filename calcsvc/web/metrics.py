"""Prometheus metrics: requests by route, calculations, and writes to the parts table.

Under gunicorn every worker is a process of its own: ``PROMETHEUS_MULTIPROC_DIR`` (set by
``calcsvc.gunicorn_conf`` before the app is imported) makes each write its samples to a file there, and
``GET /metrics`` then adds up all workers' files, so any worker answers the scrape with the server's totals.
"""

from __future__ import annotations

import functools
import os
from typing import Literal

from flask import Flask, Response, request
from prometheus_client import REGISTRY, CollectorRegistry, Counter, Histogram
from prometheus_client.exposition import choose_encoder
from prometheus_client.multiprocess import MultiProcessCollector

UNMATCHED = "unmatched"
_METHODS = frozenset({"GET", "HEAD", "POST", "PUT", "PATCH", "DELETE", "OPTIONS"})

PartsWrite = Literal["create", "update", "approve", "retire", "restore", "send_back", "comment"]

REQUESTS = Counter("calcsvc_requests_total", "HTTP requests answered", ["method", "endpoint", "status"])
REQUEST_DURATION = Histogram(
    "calcsvc_request_duration_seconds",
    "Time from the start of request handling to the response",
    ["method", "endpoint"],
    # Single calculations take milliseconds, large batches seconds; gunicorn stops a worker at 60 s.
    buckets=(0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 30.0, 60.0),
)
CALCULATIONS = Counter("calcsvc_calculations_total", "Calculation requests answered", ["calculation"])
CALCULATION_ROWS = Counter("calcsvc_calculation_rows_total", "Rows computed by calculations", ["calculation"])
PARTS_WRITES = Counter("calcsvc_parts_writes_total", "Committed writes to the parts table", ["action"])


def record_calculation(name: str, rows: int) -> None:
    """Count one answered calculation of ``rows`` rows (1 for a single one).

    ``name`` becomes a label: pass a fixed identifier of the calculation, never something a caller sent.
    """
    calculations, calculation_rows = _calculation_counters(name)
    calculations.inc()
    calculation_rows.inc(rows)


@functools.cache  # the calculations are a fixed few; finding a labelled series costs more than counting it
def _calculation_counters(name: str) -> tuple[Counter, Counter]:
    return CALCULATIONS.labels(name), CALCULATION_ROWS.labels(name)


def record_parts_write(action: PartsWrite) -> None:
    """Count a write to the parts table; call it after the transaction committed."""
    PARTS_WRITES.labels(action).inc()


def observe_request(status: int, seconds: float) -> None:
    """Count the current request, labelled by its URL rule so part ids and typos don't multiply series."""
    method = request.method if request.method in _METHODS else "other"
    endpoint = request.url_rule.rule if request.url_rule is not None else UNMATCHED
    requests, duration = _request_series(method, endpoint, status)
    requests.inc()
    duration.observe(seconds)


@functools.cache  # bounded: the methods above, the URL rules and the status codes
def _request_series(method: str, endpoint: str, status: int) -> tuple[Counter, Histogram]:
    return REQUESTS.labels(method, endpoint, str(status)), REQUEST_DURATION.labels(method, endpoint)


def _exposition() -> Response:
    registry = REGISTRY
    if "PROMETHEUS_MULTIPROC_DIR" in os.environ:
        # A fresh registry per scrape, as the multiprocess collector reads the workers' files when asked.
        registry = CollectorRegistry()
        MultiProcessCollector(registry)
    encoder, content_type = choose_encoder(request.headers.get("Accept"))
    return Response(encoder(registry), content_type=content_type)


def add_metrics_route(app: Flask) -> None:
    """``GET /metrics``: a plain Flask route, so it stays out of the API's OpenAPI document."""
    app.add_url_rule("/metrics", "metrics", _exposition, methods=["GET"])
