"""The saved designs' request and response schemas."""

from __future__ import annotations

from typing import Any

from marshmallow import Schema, ValidationError, fields, validate

from calcsvc.core.registry import CALCULATIONS
from calcsvc.data.design_store import DESIGN_STATUSES
from calcsvc.data.kinds import MAX_DESCRIPTION_LENGTH
from calcsvc.service.designs import CALCULATION_NAMES
from calcsvc.service.parts import NO_NUL, part_id_field
from calcsvc.web.calc_schemas import PartUsedSchema, request_schema
from calcsvc.web.problems import Problem
from calcsvc.web.review_schemas import REVIEW_REQUEST
from calcsvc.web.revisioned import UtcDateTime

# The body each kind of design holds is the body of its own endpoint, read by that endpoint's schema.
REQUESTS: dict[str, Schema] = {"channel": REVIEW_REQUEST} | {
    name: request_schema(calc)() for name, calc in CALCULATIONS.items()
}


def read_request(calculation: str, given: dict[str, Any]) -> dict[str, Any]:
    """The design's request read as its endpoint reads it (SI numbers); a 422 names each field at fault."""
    try:
        loaded: dict[str, Any] = REQUESTS[calculation].load(given)
    except ValidationError as exc:
        messages = exc.normalized_messages()
        errors = {
            f"request.{name}": [str(m) for m in (found if isinstance(found, list) else [found])]
            for name, found in messages.items()
        }
        raise Problem(422, "the design's request is not valid", "validation", errors) from exc
    return loaded


class DesignWriteSchema(Schema):
    calculation = fields.String(
        load_default="channel",
        validate=validate.OneOf(CALCULATION_NAMES),
        metadata={"description": "channel (the body of /v1/review/channel) or a calculation's name"},
    )
    owner = fields.String(
        load_default=None,
        validate=[validate.Length(min=1, max=64), NO_NUL],
        metadata={"description": "who answers for the design (default: the token's name)"},
    )
    description = fields.String(load_default="", validate=[validate.Length(max=MAX_DESCRIPTION_LENGTH), NO_NUL])
    request = fields.Dict(required=True, metadata={"description": "the request body, as its endpoint takes it"})


class DesignCreateSchema(DesignWriteSchema):
    design_id = part_id_field(required=True, metadata={"description": "the design's name, as a part_id is written"})


class DesignQuerySchema(Schema):
    status = fields.String(validate=validate.OneOf(DESIGN_STATUSES))
    fails_at_current = fields.Boolean(
        load_default=False, metadata={"description": "only designs that fail at today's approved parts"}
    )
    affected_by_draft = fields.Boolean(
        load_default=False, metadata={"description": "only designs a pending part draft would change"}
    )
    offset = fields.Integer(load_default=0, validate=validate.Range(min=0, max=1_000_000))
    limit = fields.Integer(load_default=50, validate=validate.Range(min=1, max=500))


class RereviewQuerySchema(Schema):
    revision = fields.Integer(validate=validate.Range(min=1), metadata={"description": "default: the current one"})


class SavedDesignSchema(Schema):
    design_id = fields.String(required=True)
    revision = fields.Integer(required=True)
    status = fields.String(required=True, validate=validate.OneOf(DESIGN_STATUSES))
    calculation = fields.String(required=True)
    owner = fields.String(required=True)
    description = fields.String(required=True)
    body = fields.Dict(required=True, metadata={"description": "the request as it was given"})
    inputs = fields.Dict(required=True, metadata={"description": "the request as read: SI numbers, part references"})
    parts = fields.List(fields.Nested(PartUsedSchema), required=True, metadata={"description": "revisions used"})
    review = fields.Dict(
        required=True,
        metadata={"description": "the review at those revisions: verdict, failing, tightest margin, checks"},
    )
    author = fields.String(required=True)
    created_at = UtcDateTime(required=True)
    current = fields.Dict(metadata={"description": "with fails_at_current: the review at today's approved parts"})
    drafts = fields.List(
        fields.Dict(), metadata={"description": "with affected_by_draft: each pending draft that changes it"}
    )


class DesignListSchema(Schema):
    items = fields.List(fields.Nested(SavedDesignSchema), required=True)
    total = fields.Integer(required=True)
    offset = fields.Integer(required=True)
    limit = fields.Integer(required=True)


class DesignRevisionsSchema(Schema):
    design_id = fields.String(required=True)
    revisions = fields.List(fields.Nested(SavedDesignSchema), required=True)


class RereviewSchema(Schema):
    design_id = fields.String(required=True)
    revision = fields.Integer(required=True)
    pinned = fields.Dict(required=True, metadata={"description": "at the revisions saved; reproduced: same answer"})
    current = fields.Dict(required=True, metadata={"description": "at the parts' current approved revisions"})
    differs = fields.Boolean(required=True)
    changes = fields.List(fields.String(), required=True)
    check_changes = fields.List(fields.Dict(), required=True)


class ImpactSummarySchema(Schema):
    pass_to_fail = fields.Integer(required=True)
    fail_to_pass = fields.Integer(required=True)
    changed = fields.Integer(required=True)
    using = fields.Integer(required=True, metadata={"description": "active saved designs that use the part"})
    text = fields.String(required=True)


class ImpactSchema(Schema):
    part_id = fields.String(required=True)
    revision = fields.Integer(required=True)
    status = fields.String(required=True)
    summary = fields.Nested(ImpactSummarySchema, required=True)
    designs = fields.List(
        fields.Dict(),
        required=True,
        metadata={"description": "each design whose verdict, failing checks or tightest margin changes"},
    )
