"""The channel review's request and response schemas, shared by the review, the channel search and the page."""

from __future__ import annotations

from marshmallow import Schema, fields

from calcsvc.core.channel_spec import CHANNEL_INPUTS
from calcsvc.web.calc_schemas import CheckSchema, PartUsedSchema, request_schema, safety_field

# An instance, not a class: webargs would build a new schema object on every request.
REVIEW_REQUEST = request_schema(CHANNEL_INPUTS)()


class CornerCheckSchema(Schema):
    value = fields.Float(allow_none=True)
    limit = fields.Float(allow_none=True)
    margin = fields.Float(allow_none=True)
    corner = fields.Dict(keys=fields.String(), values=fields.String())


class ReviewCheckSchema(CheckSchema):
    stage = fields.String(required=True)
    part = fields.String(
        metadata={"description": "the part a thermal check judges: led, transistor or string resistor"}
    )
    nominal_ok = fields.Boolean(required=True)
    worst_case = fields.Nested(CornerCheckSchema, required=True)


class YieldSchema(Schema):
    fraction = fields.Float(required=True)
    ci_low = fields.Float(required=True, metadata={"description": "95 % Wilson interval, low end"})
    ci_high = fields.Float(required=True, metadata={"description": "95 % Wilson interval, high end"})
    samples = fields.Integer(required=True)
    seed = fields.Integer(required=True)
    vf_model = fields.String(
        required=True, metadata={"description": "how the LED forward voltages were drawn: one_reel or independent"}
    )
    vf_bin_width_v = fields.Float(
        allow_none=True, required=True, metadata={"description": "forward-voltage bin width (null: independent)"}
    )
    most_failing_check = fields.String(allow_none=True, required=True)
    failures = fields.Dict(keys=fields.String(), values=fields.Integer(), required=True)
    tightest_check = fields.String(
        allow_none=True,
        required=True,
        metadata={"description": "the check whose least margin over the builds is smallest"},
    )
    least_margin = fields.Float(
        allow_none=True, required=True, metadata={"description": "its least margin, a fraction of its limit"}
    )


class BomEntrySchema(Schema):
    item = fields.String(required=True)
    kind = fields.String(required=True, metadata={"description": "resistor, or the part role (transistor, led, ...)"})
    description = fields.String(required=True)
    count = fields.Integer(required=True)
    value_ohm = fields.Float(metadata={"description": "a resistor's standard value"})
    series = fields.String(metadata={"description": "a resistor's standard series"})
    tolerance = fields.Float(metadata={"description": "a resistor's tolerance, a fraction"})
    dissipation_max_w = fields.Float(allow_none=True, metadata={"description": "a resistor's worst-case dissipation"})
    rating_min_w = fields.Float(
        allow_none=True,
        metadata={"description": "smallest standard power rating that fits (null: none up to 5 W)"},
    )
    part_id = fields.String(allow_none=True, metadata={"description": "a part's id (null: given by its values)"})
    revision = fields.Integer(allow_none=True)


class BillOfMaterialsSchema(Schema):
    channels = fields.Integer(required=True)
    per_channel = fields.List(fields.Nested(BomEntrySchema), required=True)
    whole_design = fields.List(
        fields.Nested(BomEntrySchema),
        required=True,
        metadata={"description": "every channel's parts, the shared supply and the front stage's op-amp"},
    )


class ReviewSchema(Schema):
    review = fields.String(required=True)
    inputs = fields.Dict(required=True)
    parts = fields.List(fields.Nested(PartUsedSchema), required=True)
    verdict = fields.String(required=True, metadata={"description": "pass when every check passes at every corner"})
    failing = fields.List(fields.String(), required=True, metadata={"description": "checks failing at some corner"})
    failing_nominal = fields.List(fields.String(), required=True)
    max_duty_cycle = fields.Float(allow_none=True, required=True)
    max_ambient_c = fields.Float(
        allow_none=True,
        required=True,
        metadata={
            "description": "largest ambient (°C) at which every check passes at every corner, from the cold end "
            "of the range up (null: fails already there; 200: passes up to the search's bound)"
        },
    )
    stages = fields.Dict(required=True, metadata={"description": "results of each stage (front_stage null if none)"})
    checks = fields.List(fields.Nested(ReviewCheckSchema), required=True)
    yield_ = fields.Nested(YieldSchema, allow_none=True, required=True, attribute="yield", data_key="yield")
    warnings = fields.List(fields.String(), required=True)
    cautions = fields.List(fields.String(), required=True)
    safety = safety_field()
    bill_of_materials = fields.Nested(BillOfMaterialsSchema, required=True)
    fingerprint = fields.String(required=True)
