"""``/review/``: server-rendered pages for reviewing the parts table, approving revisions and reviewing a channel.

Every page works without JavaScript. Approving reads the reviewer's bearer token from the form for that one
request: it is never stored, logged or put in a cookie, and goes through the same store rules as the API
(``identify``, then ``PartStore.approve``). The form is protected against cross-site requests by a double
submit: a random token in an HttpOnly, SameSite=Strict cookie (Secure over HTTPS) must come back in the form.
That needs no server secret or session, so it works across workers and restarts.
"""

from __future__ import annotations

import hmac
import re
import secrets
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

from flask import Blueprint, Response, current_app, g, jsonify, redirect, render_template, request, url_for
from markupsafe import Markup
from marshmallow import Schema, ValidationError

from calcsvc.core import led_string
from calcsvc.core.outcome import DomainError
from calcsvc.core.registry import CALCULATIONS
from calcsvc.data.kinds import KINDS, Param, params_of
from calcsvc.data.part_ids import is_part_id
from calcsvc.data.store import (
    STATUSES,
    PartNotFound,
    PartRetired,
    PartStore,
    PartView,
    RevisionView,
    SelfApproval,
    StaleRevision,
)
from calcsvc.data.tokens import identify
from calcsvc.service.calculate import run_calculation
from calcsvc.service.errors import ServiceError
from calcsvc.web import plots_api
from calcsvc.web.metrics import record_calculation, record_parts_write
from calcsvc.web.parts_api import MAX_REVISION, part_id_field
from calcsvc.web.plots import eng, size_px, unit_symbol
from calcsvc.web.problems import Problem, service_problem
from calcsvc.web.quantity import Quantity
from calcsvc.web.review_api import run_review
from calcsvc.web.review_report import number, render_markdown, render_table_html

bp = Blueprint(
    "review_page",
    __name__,
    url_prefix="/review",
    template_folder="templates",
    static_folder="static",
    static_url_path="/static",
)

PAGE_SIZE = 100
DRAFTS_SHOWN = 50
MAX_OFFSET = 1_000_000  # as the parts API's
_WHOLE = re.compile(r"[0-9]{1,10}")  # ASCII only: str.isdigit() and int() also take "²" and "٣"
# What a value of the channel form may hold: printable ASCII and the unit symbols, 80 characters at most
# (no control characters or NUL, which PostgreSQL refuses, and nothing worth parsing at length).
_FORM_VALUE = re.compile(r"[\x20-\x7eµμΩ·]{1,80}")
CSRF_COOKIE = "calcsvc_review_csrf"
CSRF_FIELD = "csrf_token"
_CSRF_FORMAT = re.compile(r"[A-Za-z0-9_-]{43}")  # secrets.token_urlsafe(32)
PAGE_POLICY = (
    "default-src 'none'; img-src 'self'; style-src 'self'; form-action 'self'; frame-ancestors 'none'; base-uri 'none'"
)

# Plots on a part's page, at the demo's operating points: a sensor preamp of gain 10 giving 1 V peak at 1 kHz,
# LED strings on the 12 V adapter.
OPAMP_GAIN = 10
PREAMP_SIGNAL_HZ = 1000.0
PREAMP_AMPLITUDE_V = 1.0
LED_SUPPLY_V = 12.0
LED_SUPPLY_TOLERANCE = 0.05  # a regulated adapter, when the table has none of 12 V (common practice)
LEDS_IN_SERIES = (3, 1)  # three in series when they fit on the supply, else one

# The greenhouse demo channel: 12 V adapter, 3.3 V microcontroller pin, small NPN, two strings of three red LEDs
# at 20 mA, six channels at half duty, and the sensor preamp on a general-purpose op-amp.
DEMO_CHANNEL: dict[str, str] = {
    "supply": "supply-adapter-12v-2a",
    "driver": "driver-mcu-3v3",
    "transistor": "npn-small-signal",
    "led": "led-red-5mm",
    "opamp": "opamp-general-1mhz",
    "leds_in_series": "3",
    "strings": "2",
    "current_a": "20 mA",
    "duty_cycle": "0.5",
    "channels": "6",
    "gain": "10",
    "signal_hz": "1 kHz",
    "amplitude_v": "1 V",
}
FRONT_STAGE = ("gain", "signal_hz", "amplitude_v")
# Selects of the channel form: role → (label, part kind, required parameter value).
CHANNEL_ROLES: dict[str, tuple[str, str, tuple[str, str] | None]] = {
    "supply": ("Supply", "supply", None),
    "driver": ("Driver pin", "driver", None),
    "transistor": ("Switch transistor", "bjt", ("polarity", "npn")),
    "led": ("LED", "led", None),
    "opamp": ("Front-stage op-amp", "opamp", None),
}

ChannelForm = Schema.from_dict(
    {
        **{role: part_id_field(required=role != "opamp") for role in CHANNEL_ROLES},
        "leds_in_series": Quantity("dimensionless", minimum=1, maximum=1000, integer=True),
        "strings": Quantity("dimensionless", minimum=1, maximum=10000, integer=True),
        "channels": Quantity("dimensionless", minimum=1, maximum=10000, integer=True),
        "current_a": Quantity("A", minimum=0, exclusive_minimum=True),
        "duty_cycle": Quantity("dimensionless", minimum=0, maximum=1),
        "gain": Quantity("dimensionless", minimum=0, exclusive_minimum=True),
        "signal_hz": Quantity("Hz", minimum=0, exclusive_minimum=True),
        "amplitude_v": Quantity("V", minimum=0, exclusive_minimum=True),
    },
    name="ChannelForm",
)


class PageError(Exception):
    """A refusal shown on the page itself, with its HTTP status."""

    def __init__(self, status: int, message: str) -> None:
        super().__init__(message)
        self.status = status
        self.message = message


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


def _store() -> Any:
    return current_app.extensions["calcsvc.db"].transaction()


def whole_number(text: str | None, low: int, high: int) -> int | None:
    """The page's one rule for numbers it is sent: ASCII digits only (no sign, space or separator), from
    ``low`` to ``high``; None for anything else."""
    if text is None or _WHOLE.fullmatch(text) is None:
        return None
    value = int(text)
    return value if low <= value <= high else None


def shown(text: str) -> str:
    """Text a visitor sent, quoted and cut short for a message (any control character made visible)."""
    return repr(text if len(text) <= 40 else text[:40] + "…")


# --- formatting -----------------------------------------------------------------------------------------------


def value_text(param: Param | None, value: Any) -> str:
    """A parameter's value with its unit and an SI prefix ("1 MHz", "20 mA"); text as it is."""
    if value is None:
        return "—"
    if param is None or not param.numeric or isinstance(value, str):
        return str(value)
    if param.fraction:
        return f"{value:g} (±{value * 100:g} %)"
    if param.unit == "dimensionless":
        return f"{value:g} V/V" if param.name.endswith("gain") else f"{value:g}"
    return eng(float(value), param.unit)


@bp.app_template_filter("when")
def when(moment: datetime | None) -> str:
    """A stored time in UTC to the minute (SQLite hands times back without their zone; they are UTC)."""
    if moment is None:
        return "—"
    if moment.tzinfo is not None:
        moment = moment.astimezone(UTC)
    return moment.strftime("%Y-%m-%d %H:%M UTC")


# --- CSRF (double submit) -------------------------------------------------------------------------------------


def csrf_token() -> str:
    """This browser's form token: the cookie's when it has a well-formed one, else a new one set on the answer."""
    if "csrf_token" not in g:
        cookie = request.cookies.get(CSRF_COOKIE, "")
        if _CSRF_FORMAT.fullmatch(cookie):
            g.csrf_token = cookie
        else:
            g.csrf_token = secrets.token_urlsafe(32)
            g.csrf_new = True
    token: str = g.csrf_token
    return token


def csrf_valid() -> bool:
    cookie = request.cookies.get(CSRF_COOKIE, "")
    sent = request.form.get(CSRF_FIELD, "")
    return bool(_CSRF_FORMAT.fullmatch(cookie)) and hmac.compare_digest(cookie.encode(), sent.encode())


@bp.before_app_request
def _errors_as_pages() -> None:
    """Every error under the page's prefix, a mistyped address or a database outage too, is a page for the
    browser; the channel's JSON view answers problem documents like the rest of the API."""
    if request.path.startswith(f"{bp.url_prefix}/") and request.endpoint != "review_page.channel_json":
        g.error_page = _error_page


@bp.before_request
def _reads_allowed() -> Response | None:
    if current_app.config["READ_REQUIRES_TOKEN"]:
        message = "This server requires a token for every read; the review page holds no tokens, so it is off."
        return _error_page(403, message)
    return None


@bp.before_request
def _no_such_part() -> Response | None:
    """An id no part can have is not looked up (PostgreSQL refuses a NUL in a query with an error)."""
    part_id = (request.view_args or {}).get("part_id")
    if part_id is not None and not is_part_id(part_id):
        return _error_page(404, f"There is no part {shown(part_id)}.")
    return None


@bp.after_request
def _page_headers(response: Response) -> Response:
    response.headers["X-Content-Type-Options"] = "nosniff"
    if request.endpoint == "review_page.static":
        return response
    response.headers["Content-Security-Policy"] = PAGE_POLICY
    response.headers["Referrer-Policy"] = "same-origin"
    response.headers["Cache-Control"] = "no-store"
    if g.get("csrf_new"):
        response.set_cookie(
            CSRF_COOKIE,
            g.csrf_token,
            httponly=True,
            samesite="Strict",
            secure=request.is_secure,
            path=bp.url_prefix or "/",
        )
    return response


def _error_page(status: int, message: str) -> Response:
    return Response(render_template("review/error.html", status=status, message=message), status=status)


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
    with _store() as session:
        store = PartStore(session)
        parts, total = store.list(kind, status, start, PAGE_SIZE)
        drafts, draft_total = store.list(None, "draft", 0, DRAFTS_SHOWN)
    page = render_template(
        "review/parts.html",
        parts=parts,
        total=total,
        start=start,
        page_size=PAGE_SIZE,
        drafts=drafts,
        draft_total=draft_total,
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
        answer = run_calculation(current_app.extensions["calcsvc.db"], CALCULATIONS[led_string.NAME], body)
    except (DomainError, Problem):
        return False
    return all(check["ok"] for check in answer["checks"] if check["name"] == "headroom")


def part_plots(part: PartView, supply: PartView | None) -> list[PlotLink]:
    """The plots that apply to the part's kind, drawn from this revision of it."""

    def link(name: str, title: str, alt: str, query: dict[str, Any]) -> PlotLink:
        svg, png = (url_for(f"plots.{plots_api.endpoint(name, fmt)}", **query) for fmt in ("svg", "png"))
        return PlotLink(title, alt, svg, png, *size_px(plots_api.PANELS.get(name, 1)))

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
        return _error_page(404, f"There is no part {part_id[:80]!r}.")
    try:
        with _store() as session:
            store = PartStore(session)
            part = store.get(part_id)
            revisions = store.revisions(part_id)
            supply = _led_supply(store) if part.kind == "led" else None
    except PartNotFound:
        return _error_page(404, f"There is no part '{part_id}'.")
    spec = params_of(part.kind)
    # None for the first revision: there is nothing before it to compare with.
    history = [
        (revision, differences(revisions[k - 1], revision) if k else None) for k, revision in enumerate(revisions)
    ]
    approved = whole_number(request.args.get("approved"), 1, MAX_REVISION)
    page = render_template(
        "review/part.html",
        part=part,
        parameters=[(param, part.parameters.get(param.name)) for param in spec.values()],
        history=list(reversed(history)),
        plots=part_plots(part, supply),
        error=error,
        notice=f"Revision {approved} approved." if approved and approved == part.revision and not error else None,
        csrf=csrf_token(),
        csrf_field=CSRF_FIELD,
        value_text=value_text,
        unit_symbol=unit_symbol,
    )
    return Response(page, status=status)


@bp.get("/parts/<string:part_id>")
def part_page(part_id: str) -> Response:
    return _part_page(part_id)


def _approve(part_id: str) -> None:
    """Approve the revision the form names, as the holder of the form's token; a PageError says why not."""
    if not csrf_valid():
        raise PageError(400, "This form has expired or did not come from this page: reload the page and try again.")
    token = request.form.get("token", "").strip()
    if not token:
        raise PageError(401, "Paste your reviewer token to approve.")
    revision = whole_number(request.form.get("revision"), 1, MAX_REVISION)
    if revision is None:
        raise PageError(400, "The form did not say which revision to approve: reload the page.")
    try:
        with _store() as session:
            identity = identify(session, token)
            if identity is None:
                raise PageError(401, "That token is not valid (revoked or mistyped).")
            if not identity.may("reviewer"):
                raise PageError(403, f"Token '{identity.name}' is an {identity.role}'s; approving needs a reviewer.")
            PartStore(session).approve(part_id, revision, identity.name)
    except SelfApproval as exc:
        raise PageError(403, f"{exc}: another reviewer must approve it.") from exc
    except StaleRevision as exc:
        raise PageError(412, f"{exc}: someone changed the part since you loaded the page; review it again.") from exc
    except PartRetired as exc:
        raise PageError(409, str(exc)) from exc
    record_parts_write("approve")


@bp.post("/parts/<string:part_id>/approve")
def approve(part_id: str) -> Response:
    try:
        _approve(part_id)
    except PartNotFound:
        return _error_page(404, f"There is no part '{part_id}'.")
    except PageError as refusal:
        return _part_page(part_id, refusal.status, refusal.message)
    # Post/redirect/get: reloading the result does not post the form again.
    revision = int(request.form["revision"])
    return redirect(url_for(".part_page", part_id=part_id, approved=revision), 303)


# --- the channel review ---------------------------------------------------------------------------------------

# The form's number fields: (name, label, hint).
CHANNEL_FIELDS: dict[str, tuple[tuple[str, str, str], ...]] = {
    "Arrangement": (
        ("leds_in_series", "LEDs in series per string", "a whole number"),
        ("strings", "Strings per channel", "a whole number; each string has its own resistor"),
        ("current_a", "Current per string", "in A, or with a unit: 20 mA"),
        ("duty_cycle", "PWM duty cycle", "a fraction from 0 to 1"),
        ("channels", "Channels on the supply", "a whole number"),
    ),
    "Front stage (used with an op-amp)": (
        ("gain", "Preamp gain", "V/V, non-inverting"),
        ("signal_hz", "Signal frequency", "in Hz, or with a unit: 1 kHz"),
        ("amplitude_v", "Output amplitude, peak", "in V, or with a unit: 500 mV"),
    ),
}


def channel_body(form: Mapping[str, str]) -> dict[str, Any]:
    """The review's request body from the form; a Problem naming each bad field."""
    given = {k: v.strip() for k, v in form.items() if k in ChannelForm._declared_fields and v.strip()}
    unreadable = {
        k: [f"{shown(v)} is not a value: at most 80 characters of text, digits and units"]
        for k, v in given.items()
        if _FORM_VALUE.fullmatch(v) is None
    }
    if unreadable:
        raise Problem(422, "invalid input: " + ", ".join(sorted(unreadable)), "validation", unreadable)
    if "opamp" not in given:
        given = {k: v for k, v in given.items() if k not in FRONT_STAGE}
    try:
        body: dict[str, Any] = ChannelForm().load(given)
    except ValidationError as exc:
        errors = {k: list(v) for k, v in exc.normalized_messages().items()}
        raise Problem(422, "invalid input: " + ", ".join(sorted(errors)), "validation", errors) from exc
    for name in ("leds_in_series", "strings", "channels"):
        body[name] = int(body[name])
    return body


def _options(store: PartStore) -> dict[str, list[PartView]]:
    options: dict[str, list[PartView]] = {}
    for role, (_, kind, needs) in CHANNEL_ROLES.items():
        parts, _ = store.list(kind, None, 0, 500)
        options[role] = [
            p for p in parts if p.status != "retired" and (needs is None or p.parameters.get(needs[0]) == needs[1])
        ]
    return options


@bp.get("/channel")
def channel() -> Response:
    submitted = "supply" in request.args
    form: Mapping[str, str] = request.args if submitted else DEMO_CHANNEL
    with _store() as session:
        options = _options(PartStore(session))
    review, errors, message, status = None, {}, None, 200
    if submitted:
        try:
            review = run_review(channel_body(form))
        except (Problem, ServiceError) as exc:
            problem = exc if isinstance(exc, Problem) else service_problem(exc)
            errors, message, status = problem.errors or {}, problem.detail, problem.status
        except DomainError as exc:
            for violation in exc.violations:
                errors.setdefault(violation.field, []).append(violation.message)
            message, status = "the inputs are physically impossible", 422
    query = {k: v for k, v in form.items() if k in ChannelForm._declared_fields}
    page = render_template(
        "review/channel.html",
        form=form,
        options=options,
        roles=CHANNEL_ROLES,
        fields=CHANNEL_FIELDS,
        review=review,
        checks_table=Markup(render_table_html(review)) if review else None,  # the report's table, escaped there
        report=render_markdown(review) if review else None,
        number=number,
        errors=errors,
        message=message,
        json_url=url_for(".channel_json", **query) if review else None,
    )
    return Response(page, status=status)


@bp.get("/channel.json")
def channel_json() -> Response:
    """The review of the form's channel as JSON (errors as problem documents, as everywhere in the API)."""
    return jsonify(run_review(channel_body(request.args)))
