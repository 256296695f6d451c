"""RFC 9457 problem documents for every error the service answers, stack traces never included."""

from __future__ import annotations

import logging
from http import HTTPStatus
from typing import Any

from apispec import BasePlugin
from flask import Response, g, json, request
from marshmallow import Schema, fields
from werkzeug.exceptions import HTTPException

from calcsvc.core.outcome import DomainError
from calcsvc.data.store_errors import (
    DesignExists,
    DesignNotFound,
    DesignRetired,
    InvalidPart,
    InvalidPartId,
    NotADraft,
    PartExists,
    PartNotFound,
    PartNotRetired,
    PartRetired,
    SelfApproval,
    StaleRevision,
    StoreError,
)
from calcsvc.service.errors import MalformedBody, PhysicallyImpossible, ServiceError, TooLarge, UnknownPart
from calcsvc.service.safety import SAFETY_LINE

PROBLEM_MIMETYPE = "application/problem+json"
log = logging.getLogger("calcsvc")


class ProblemSchema(Schema):
    """The documented shape of every error response."""

    type = fields.String(required=True, metadata={"description": "URI identifying the kind of problem"})
    title = fields.String(required=True)
    status = fields.Integer(required=True)
    detail = fields.String(required=True)
    instance = fields.String(metadata={"description": "the request path"})
    errors = fields.Dict(
        keys=fields.String(),
        values=fields.List(fields.String()),
        metadata={"description": "messages keyed by the offending field (dotted path for nested fields)"},
    )
    safety = fields.String(required=True, metadata={"description": "the standing safety line every answer carries"})


RETRY_AFTER_HEADER = {
    "Retry-After": {"description": "seconds to wait before trying again", "schema": {"type": "integer", "minimum": 1}}
}


def error_response(blp: Any, status: int, description: str, headers: dict[str, Any] | None = None) -> Any:
    """Document an error status of an operation as a problem document."""
    return blp.alt_response(
        status, schema=ProblemSchema, content_type=PROBLEM_MIMETYPE, description=description, headers=headers
    )


class BodyErrorsPlugin(BasePlugin):
    """Documents the refusals every operation that reads a body can answer before its own logic runs."""

    STATUSES = (HTTPStatus.BAD_REQUEST, HTTPStatus.REQUEST_ENTITY_TOO_LARGE, HTTPStatus.UNSUPPORTED_MEDIA_TYPE)

    def operation_helper(self, path: str | None = None, operations: dict[str, Any] | None = None, **_: Any) -> None:
        for operation in (operations or {}).values():
            if "requestBody" in operation:
                responses = operation.setdefault("responses", {})
                for status in self.STATUSES:
                    if status not in responses and str(int(status)) not in responses:
                        responses[str(int(status))] = status.name  # the problem response registered per status


class Problem(Exception):
    """An error raised anywhere in the HTTP layer and answered as a problem document."""

    def __init__(
        self,
        status: int,
        detail: str,
        slug: str | None = None,
        errors: dict[str, list[str]] | None = None,
        headers: dict[str, str] | None = None,
        title: str | None = None,
        lead: str = "error",
    ) -> None:
        super().__init__(detail)
        self.lead = lead  # the first word of its one line of text
        self.status = status
        self.detail = detail
        self.slug = slug
        self.errors = errors
        self.headers = headers or {}
        self.title = title


_TITLES = {
    400: "Bad request",
    401: "Authentication required",
    403: "Forbidden",
    404: "Not found",
    405: "Method not allowed",
    409: "Conflict",
    412: "Precondition failed",
    413: "Content too large",
    415: "Unsupported media type",
    422: "Unprocessable content",
    428: "Precondition required",
    500: "Internal server error",
    503: "Service unavailable",
}


RETRY_BUSY_S = 2  # a lock that outlasted LOCK_WAIT_S is usually released within moments
RETRY_UNREACHABLE_S = 5  # a server restart or fail-over takes some seconds


def database_problem(busy: bool) -> Problem:
    """The 503 of a database that is busy (a lock held too long) or unreachable, telling clients when to retry."""
    if busy:
        return Problem(
            503,
            "the database is busy (another writer holds a lock); try again in a moment",
            "database-busy",
            headers={"Retry-After": str(RETRY_BUSY_S)},
            title="Database busy",
        )
    return Problem(
        503,
        "the database is not reachable; try again shortly",
        "database-unavailable",
        headers={"Retry-After": str(RETRY_UNREACHABLE_S)},
        title="Database unavailable",
    )


def problem_document(problem: Problem, instance: str | None = None) -> dict[str, Any]:
    """The RFC 9457 body of ``problem`` (``instance``: the request path, when it answers a whole request)."""
    body: dict[str, Any] = {
        "type": f"urn:calcsvc:problem:{problem.slug}" if problem.slug else "about:blank",
        "title": problem.title or _TITLES.get(problem.status, "Error"),
        "status": problem.status,
        "detail": problem.detail,
    }
    if instance is not None:
        body["instance"] = instance
    if problem.errors:
        body["errors"] = problem.errors
    body["safety"] = SAFETY_LINE
    return body


def problem_response(problem: Problem) -> Response:
    page = g.get("error_page")
    if page is not None:
        # A browser page asked (see the review page): the error as a page, with the same status and headers.
        response: Response = page(problem.status, problem.detail)
        response.headers.update(problem.headers)
        return response
    if g.get("plain_errors"):
        # A spreadsheet cell cannot show a JSON document: one short line, same status.
        detail = "; ".join(f"{k}: {v[0]}" for k, v in problem.errors.items()) if problem.errors else problem.detail
        line = f"{problem.lead}: {detail}".replace("\n", " ")[:300]
        status = g.get("plain_errors_status") or problem.status
        return Response(line, status=status, mimetype="text/plain", headers=problem.headers)
    body = problem_document(problem, request.path)
    response = Response(json.dumps(body), status=problem.status, mimetype=PROBLEM_MIMETYPE)
    for name, value in problem.headers.items():
        response.headers[name] = value
    return response


def _flatten(messages: Any, prefix: str = "") -> dict[str, list[str]]:
    """webargs/marshmallow nest messages by location and field; clients want one level keyed by field."""
    if isinstance(messages, dict):
        flat: dict[str, list[str]] = {}
        for key, value in messages.items():
            name = f"{prefix}.{key}" if prefix else str(key)
            if key == "_schema":
                name = prefix or "body"
            flat.update(_flatten(value, name))
        return flat
    if isinstance(messages, list) and all(isinstance(m, str) for m in messages):
        return {prefix or "body": list(messages)}
    if isinstance(messages, list):
        flat = {}
        for index, value in enumerate(messages):
            flat.update(_flatten(value, f"{prefix}.{index}"))
        return flat
    return {prefix or "body": [str(messages)]}


def from_http_exception(error: HTTPException) -> Problem:
    code = error.code or 500
    headers = {k: v for k, v in error.get_headers() if k.lower() != "content-type"}
    data = getattr(error, "data", None) or {}
    messages = data.get("errors") or data.get("messages")
    if code == 422 and messages:
        # Strip the location level ("json", "query", "headers") so errors are keyed by field name.
        per_location = messages if isinstance(messages, dict) else {"body": messages}
        errors: dict[str, list[str]] = {}
        for location_messages in per_location.values():
            errors.update(_flatten(location_messages))
        fields_named = ", ".join(sorted(errors))
        return Problem(422, f"invalid input: {fields_named}", "validation", errors, headers)
    if code == 400 and messages:
        return Problem(400, "the request body is not valid JSON", "malformed-body", _flatten(messages), headers)
    detail = data.get("message") or (error.description or "").strip() or _TITLES.get(code, "Error")
    if code == 413:
        detail = "the request body is larger than this server accepts (MAX_CONTENT_LENGTH)"
    elif code == 404:
        detail = f"no resource at {request.path}"
    elif code == 405:
        detail = f"{request.method} is not allowed on {request.path}"
    elif code >= 500:
        detail = "the server failed to answer this request; the failure has been logged"
    return Problem(code, detail, headers=headers)


_SERVICE_STATUS: tuple[tuple[type[ServiceError], int], ...] = (
    (UnknownPart, 404),
    (TooLarge, 413),
    (MalformedBody, 400),
    (ServiceError, 422),  # invalid input, wrong part kind, retired part, physically impossible
)


def service_problem(error: ServiceError) -> Problem:
    """The one mapping of the application layer's refusals to HTTP."""
    status = next(status for kind, status in _SERVICE_STATUS if isinstance(error, kind))
    title = "Physically impossible input" if isinstance(error, PhysicallyImpossible) else None
    return Problem(status, error.detail, error.slug, error.errors, title=title)


def domain_problem(error: DomainError) -> Problem:
    return service_problem(PhysicallyImpossible.of(error.violations))


_STORE_STATUS: dict[type[StoreError], tuple[int, str]] = {
    PartNotFound: (404, "part-not-found"),
    PartExists: (409, "part-exists"),
    StaleRevision: (412, "stale-revision"),
    SelfApproval: (403, "self-approval"),
    PartRetired: (409, "part-retired"),
    PartNotRetired: (409, "part-not-retired"),
    NotADraft: (409, "not-a-draft"),
    InvalidPartId: (422, "invalid-part-id"),
    DesignNotFound: (404, "design-not-found"),
    DesignExists: (409, "design-exists"),
    DesignRetired: (409, "design-retired"),
}


def store_problem(error: StoreError) -> Problem:
    """The one mapping of the parts store's refusals to HTTP."""
    if isinstance(error, InvalidPart):
        errors = {k if k in ("kind", "description") else f"parameters.{k}": [v] for k, v in error.errors.items()}
        return Problem(422, "the part's parameters are not valid", "invalid-part", errors)
    status, slug = _STORE_STATUS.get(type(error), (400, "store"))
    return Problem(status, str(error), slug, {error.field: [str(error)]} if error.field else None)
