"""``/review/`` and ``/review/parts/<part_id>``: the parts table for review, one part with its history and plots
(each with the cautions of its operating point), and approving a revision or sending a draft back to its author
with a reason, with a reviewer's token (rules: calcsvc.web.pages.common)."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from flask import Response, redirect, render_template, request, url_for
from sqlalchemy.orm import Session

from calcsvc.core import led_string
from calcsvc.core.outcome import DomainError
from calcsvc.core.registry import CALCULATIONS
from calcsvc.data.kinds import KINDS, params_of
from calcsvc.data.part_history import RevisionView
from calcsvc.data.part_ids import is_part_id
from calcsvc.data.review_notes import MAX_NOTE_LENGTH, returns, send_back
from calcsvc.data.store import STATUSES, PartStore, PartView
from calcsvc.data.store_errors import NotADraft, PartNotFound, PartRetired, SelfApproval, StaleRevision
from calcsvc.data.tokens import identify
from calcsvc.service.calculate import run_calculation
from calcsvc.service.curves import core_inputs
from calcsvc.service.demo import demo_si
from calcsvc.service.errors import ServiceError
from calcsvc.service.parts import MAX_REVISION
from calcsvc.service.safety import supply_cautions
from calcsvc.web.auth import database
from calcsvc.web.images import PANELS, PLOT_CALCULATIONS, endpoint
from calcsvc.web.metrics import record_calculation, record_parts_write
from calcsvc.web.pages.common import (
    CSRF_FIELD,
    DRAFTS_SHOWN,
    MAX_OFFSET,
    PAGE_SIZE,
    PageError,
    bp,
    csrf_token,
    csrf_valid,
    error_page,
    shown,
    value_text,
    whole_number,
)
from calcsvc.web.plots import eng, size_px, unit_symbol

# Plots on a part's page, at the demo channel's operating points (calcsvc.service.demo): its sensor preamp's gain,
# frequency and peak amplitude, LED strings on the 12 V adapter.
_DEMO = demo_si()
OPAMP_GAIN = _DEMO["gain"]
PREAMP_SIGNAL_HZ = _DEMO["signal_hz"]
PREAMP_AMPLITUDE_V = _DEMO["amplitude_v"]
LED_SUPPLY_V = 12.0
LED_SUPPLY_TOLERANCE = 0.05  # a regulated adapter, when the table has none of 12 V (common practice)
LEDS_IN_SERIES = (3, 1)  # three in series when they fit on the supply, else one


@dataclass(frozen=True)
class Change:
    field: str
    change: str  # added, removed or changed
    old: str
    new: str


@dataclass(frozen=True)
class PlotLink:
    title: str
    alt: str
    svg: str
    png: str
    width: int
    height: int
    cautions: tuple[str, ...]  # what the calculation at the plotted point cautions about (heat, ratings, supply)


# --- the parts list -------------------------------------------------------------------------------------------


@bp.get("/")
def parts_list() -> Response:
    kind = request.args.get("kind") or None
    status = request.args.get("status") or None
    problems = []
    if kind is not None and kind not in KINDS:
        problems.append(f"There is no part kind {shown(kind)}. The filter was ignored.")
        kind = None
    if status is not None and status not in STATUSES:
        problems.append(f"There is no status {shown(status)}. The filter was ignored.")
        status = None
    offset = request.args.get("offset") or "0"
    start = whole_number(offset, 0, MAX_OFFSET)
    if start is None:
        problems.append(f"The offset must be a whole number from 0 to {MAX_OFFSET}, not {shown(offset)}.")
        start = 0
    with database().transaction() as session:
        store = PartStore(session)
        parts, total = store.list(kind, status, start, PAGE_SIZE)
        drafts, draft_total = store.list(None, "draft", 0, DRAFTS_SHOWN)
        sent_back = returns(session, [(d.part_id, d.revision) for d in drafts])
    page = render_template(
        "review/parts.html",
        parts=parts,
        total=total,
        start=start,
        page_size=PAGE_SIZE,
        drafts=drafts,
        draft_total=draft_total,
        sent_back=sent_back,
        kinds=list(KINDS),
        statuses=STATUSES,
        kind=kind,
        status=status,
        problems=problems,
    )
    return Response(page, status=422 if problems else 200)


# --- one part -------------------------------------------------------------------------------------------------


def differences(before: RevisionView, after: RevisionView) -> list[Change]:
    """Field by field, what ``after`` changed relative to ``before``: the description, then each parameter."""
    spec = params_of(after.kind)
    changes: list[Change] = []
    if before.description != after.description:
        changes.append(Change("description", "changed", before.description, after.description))
    old, new = before.parameters, after.parameters
    for name in [*spec, *sorted((set(old) | set(new)) - set(spec))]:
        a, b = old.get(name), new.get(name)
        if a == b:
            continue
        change = "added" if a is None else "removed" if b is None else "changed"
        param = spec.get(name)
        changes.append(Change(name, change, value_text(param, a) if a is not None else "", value_text(param, b)))
    return changes


def _fits(body: dict[str, Any]) -> bool:
    """Whether the LEDs fit on the supply: the calculation accepts them and leaves it headroom to regulate."""
    try:
        record_calculation(led_string.NAME, 1)
        outcome = led_string.compute(core_inputs(database(), led_string.NAME, body))
    except (DomainError, ServiceError):
        return False
    return all(bool(check.ok[0]) for check in outcome.checks if check.name == "headroom")


def _cautions_at(name: str, query: dict[str, Any]) -> tuple[str, ...]:
    """The cautions of the calculation plot ``name`` draws, at its operating point (none when it refuses it)."""
    try:
        calculation = PLOT_CALCULATIONS[name]
        answer = run_calculation(database(), CALCULATIONS[calculation], query)
    except (DomainError, ServiceError):
        return ()
    record_calculation(calculation, 1)
    return tuple(answer["cautions"])


def part_plots(part: PartView, supply: PartView | None) -> list[PlotLink]:
    """The plots that apply to the part's kind, drawn from this revision of it."""

    def link(name: str, title: str, alt: str, query: dict[str, Any]) -> PlotLink:
        svg, png = (url_for(f"plots.{endpoint(name, fmt)}", **query) for fmt in ("svg", "png"))
        return PlotLink(title, alt, svg, png, *size_px(PANELS.get(name, 1)), _cautions_at(name, query))

    p = part.parameters
    if part.kind == "opamp":
        pinned = {"opamp": part.part_id, "opamp_revision": part.revision}
        supply_v = LED_SUPPLY_V if p["supply_min_v"] <= LED_SUPPLY_V <= p["supply_max_v"] else p["supply_max_v"]
        return [
            link(
                "closed-loop",
                f"Closed loop at gain {OPAMP_GAIN}",
                f"Open- and closed-loop gain and phase of a non-inverting stage of gain {OPAMP_GAIN}, "
                "with the -3 dB point marked",
                {**pinned, "gain": OPAMP_GAIN},
            ),
            link(
                "slew-limit",
                f"Slew and swing limits on {eng(supply_v, 'V')}",
                f"Largest undistorted amplitude against frequency on a {eng(supply_v, 'V')} supply, with a "
                f"{eng(PREAMP_AMPLITUDE_V, 'V')} peak signal at {eng(PREAMP_SIGNAL_HZ, 'Hz')} marked",
                {**pinned, "supply_v": supply_v, "frequency_hz": PREAMP_SIGNAL_HZ, "amplitude_v": PREAMP_AMPLITUDE_V},
            ),
        ]
    if part.kind == "led":
        on_supply: dict[str, Any] = (
            {"supply": supply.part_id, "supply_revision": supply.revision}
            if supply
            else {"supply_v": LED_SUPPLY_V, "supply_tolerance": LED_SUPPLY_TOLERANCE}
        )
        base = {"led": part.part_id, "led_revision": part.revision, **on_supply, "current_a": p["if_test_a"]}
        count = next((n for n in LEDS_IN_SERIES if _fits({**base, "leds_in_series": n})), LEDS_IN_SERIES[-1])
        return [
            link(
                "led-string",
                f"{count} in series on {eng(LED_SUPPLY_V, 'V')} at {eng(p['if_test_a'], 'A')}",
                f"String current of {count} LED(s) in series against supply voltage, worst-case band shaded, "
                "LED maximum current marked",
                {**base, "leds_in_series": count},
            )
        ]
    return []


def _led_supply(store: PartStore) -> PartView | None:
    """The table's approved supply of the LED plots' voltage, if it has one."""
    supplies, _ = store.list("supply", "approved", 0, 500)
    return next((s for s in supplies if s.parameters.get("supply_v") == LED_SUPPLY_V), None)


def _part_page(part_id: str, status: int = 200, error: str | None = None) -> Response:
    if not is_part_id(part_id):
        return error_page(404, f"There is no part {part_id[:80]!r}.")
    try:
        with database().transaction() as session:
            store = PartStore(session)
            part = store.get(part_id)
            revisions = store.revisions(part_id)
            supply = _led_supply(store) if part.kind == "led" else None
    except PartNotFound:
        return error_page(404, f"There is no part '{part_id}'.")
    spec = params_of(part.kind)
    # None for the first revision: there is nothing before it to compare with.
    history = [
        (revision, differences(revisions[k - 1], revision) if k else None) for k, revision in enumerate(revisions)
    ]
    approved = whole_number(request.args.get("approved"), 1, MAX_REVISION)
    returned = whole_number(request.args.get("returned"), 1, MAX_REVISION)
    current = history[-1][0]
    sent_back = [e for e in current.events if e.action == "returned"] if part.status == "draft" else []
    notice = f"Revision {approved} approved." if approved and approved == part.revision and not error else None
    if returned and returned == part.revision and sent_back and not error:
        notice = f"Revision {returned} sent back to {current.author}."
    page = render_template(
        "review/part.html",
        part=part,
        parameters=[(param, part.parameters.get(param.name)) for param in spec.values()],
        history=list(reversed(history)),
        plots=part_plots(part, supply),
        error=error,
        notice=notice,
        sent_back=sent_back,
        standing=supply_cautions(part.parameters) if part.kind == "supply" else [],
        max_note=MAX_NOTE_LENGTH,
        event_words={"returned": "Sent back", "commented": "Comment"},
        csrf=csrf_token(),
        csrf_field=CSRF_FIELD,
        value_text=value_text,
        unit_symbol=unit_symbol,
    )
    return Response(page, status=status)


@bp.get("/parts/<string:part_id>")
def part_page(part_id: str) -> Response:
    return _part_page(part_id)


def _as_reviewer(part_id: str, doing: tuple[str, str], act: Callable[[Session, str, int], object]) -> int:
    """Run ``act(session, reviewer, revision)`` for the revision the form names, as the holder of the form's
    token, who must be a reviewer; a PageError says why not. ``doing``: the action as a verb and as a gerund.
    Returns the revision."""
    verb, gerund = doing
    if not csrf_valid():
        raise PageError(400, "This form has expired or did not come from this page: reload the page and try again.")
    token = request.form.get("token", "").strip()
    if not token:
        raise PageError(401, f"Paste your reviewer token to {verb}.")
    revision = whole_number(request.form.get("revision"), 1, MAX_REVISION)
    if revision is None:
        raise PageError(400, f"The form did not say which revision to {verb}: reload the page.")
    try:
        with database().transaction() as session:
            identity = identify(session, token)
            if identity is None:
                raise PageError(401, "That token is not valid (revoked or mistyped).")
            if not identity.may("reviewer"):
                raise PageError(403, f"Token '{identity.name}' is an {identity.role}'s; {gerund} needs a reviewer.")
            act(session, identity.name, revision)
    except SelfApproval as exc:
        raise PageError(403, f"{exc}: another reviewer must approve it.") from exc
    except StaleRevision as exc:
        raise PageError(412, f"{exc}: someone changed the part since you loaded the page; review it again.") from exc
    except (PartRetired, NotADraft) as exc:
        raise PageError(409, str(exc)) from exc
    return revision


def _approve(part_id: str) -> None:
    """Approve the revision the form names; a PageError says why not."""
    _as_reviewer(
        part_id,
        ("approve", "approving"),
        lambda session, who, revision: PartStore(session).approve(part_id, revision, who),
    )
    record_parts_write("approve")


def _send_back(part_id: str) -> int:
    """Send the draft the form names back to its author with the form's reason; a PageError says why not."""
    reason = request.form.get("reason", "").strip()
    if not reason or len(reason) > MAX_NOTE_LENGTH or "\x00" in reason:
        raise PageError(422, f"Say why the draft goes back: 1 to {MAX_NOTE_LENGTH} characters.")
    revision = _as_reviewer(
        part_id,
        ("send a draft back", "sending a draft back"),
        lambda session, who, revision: send_back(session, part_id, revision, who, reason),
    )
    record_parts_write("send_back")
    return revision


@bp.post("/parts/<string:part_id>/send-back")
def send_back_page(part_id: str) -> Response:
    try:
        revision = _send_back(part_id)
    except PartNotFound:
        return error_page(404, f"There is no part '{part_id}'.")
    except PageError as refusal:
        return _part_page(part_id, refusal.status, refusal.message)
    return redirect(url_for(".part_page", part_id=part_id, returned=revision), 303)


@bp.post("/parts/<string:part_id>/approve")
def approve(part_id: str) -> Response:
    try:
        _approve(part_id)
    except PartNotFound:
        return error_page(404, f"There is no part '{part_id}'.")
    except PageError as refusal:
        return _part_page(part_id, refusal.status, refusal.message)
    # Post/redirect/get: reloading the result does not post the form again.
    revision = int(request.form["revision"])
    return redirect(url_for(".part_page", part_id=part_id, approved=revision), 303)
