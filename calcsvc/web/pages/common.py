"""``/review/``: what the server-rendered pages for reviewing the parts table, approving revisions and reviewing
a channel share: the blueprint, its headers, error pages, CSRF and the rules for what visitors send.

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
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from flask import Blueprint, Response, current_app, g, render_template, request

from calcsvc.data.kinds import Param
from calcsvc.data.part_ids import is_part_id
from calcsvc.service.safety import SAFETY_LINE
from calcsvc.units import VOLTAGE_RATIO
from calcsvc.web.plots import eng

bp = Blueprint(
    "review_page",
    __name__,
    root_path=str(Path(__file__).resolve().parent.parent),  # templates/ and static/ beside the web modules
    url_prefix="/review",
    template_folder="templates",
    static_folder="static",
    static_url_path="/static",
)

PAGE_SIZE = 100
DRAFTS_SHOWN = 50
MAX_OFFSET = 1_000_000  # as the parts API's
_WHOLE = re.compile(r"[0-9]{1,10}")  # ASCII only: str.isdigit() and int() also take "²" and "٣"
CSRF_COOKIE = "calcsvc_review_csrf"
CSRF_FIELD = "csrf_token"
_CSRF_FORMAT = re.compile(r"[A-Za-z0-9_-]{43}")  # secrets.token_urlsafe(32)
PAGE_POLICY = (
    "default-src 'none'; img-src 'self'; style-src 'self'; form-action 'self'; frame-ancestors 'none'; base-uri 'none'"
)


class PageError(Exception):
    """A refusal shown on the page itself, with its HTTP status."""

    def __init__(self, status: int, message: str) -> None:
        super().__init__(message)
        self.status = status
        self.message = message


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
    if param.unit == VOLTAGE_RATIO:
        return f"{value:g} V/V"
    if param.unit == "dimensionless":
        return f"{value:g}"
    return eng(float(value), param.unit)


@bp.app_context_processor
def safety_line() -> dict[str, str]:
    """Every page's footer carries the standing safety line."""
    return {"safety_line": SAFETY_LINE}


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
        g.error_page = error_page


@bp.before_request
def _reads_allowed() -> Response | None:
    if current_app.config["READ_REQUIRES_TOKEN"]:
        message = "This server requires a token for every read; the review page holds no tokens, so it is off."
        return error_page(403, message)
    return None


@bp.before_request
def _no_such_part() -> Response | None:
    """An id no part can have is not looked up (PostgreSQL refuses a NUL in a query with an error)."""
    part_id = (request.view_args or {}).get("part_id")
    if part_id is not None and not is_part_id(part_id):
        return error_page(404, f"There is no part {shown(part_id)}.")
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


def error_page(status: int, message: str) -> Response:
    return Response(render_template("review/error.html", status=status, message=message), status=status)
