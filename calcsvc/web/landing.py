"""``/``: what the service is, with links to the review pages, the API description and the health endpoints."""

from __future__ import annotations

from pathlib import Path

from flask import Blueprint, Response, render_template

from calcsvc.core.registry import EVERY
from calcsvc.web.pages.common import PAGE_POLICY

bp = Blueprint("landing", __name__, root_path=str(Path(__file__).resolve().parent), template_folder="templates")


@bp.get("/")
def landing() -> Response:
    page = render_template("landing.html", calculations=sorted(EVERY))
    response = Response(page)
    response.headers["Content-Security-Policy"] = PAGE_POLICY
    response.headers["X-Content-Type-Options"] = "nosniff"
    response.headers["Referrer-Policy"] = "same-origin"
    return response
