"""``/v1/parts``: the shared, reviewed, revisioned parts table."""

from __future__ import annotations

from dataclasses import asdict
from typing import Any

from flask import g, request, url_for
from flask.views import MethodView
from flask_smorest import Blueprint
from marshmallow import RAISE, Schema, fields, validate

from calcsvc.data import part_ids
from calcsvc.data.kinds import KINDS, MAX_DESCRIPTION_LENGTH
from calcsvc.data.part_history import ACTIONS
from calcsvc.data.review_notes import MAX_NOTE_LENGTH, comment, send_back
from calcsvc.data.store import STATUSES, PartStore, PartView
from calcsvc.service.parts import (
    NO_NUL,
    ParametersField,
    PartCreateSchema,
    convert_parameters,
)
from calcsvc.web.auth import database, reads, requires
from calcsvc.web.calc_schemas import safety_field
from calcsvc.web.metrics import record_parts_write
from calcsvc.web.problems import Problem, error_response
from calcsvc.web.revisioned import IfMatchSchema, UtcDateTime, expected_revision, storable_revision

blp = Blueprint("parts", __name__, url_prefix="/v1/parts", description="The shared parts table")


class PartUpdateSchema(Schema):
    description = fields.String(load_default=None, validate=[validate.Length(max=MAX_DESCRIPTION_LENGTH), NO_NUL])
    parameters = ParametersField(required=True)


class ReasonSchema(Schema):
    reason = fields.String(
        load_default=None,
        validate=[validate.Length(min=1, max=500), NO_NUL],
        metadata={"description": "why, kept in the part's history"},
    )


class PartSchema(Schema):
    part_id = fields.String(required=True)
    kind = fields.String(required=True)
    description = fields.String(required=True)
    parameters = fields.Dict(required=True)
    status = fields.String(required=True, validate=validate.OneOf(STATUSES))
    revision = fields.Integer(required=True)
    updated_at = UtcDateTime(required=True)
    updated_by = fields.String(required=True)
    approved_by = fields.String(allow_none=True, required=True)


class PartAnswerSchema(PartSchema):
    safety = safety_field()


class PartListSchema(Schema):
    items = fields.List(fields.Nested(PartSchema), required=True)
    safety = safety_field()
    total = fields.Integer(required=True)
    offset = fields.Integer(required=True)
    limit = fields.Integer(required=True)


class PartQuerySchema(Schema):
    kind = fields.String(validate=validate.OneOf(list(KINDS)))
    status = fields.String(validate=validate.OneOf(STATUSES))
    offset = fields.Integer(load_default=0, validate=validate.Range(min=0, max=1_000_000))
    limit = fields.Integer(load_default=50, validate=validate.Range(min=1, max=500))


class EventSchema(Schema):
    action = fields.String(required=True, validate=validate.OneOf(ACTIONS))
    actor = fields.String(required=True)
    at = UtcDateTime(required=True)
    reason = fields.String(allow_none=True, required=True)


class RevisionSchema(Schema):
    revision = fields.Integer(required=True)
    kind = fields.String(required=True)
    description = fields.String(required=True)
    parameters = fields.Dict(required=True)
    author = fields.String(required=True)
    created_at = UtcDateTime(required=True)
    approved_by = fields.String(allow_none=True, required=True)
    approved_at = UtcDateTime(allow_none=True, required=True)
    events = fields.List(
        fields.Nested(EventSchema), required=True, metadata={"description": "what was done to this revision, in order"}
    )


class RevisionListSchema(Schema):
    part_id = fields.String(required=True)
    revisions = fields.List(fields.Nested(RevisionSchema), required=True)
    safety = safety_field()


def part_response(view: PartView, status: int = 200) -> tuple[dict[str, Any], int, dict[str, str]]:
    return asdict(view), status, {"ETag": view.etag}


@blp.before_request
def _no_such_shape() -> None:
    """An id no part can have is not looked up (PostgreSQL refuses a NUL in a query with an error)."""
    part_id = (request.view_args or {}).get("part_id")
    if part_id is not None and not part_ids.is_part_id(part_id):
        message = f"no part {part_id[:80]!r}: {part_ids.RULE}"
        raise Problem(404, message, "part-not-found", {"part_id": [message]})


@blp.route("")
class Parts(MethodView):
    @reads
    @blp.arguments(PartQuerySchema, location="query", unknown=RAISE)  # a misspelt filter is refused, not dropped
    @blp.response(200, PartListSchema)
    def get(self, query: dict[str, Any]) -> dict[str, Any]:
        """List parts, filtered by kind and status, in pages."""
        with database().transaction() as session:
            views, total = PartStore(session).list(
                query.get("kind"), query.get("status"), query["offset"], query["limit"]
            )
        return {
            "items": [asdict(v) for v in views],
            "total": total,
            "offset": query["offset"],
            "limit": query["limit"],
        }

    @requires("editor")
    @blp.arguments(PartCreateSchema)
    @blp.response(201, PartAnswerSchema, headers={"Location": {"schema": {"type": "string"}}})
    @error_response(blp, 401, "no valid token")
    @error_response(blp, 403, "the token's role may not create parts")
    @error_response(blp, 409, "a part with this id exists")
    def post(self, body: dict[str, Any]) -> tuple[dict[str, Any], int, dict[str, str]]:
        """Add a part as a draft at revision 1 (editor)."""
        parameters = convert_parameters(body["kind"], body["parameters"])
        with database().transaction() as session:
            view = PartStore(session).create(
                body["part_id"], body["kind"], body["description"], parameters, g.identity.name
            )
        record_parts_write("create")
        data, _, headers = part_response(view)
        headers["Location"] = url_for("parts.Part", part_id=view.part_id)
        return data, 201, headers


@blp.route("/<string:part_id>")
class Part(MethodView):
    @reads
    @blp.response(200, PartAnswerSchema, headers={"ETag": {"schema": {"type": "string"}}})
    @error_response(blp, 404, "no such part")
    def get(self, part_id: str) -> tuple[dict[str, Any], int, dict[str, str]]:
        """One part at its current revision, with the revision's ETag."""
        with database().transaction() as session:
            return part_response(PartStore(session).get(part_id))

    @requires("editor")
    @blp.arguments(IfMatchSchema, location="headers")
    @blp.arguments(PartUpdateSchema)
    @blp.response(200, PartAnswerSchema, headers={"ETag": {"schema": {"type": "string"}}})
    @error_response(blp, 401, "no valid token")
    @error_response(blp, 403, "the token's role may not edit parts")
    @error_response(blp, 404, "no such part")
    @error_response(blp, 409, "the part is retired")
    @error_response(blp, 412, "the part changed since the ETag was read")
    @error_response(blp, 428, "If-Match is missing")
    def put(
        self, _headers: dict[str, Any], body: dict[str, Any], part_id: str
    ) -> tuple[dict[str, Any], int, dict[str, str]]:
        """Store a new revision (editor); needs If-Match; the part returns to draft until approved."""
        expected = expected_revision(part_id)
        with database().transaction() as session:
            store = PartStore(session)
            current = store.get(part_id)
            parameters = convert_parameters(current.kind, body["parameters"])
            description = current.description if body["description"] is None else body["description"]
            view = store.update(part_id, expected, description, parameters, g.identity.name)
        record_parts_write("update")
        return part_response(view)

    @requires("editor")
    @blp.arguments(IfMatchSchema, location="headers")
    @blp.arguments(ReasonSchema, required=False)
    @blp.response(200, PartAnswerSchema, headers={"ETag": {"schema": {"type": "string"}}})
    @error_response(blp, 401, "no valid token")
    @error_response(blp, 403, "the token's role may not retire parts")
    @error_response(blp, 404, "no such part")
    @error_response(blp, 412, "the part changed since the ETag was read")
    @error_response(blp, 428, "If-Match is missing")
    def delete(
        self, _headers: dict[str, Any], body: dict[str, Any] | None, part_id: str
    ) -> tuple[dict[str, Any], int, dict[str, str]]:
        """Retire the revision If-Match names (editor), with an optional reason: refused in new calculations
        unless pinned by revision; recorded in the history; undone only by a restore and a new review."""
        expected = expected_revision(part_id)
        with database().transaction() as session:
            view = PartStore(session).retire(part_id, expected, g.identity.name, (body or {}).get("reason"))
        record_parts_write("retire")
        return part_response(view)


@blp.route("/<string:part_id>/approve")
class Approve(MethodView):
    @requires("reviewer")
    @blp.arguments(IfMatchSchema, location="headers")
    @blp.response(200, PartAnswerSchema, headers={"ETag": {"schema": {"type": "string"}}})
    @error_response(blp, 401, "no valid token")
    @error_response(blp, 403, "not a reviewer, or the reviewer wrote this revision")
    @error_response(blp, 404, "no such part")
    @error_response(blp, 409, "the part is retired")
    @error_response(blp, 412, "the revision If-Match names is no longer current")
    @error_response(blp, 428, "If-Match is missing")
    @error_response(blp, 415, "a body was sent, and not as JSON (approval takes none)")
    def post(self, _headers: dict[str, Any], part_id: str) -> tuple[dict[str, Any], int, dict[str, str]]:
        """Approve the revision If-Match names, if it is still current (reviewer; not its author)."""
        revision = expected_revision(part_id)
        with database().transaction() as session:
            view = PartStore(session).approve(part_id, revision, g.identity.name)
        record_parts_write("approve")
        return part_response(view)


@blp.route("/<string:part_id>/restore")
class Restore(MethodView):
    @requires("editor")
    @blp.arguments(IfMatchSchema, location="headers")
    @blp.arguments(ReasonSchema, required=False)
    @blp.response(200, PartAnswerSchema, headers={"ETag": {"schema": {"type": "string"}}})
    @error_response(blp, 401, "no valid token")
    @error_response(blp, 403, "the token's role may not restore parts")
    @error_response(blp, 404, "no such part")
    @error_response(blp, 409, "the part is not retired")
    @error_response(blp, 412, "the part changed since the ETag was read")
    @error_response(blp, 428, "If-Match is missing")
    def post(
        self, _headers: dict[str, Any], body: dict[str, Any] | None, part_id: str
    ) -> tuple[dict[str, Any], int, dict[str, str]]:
        """Bring a retired part back as a new draft revision (editor), with an optional reason; it is used with
        a draft warning until a reviewer approves it."""
        expected = expected_revision(part_id)
        with database().transaction() as session:
            view = PartStore(session).restore(part_id, expected, g.identity.name, (body or {}).get("reason"))
        record_parts_write("restore")
        return part_response(view)


@blp.route("/<string:part_id>/revisions")
class Revisions(MethodView):
    @reads
    @blp.response(200, RevisionListSchema)
    @error_response(blp, 404, "no such part")
    def get(self, part_id: str) -> dict[str, Any]:
        """Every revision of a part, oldest first, with its parameters, author and approval."""
        return _history(part_id)


class SendBackSchema(Schema):
    reason = fields.String(
        required=True,
        validate=[validate.Length(min=1, max=MAX_NOTE_LENGTH), NO_NUL],
        metadata={"description": "why the draft goes back to its author, kept with the revision"},
    )


class CommentSchema(Schema):
    comment = fields.String(
        required=True,
        validate=[validate.Length(min=1, max=MAX_NOTE_LENGTH), NO_NUL],
        metadata={"description": "the remark, kept with the revision"},
    )


def _history(part_id: str) -> dict[str, Any]:
    with database().transaction() as session:
        revisions = PartStore(session).revisions(part_id)
    return {"part_id": part_id, "revisions": [asdict(r) for r in revisions]}


@blp.route("/<string:part_id>/send-back")
class SendBack(MethodView):
    @requires("reviewer")
    @blp.arguments(IfMatchSchema, location="headers")
    @blp.arguments(SendBackSchema)
    @blp.response(200, PartAnswerSchema, headers={"ETag": {"schema": {"type": "string"}}})
    @error_response(blp, 401, "no valid token")
    @error_response(blp, 403, "not a reviewer")
    @error_response(blp, 404, "no such part")
    @error_response(blp, 409, "the revision is not a draft, or the part is retired")
    @error_response(blp, 412, "the revision If-Match names is no longer current")
    @error_response(blp, 428, "If-Match is missing")
    def post(
        self, _headers: dict[str, Any], body: dict[str, Any], part_id: str
    ) -> tuple[dict[str, Any], int, dict[str, str]]:
        """Send the draft If-Match names back to its author with a reason (reviewer): it stays a draft, and the
        reason is a `returned` event of that revision, shown in its history and on the review page."""
        revision = expected_revision(part_id)
        with database().transaction() as session:
            send_back(session, part_id, revision, g.identity.name, body["reason"])
            view = PartStore(session).get(part_id)
        record_parts_write("send_back")
        return part_response(view)


@blp.route("/<string:part_id>/revisions/<int:revision>/comments")
class Comments(MethodView):
    @requires("editor")
    @blp.arguments(CommentSchema)
    @blp.response(200, RevisionListSchema)
    @error_response(blp, 401, "no valid token")
    @error_response(blp, 404, "no such part or revision")
    def post(self, body: dict[str, Any], part_id: str, revision: int) -> dict[str, Any]:
        """Comment on a revision (editor or reviewer): a `commented` event of that revision, part of its history.
        Answers the part's revisions with their events."""
        with database().transaction() as session:
            comment(session, part_id, storable_revision(part_id, revision), g.identity.name, body["comment"])
        record_parts_write("comment")
        return _history(part_id)
