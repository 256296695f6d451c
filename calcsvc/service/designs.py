"""Saved designs: a request stored with the part revisions it resolved to and its review there; re-reviewed at
those pinned revisions (the same fingerprint and verdict) or at the parts' current approved revisions (what it
would be today), side by side; and the watch list of designs that fail today or that a pending draft changes."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from sqlalchemy.orm import Session

from calcsvc.core.outcome import DomainError
from calcsvc.core.registry import CALCULATIONS
from calcsvc.data.bulk_parts import latest_approved
from calcsvc.data.database import Database
from calcsvc.data.design_store import DesignContent, DesignStore, DesignView
from calcsvc.data.models import Design
from calcsvc.service.calculate import run_calculation
from calcsvc.service.demo import demo_channel, demo_si
from calcsvc.service.design_batch import CHANNEL, Request, pinned, review_many
from calcsvc.service.design_outcome import changes, check_changes, document_summary, refused
from calcsvc.service.errors import PhysicallyImpossible, ServiceError
from calcsvc.service.review import run_review

CALCULATION_NAMES = (CHANNEL, *CALCULATIONS)  # what a design may hold: the channel review or one calculation


@dataclass(frozen=True)
class DesignDraft:
    """A design as a client sends it: ``body`` as given (for the record), ``inputs`` as read (SI)."""

    design_id: str
    calculation: str
    owner: str
    description: str
    body: dict[str, Any]
    inputs: dict[str, Any]


def run_request(database: Database, calculation: str, inputs: Mapping[str, Any]) -> dict[str, Any]:
    """The full answer to a design's request, as its endpoint gives it (Monte Carlo included)."""
    if calculation == CHANNEL:
        return run_review(database, inputs)
    return run_calculation(database, CALCULATIONS[calculation], inputs)


def save(database: Database, draft: DesignDraft, author: str, expected_revision: int | None = None) -> DesignView:
    """Review the request as it would run now and store it with the revisions it resolved to (a new design, or
    a new revision of one still at ``expected_revision``). A request the review refuses is not saved."""
    document = run_request(database, draft.calculation, draft.inputs)
    content = DesignContent(
        draft.calculation,
        draft.owner,
        draft.description,
        draft.body,
        draft.inputs,
        list(document["parts"]),
        document_summary(document),
    )
    with database.transaction() as session:
        store = DesignStore(session)
        if expected_revision is None:
            return store.create(draft.design_id, content, author)
        return store.update(draft.design_id, expected_revision, content, author)


def pins_of(view: DesignView) -> dict[str, int]:
    """The revision each role's part resolved to when the design was saved."""
    return {used["role"]: int(used["revision"]) for used in view.content.parts}


def today_pins(
    view: DesignView, approved: Mapping[str, tuple[int | None, str]], substitute: Mapping[str, int] | None = None
) -> dict[str, int] | dict[str, Any]:
    """Each role's part at its latest approved revision (or the revision ``substitute`` puts in its place, by
    part_id); a summary refusing the design when a part is retired or was never approved."""
    pins: dict[str, int] = {}
    for used in view.content.parts:
        part_id, role = used["part_id"], used["role"]
        if substitute and part_id in substitute:
            pins[role] = substitute[part_id]
            continue
        revision, status = approved.get(part_id, (None, "missing"))
        if status == "retired":
            return refused(f"{role} '{part_id}' is retired", {role: [f"part '{part_id}' is retired"]})
        if revision is None:
            message = f"part '{part_id}' has no approved revision"
            return refused(f"{role} {message}", {role: [message]})
        pins[role] = revision
    return pins


def today_requests(
    session: Session, views: list[DesignView], substitute: Mapping[str, int] | None = None
) -> list[dict[str, Any] | Request]:
    """Per design, its request at today's approved parts (with ``substitute`` put in), or its refusal."""
    approved = latest_approved(session, {used["part_id"] for view in views for used in view.content.parts})
    found: list[dict[str, Any] | Request] = []
    for view in views:
        pins = today_pins(view, approved, substitute)
        if "verdict" in pins:
            found.append(dict(pins))
        else:
            found.append(Request(view.content.calculation, pinned(view.content.inputs, pins)))
    return found


def run_planned(session: Session, planned: list[dict[str, Any] | Request]) -> list[dict[str, Any]]:
    """The summaries of planned requests (refusals kept as they are), every request in one batched pass."""
    requests = [item for item in planned if isinstance(item, Request)]
    reviewed = iter(review_many(session, requests))
    return [next(reviewed) if isinstance(item, Request) else item for item in planned]


def run_today(
    session: Session, views: list[DesignView], substitute: Mapping[str, int] | None = None
) -> list[dict[str, Any]]:
    """The summaries of ``views`` at today's approved parts (``substitute`` put in), in one batched pass."""
    return run_planned(session, today_requests(session, views, substitute))


def _full(database: Database, calculation: str, body: Mapping[str, Any]) -> dict[str, Any]:
    try:
        return document_summary(run_request(database, calculation, body))
    except DomainError as exc:
        impossible = PhysicallyImpossible.of(exc.violations)
        return refused(impossible.detail, impossible.errors)
    except ServiceError as exc:
        return refused(exc.detail, exc.errors)


def rereview(database: Database, design_id: str, revision: int | None = None) -> dict[str, Any]:
    """The design re-run at its pinned revisions and at today's approved ones, side by side, each a full review."""
    with database.transaction() as session:
        store = DesignStore(session)
        view = store.get(design_id) if revision is None else store.get_revision(design_id, revision)
        (today,) = today_requests(session, [view])
    content = view.content
    at_pins = _full(database, content.calculation, pinned(content.inputs, pins_of(view)))
    at_pins["reproduced"] = at_pins["fingerprint"] == content.review.get("fingerprint") and (
        at_pins["verdict"] == content.review.get("verdict")
    )
    current = _full(database, content.calculation, today.body) if isinstance(today, Request) else today
    differ = changes(at_pins, current)
    return {
        "design_id": view.design_id,
        "revision": view.revision,
        "pinned": at_pins,
        "current": current,
        "differs": bool(differ) or at_pins["fingerprint"] != current["fingerprint"],
        "changes": differ,
        "check_changes": check_changes(at_pins, current),
    }


DEMO_DESIGN_ID = "greenhouse-demo"


def seed_demo_design(database: Database, author: str) -> bool:
    """Save the greenhouse demo channel as a design unless one of its id exists (a user's edits win)."""
    with database.transaction() as session:
        if session.get(Design, DEMO_DESIGN_ID) is not None:
            return False
    description = "the greenhouse grow-light demo channel: six channels of two strings of three red LEDs"
    save(database, DesignDraft(DEMO_DESIGN_ID, CHANNEL, author, description, demo_channel(), demo_si()), author)
    return True
