"""The Flask application factory."""

from __future__ import annotations

import logging
from collections.abc import Callable, Mapping
from http import HTTPStatus
from inspect import iscoroutinefunction
from pathlib import Path
from typing import Any

from flask import Flask, Response, request
from flask_smorest import Api
from flask_smorest.utils import prepare_response
from sqlalchemy.exc import OperationalError
from werkzeug.exceptions import HTTPException

from calcsvc.config import load_config
from calcsvc.core.outcome import DomainError
from calcsvc.data.database import Database, is_busy
from calcsvc.data.store_errors import StoreError
from calcsvc.service.errors import ServiceError
from calcsvc.web import (
    batch_api,
    calc_api,
    designs_api,
    health,
    landing,
    parts_api,
    plots_api,
    review_api,
    review_page,
    select_api,
)
from calcsvc.web.observability import install_observability
from calcsvc.web.problems import (
    PROBLEM_MIMETYPE,
    BodyErrorsPlugin,
    Problem,
    ProblemSchema,
    database_problem,
    domain_problem,
    from_http_exception,
    problem_response,
    service_problem,
    store_problem,
)
from calcsvc.web.request_body import buffer_body

log = logging.getLogger("calcsvc")

API_VERSION = "1.0.0"
BODY_MIMETYPES = {"application/json", "text/csv"}


class _Flask(Flask):
    """Flask, finding once per function whether it is a coroutine: it asks on every hook and wrapper layer of
    every request (14 times for a calculation, about 10 µs of its CPU), and the answer never changes."""

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self._plain: dict[Callable[..., Any], bool] = {}

    def ensure_sync(self, func: Callable[..., Any]) -> Callable[..., Any]:
        key = getattr(func, "__func__", func)  # a view's bound method is new on every request; its function is not
        plain = self._plain.get(key)
        if plain is None:
            plain = self._plain[key] = not iscoroutinefunction(func)
        return func if plain else super().ensure_sync(func)


class ProblemApi(Api):
    """flask-smorest Api whose every error is an RFC 9457 problem document."""

    ERROR_SCHEMA = ProblemSchema

    def handle_http_exception(self, error: HTTPException) -> Response:  # type: ignore[override]
        return problem_response(from_http_exception(error))

    def _register_responses(self) -> None:
        # As flask-smorest's own, but documenting errors as application/problem+json, which they are.
        for status in HTTPStatus:
            response: dict[str, Any] = {"description": status.phrase}
            if status >= 400:
                response["schema"] = self.ERROR_SCHEMA
            prepare_response(response, self.spec, PROBLEM_MIMETYPE)
            self.spec.components.response(status.name, response, lazy=True)
        response = {"description": "Any other error, as a problem document", "schema": self.ERROR_SCHEMA}
        prepare_response(response, self.spec, PROBLEM_MIMETYPE)
        self.spec.components.response(self.DEFAULT_ERROR_RESPONSE_NAME, response, lazy=True)


def _database_down(error: OperationalError) -> Response:
    busy = is_busy(error)
    level, state = (logging.WARNING, "busy") if busy else (logging.ERROR, "unavailable")
    log.log(level, "database %s on %s %s: %s", state, request.method, request.path, type(error).__name__)
    return problem_response(database_problem(busy))


def _unexpected(error: Exception) -> Response:
    if isinstance(error, HTTPException):
        return problem_response(from_http_exception(error))
    if isinstance(error, RecursionError):
        return problem_response(Problem(400, "the request body is nested too deeply", "malformed-body"))
    if isinstance(error, ValueError) and "integer string conversion" in str(error):
        # The JSON parser refuses integer literals of thousands of digits (Python's guard against slow
        # conversions) with a plain ValueError, which the argument parser does not take for bad JSON.
        return problem_response(Problem(400, "a number in the request body has too many digits", "malformed-body"))
    log.exception("unhandled error on %s %s", request.method, request.path)
    return problem_response(
        Problem(500, "the server failed to answer this request; the failure has been logged", "internal")
    )


def _check_body() -> Response | None:
    """Refuse non-JSON bodies, then read the body whole under its route's limits, before anything parses it
    (or asks who sent it)."""
    chunked = "chunked" in request.headers.get("Transfer-Encoding", "").lower()
    if request.method in {"POST", "PUT", "PATCH", "DELETE"} and (request.content_length or chunked):
        if request.mimetype not in BODY_MIMETYPES and request.blueprint != review_page.bp.name:  # HTML forms
            return problem_response(
                Problem(
                    415,
                    f"send the body as application/json, not {request.mimetype or 'untyped'}",
                    "media-type",
                )
            )
    buffer_body(request)
    return None


def _cors(response: Response, origins: list[str]) -> Response:
    origin = request.headers.get("Origin")
    if origin and origin in origins:
        response.headers["Access-Control-Allow-Origin"] = origin
        response.headers["Access-Control-Allow-Headers"] = "Authorization, Content-Type, If-Match"
        response.headers["Access-Control-Allow-Methods"] = "GET, POST, PUT, DELETE"
        response.headers["Access-Control-Expose-Headers"] = "ETag, Location"
        response.vary.add("Origin")
    return response


def create_app(config: Mapping[str, Any] | None = None) -> Flask:
    app = _Flask("calcsvc", instance_relative_config=True)
    app.config.update(load_config(config))
    if not app.config["DATABASE_URL"]:
        app.config["DATABASE_URL"] = f"sqlite:///{Path(app.instance_path) / 'calcsvc.sqlite'}"
    app.config.update(
        API_TITLE="calcsvc",
        API_VERSION=API_VERSION,
        OPENAPI_VERSION="3.1.0",
        OPENAPI_URL_PREFIX="/",
        OPENAPI_JSON_PATH="openapi.json",
        API_SPEC_OPTIONS={
            "info": {
                "description": "Vetted design calculations for op-amp stages, BJT LED switches and supply "
                "budgets, over a shared, reviewed, revisioned parts table. Numbers are SI base units; "
                "every field name carries its unit. Errors are RFC 9457 problem documents.",
            },
            "components": {
                "securitySchemes": {"bearer": {"type": "http", "scheme": "bearer"}},
            },
        },
    )
    logging.getLogger("calcsvc").setLevel(app.config["LOG_LEVEL"])
    app.extensions["calcsvc.db"] = Database(app.config["DATABASE_URL"], app.config["DB_POOL_SIZE"])

    api = ProblemApi(app, spec_kwargs={"extra_plugins": [BodyErrorsPlugin()]})
    app.extensions["calcsvc.api"] = api
    api.register_blueprint(health.blp)
    api.register_blueprint(parts_api.blp)
    install_observability(app)
    api.register_blueprint(calc_api.blp)
    api.register_blueprint(batch_api.blp)
    api.register_blueprint(review_api.blp)
    api.register_blueprint(plots_api.blp)
    api.register_blueprint(select_api.blp)
    api.register_blueprint(designs_api.blp)
    api.register_blueprint(designs_api.impact_blp)
    app.register_blueprint(review_page.bp)
    app.register_blueprint(landing.bp)

    app.register_error_handler(Problem, problem_response)
    app.register_error_handler(ServiceError, lambda error: problem_response(service_problem(error)))
    app.register_error_handler(StoreError, lambda error: problem_response(store_problem(error)))
    app.register_error_handler(DomainError, lambda error: problem_response(domain_problem(error)))
    app.register_error_handler(OperationalError, _database_down)
    app.register_error_handler(Exception, _unexpected)
    app.before_request(_check_body)
    origins = app.config["CORS_ORIGINS"]
    app.after_request(lambda response: _cors(response, origins))
    return app
