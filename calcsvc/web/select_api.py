"""``/v1/select``: which parts we stock meet a requirement, and which has the most margin.

``POST /v1/select/<calculation>`` searches one role of a calculation; ``POST /v1/select/channel`` searches
the design space of a whole channel review. This module reads the request (schemas: calcsvc.web.select_schemas)
and answers; the search is calcsvc.service.search.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from flask import current_app
from flask.views import MethodView
from flask_smorest import Blueprint
from marshmallow import ValidationError

from calcsvc.core.registry import CALCULATIONS
from calcsvc.core.spec import CalculationSpec
from calcsvc.service.errors import InvalidInput
from calcsvc.service.search.channel import YIELD_SHORTLIST
from calcsvc.service.search.select import Selection, run_channel_select, run_select
from calcsvc.service.search.switch import run_switch_select
from calcsvc.web.auth import database, guard_reads
from calcsvc.web.calc_schemas import camel
from calcsvc.web.metrics import record_calculation
from calcsvc.web.problems import error_response
from calcsvc.web.select_schemas import (
    FILTERS,
    INPUTS,
    ChannelSelectionSchema,
    SelectionSchema,
    SwitchSelectionSchema,
    channel_schema,
    select_schema,
    switch_schema,
)

FILTER_FORM = (
    'A searched role is a filter object, {"status": ["approved"], "where": {"<parameter>": {"min": …, "max": …}}}: '
    "current parts of those statuses (default approved) whose parameters lie within the bounds (inclusive; SI "
    'numbers or strings with units such as "20 mA"; a part without the parameter does not match), or a list of '
    "part_ids (current revisions; retired ones are excluded)."
)
blp = Blueprint(
    "select",
    __name__,
    url_prefix="/v1/select",
    description="Candidate search over the parts table: which parts meet a requirement and which has the most "
    "margin, every candidate through the same calculation as a single request, in one vectorized pass. "
    + FILTER_FORM
    + " duty-cycle-power has no search: its loads are not parts. Margins rest on the table's values: a "
    "passing candidate is a shortlist for review, not a substitute for its datasheet.",
)

guard_reads(blp)  # searches read the parts table, so they follow its read protection


def load_inputs(calc: CalculationSpec, raw: Mapping[str, Any]) -> dict[str, Any]:
    """A required calculation's inputs, loaded as its own request body is."""
    try:
        loaded: dict[str, Any] = INPUTS[calc.name]().load(raw)
    except ValidationError as exc:
        messages = exc.normalized_messages()
        errors = {k: v if isinstance(v, list) else [str(v)] for k, v in messages.items()}
        raise InvalidInput("invalid input", errors) from exc
    return loaded


def _answered(selection: Selection) -> dict[str, Any]:
    for name, rows in selection.evaluated:
        record_calculation(name, rows)
    return selection.document


SELECT_DOC = (
    "The body of POST /v1/calc/{name} with one role open: given as a filter object or a list of part_ids, or "
    "left out and named in search. Other roles may be fixed part references; explicit values win over every "
    "candidate's. require adds calculations whose checks every candidate must also pass (the same role, their "
    "own inputs; their checks are named <calculation>.<check>, rank_by may name <calculation>.<result>). "
    "Order: passing candidates by the least margin over all checks, descending (or by rank_by in order); ties "
    "by that margin descending, then by the next-least margin and so on, then part_id ascending; then failing "
    "ones by margin descending; last those the core refuses as physically impossible (failing "
    "physically_possible, with the core's reasons in problem). Parts a role refuses (e.g. a pnp transistor "
    "where an npn is needed) are listed in excluded. More candidates than SELECT_MAX_COMBINATIONS: 413."
)


def _register(calc: CalculationSpec) -> None:
    class SelectView(MethodView):
        @blp.arguments(select_schema(calc))
        @blp.response(200, SelectionSchema)
        @error_response(blp, 404, "a referenced part does not exist")
        @error_response(blp, 413, "more candidates than SELECT_MAX_COMBINATIONS")
        @blp.doc(summary=f"Parts that meet a {calc.name} requirement, best first", description=SELECT_DOC)
        def post(self, body: dict[str, Any]) -> dict[str, Any]:
            limit = current_app.config["SELECT_MAX_COMBINATIONS"]
            return _answered(run_select(database(), calc, body, load_inputs, limit))

    SelectView.__name__ = f"Select{camel(calc.name)}View"
    blp.route(f"/{calc.name}", endpoint=calc.name)(SelectView)


for _calc in CALCULATIONS.values():
    _register(_calc)


CHANNEL_DOC = (
    "The body of POST /v1/review/channel where any role may be a list of part_ids or a filter object. Every "
    "combination of the candidates is reviewed as the single review does (string and base resistors chosen per "
    "combination) and taken to its worst tolerance corner, in one vectorized pass. The transistor's candidates "
    "may be NPNs and N-MOSFETs together (part_ids of either kind, or a filter with kind): each design is judged "
    "by its own switch's checks and key numbers, and all are ranked together. Order: passing designs by "
    "the least worst-case margin over the checks (descending), or rank_by supply_power_w (average supply "
    f"power, ascending) or yield (with samples: Monte Carlo for the best {YIELD_SHORTLIST} by margin, re-ranked "
    "by yield, the rest after them by margin); ties by margin descending, then by the next-least margin and so "
    "on (a check all designs share, such as a fixed driver's, does not hide their differences), then the parts' "
    "ids in role order. Failing designs follow by margin, then combinations the core refuses (failing "
    "physically_possible, with its reasons in problem). Each design's request re-runs it through POST "
    "/v1/review/channel, every part pinned to its revision. More combinations than SELECT_MAX_COMBINATIONS: 413."
)


@blp.route("/channel", endpoint="channel")
class ChannelSelect(MethodView):
    @blp.arguments(channel_schema())
    @blp.response(200, ChannelSelectionSchema)
    @error_response(blp, 404, "a referenced part does not exist")
    @error_response(blp, 413, "more combinations than SELECT_MAX_COMBINATIONS")
    @blp.doc(description=CHANNEL_DOC)
    def post(self, body: dict[str, Any]) -> dict[str, Any]:
        """Channel designs from the parts table, best worst-case margin first."""
        limit = current_app.config["SELECT_MAX_COMBINATIONS"]
        return _answered(run_channel_select(database(), body, limit))


def load_select(calc: CalculationSpec, raw: Mapping[str, Any]) -> dict[str, Any]:
    """A search body of one calculation, loaded as POST /v1/select/<calculation> loads it."""
    try:
        loaded: dict[str, Any] = select_schema(calc)().load(raw)
    except ValidationError as exc:
        messages = exc.normalized_messages()
        errors = {k: v if isinstance(v, list) else [str(v)] for k, v in messages.items()}
        raise InvalidInput("invalid input", errors) from exc
    return loaded


SWITCH_DOC = (
    "Every stocked low-side switch for one load: npn transistors (Darlingtons among them) through bjt-switch "
    "and N-channel MOSFETs through mosfet-switch, with the same driver, supply, duty cycle and PWM. Each "
    "candidate carries its calculation, kind, results (with its losses; a MOSFET also its junction "
    "temperature at ambient_c) and dissipation_w; all are ranked together: passing ones by their least "
    "margin over their own checks (descending) or by dissipation (ascending), then failing ones, then those "
    "the core refuses (with the reason in problem, e.g. a MOSFET whose on-resistance is not stated at the "
    "pin's level). Each candidate's request re-runs it through POST /v1/calc/<calculation>."
)
SWITCH_SCHEMA = switch_schema()


@blp.route("/switch", endpoint="switch")
class SwitchSelect(MethodView):
    @blp.arguments(SWITCH_SCHEMA)
    @blp.response(200, SwitchSelectionSchema)
    @error_response(blp, 404, "a referenced part does not exist")
    @error_response(blp, 413, "more candidates than SELECT_MAX_COMBINATIONS")
    @blp.doc(description=SWITCH_DOC)
    def post(self, body: dict[str, Any]) -> dict[str, Any]:
        """Switches of every kind for one load, best first."""
        limit = current_app.config["SELECT_MAX_COMBINATIONS"]
        return _answered(run_switch_select(database(), body, load_select, load_inputs, limit))


@blp.record_once
def _filter_components(state: Any) -> None:
    # The role fields refer to the filter objects by $ref; nothing else makes apispec register them.
    spec = state.app.extensions["calcsvc.api"].spec
    for name, schema in FILTERS.items():
        spec.components.schema(f"{name}Filter", schema=schema)
