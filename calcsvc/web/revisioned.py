"""What the revisioned resources (parts, saved designs) share over HTTP: the ETag each revision carries, the
If-Match a write must send, and timestamps written as RFC 3339 with their zone."""

from __future__ import annotations

import re
from datetime import UTC, datetime
from typing import Any

from flask import request
from marshmallow import Schema, fields

from calcsvc.data.store_errors import PartNotFound
from calcsvc.service.parts import MAX_REVISION
from calcsvc.web.problems import Problem

_ETAG = re.compile(r'(?:W/)?"(?P<id>[a-z0-9-]+)-r(?P<revision>[0-9]{1,10})"')  # used with fullmatch


class UtcDateTime(fields.DateTime):
    """The store writes UTC; SQLite returns it without the zone, which RFC 3339 date-time requires."""

    def _serialize(self, value: datetime | None, attr: str | None, obj: Any, **kwargs: Any) -> str | None:
        if value is not None and value.tzinfo is None:
            value = value.replace(tzinfo=UTC)
        return super()._serialize(value, attr, obj, **kwargs)


class IfMatchSchema(Schema):
    if_match = fields.String(data_key="If-Match", metadata={"description": "the ETag of the revision you read"})


def expected_revision(resource_id: str) -> int:
    """The revision the request's If-Match names: 428 without one, 412 when it names no revision of the resource."""
    header = request.headers.get("If-Match")
    if header is None:
        raise Problem(
            428,
            "send If-Match with the ETag of the revision you read, so you act on what you saw",
            "if-match-missing",
            {"If-Match": ["required"]},
        )
    match = _ETAG.fullmatch(header.strip())
    if match is None or match["id"] != resource_id or int(match["revision"]) > MAX_REVISION:
        raise Problem(412, f"If-Match {header!r} does not name a revision of '{resource_id}'", "stale-revision")
    return int(match["revision"])


def storable_revision(part_id: str, revision: int) -> int:
    """A revision number from a URL path; one beyond any a store holds is no revision (a 404 naming it), never a
    number handed to a database that cannot take it."""
    if revision > MAX_REVISION:
        raise PartNotFound(f"part '{part_id}' has no revision {revision}", "revision")
    return revision
