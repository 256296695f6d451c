"""What a review answers about a design, reduced to what a part edit can change: the verdict, the failing checks
by name and the tightest margin (with its check), over whatever checks the answer holds. The same summary comes
from a full review document and from a vectorised pass over many designs, so the two compare directly."""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from typing import Any

MARGIN_RTOL = 1e-9  # margins closer than this are the same number computed twice


def check_entry(name: str, ok: bool, value: Any, limit: Any, margin: Any) -> dict[str, Any]:
    return {"name": name, "ok": bool(ok), "value": value, "limit": limit, "margin": margin}


def checks_of(document: Mapping[str, Any]) -> list[dict[str, Any]]:
    """A review's or a calculation's checks, each at its worst corner when the answer has corners."""
    entries = []
    for check in document.get("checks", []):
        at = check.get("worst_case") or check
        entries.append(check_entry(check["name"], check["ok"], at.get("value"), at.get("limit"), at.get("margin")))
    return entries


def summary(checks: Iterable[dict[str, Any]], cautions: list[str], fingerprint: str | None = None) -> dict[str, Any]:
    """The verdict (pass: every applicable check passes), the failing checks and the tightest margin, with the
    review's cautions (what could hurt someone or something) carried as they are."""
    listed = list(checks)
    rated = [c for c in listed if isinstance(c["margin"], int | float) and math.isfinite(c["margin"])]
    tightest = min(rated, key=lambda c: c["margin"], default=None)
    return {
        "verdict": "pass" if all(c["ok"] for c in listed) else "fail",
        "failing": [c["name"] for c in listed if not c["ok"]],
        "tightest_check": None if tightest is None else tightest["name"],
        "tightest_margin": None if tightest is None else tightest["margin"],
        "checks": listed,
        "cautions": cautions,
        "fingerprint": fingerprint,
    }


def document_summary(document: Mapping[str, Any]) -> dict[str, Any]:
    """The summary of a full review or calculation answer, with its parts and fingerprint."""
    found = summary(checks_of(document), list(document.get("cautions", [])), document.get("fingerprint"))
    return {**found, "parts": list(document.get("parts", []))}


def outline(found: Mapping[str, Any]) -> dict[str, Any]:
    """A summary without its list of checks (an impact lists the checks that change apart)."""
    return {key: value for key, value in found.items() if key != "checks"}


def refused(detail: str, errors: Mapping[str, list[str]] | None = None) -> dict[str, Any]:
    """The summary of a design the review refuses (a part retired or missing, a physically impossible channel)."""
    return {
        "verdict": "error",
        "failing": [],
        "tightest_check": None,
        "tightest_margin": None,
        "checks": [],
        "cautions": [],
        "fingerprint": None,
        "problem": {"detail": detail, "errors": dict(errors or {})},
    }


def _same_margin(a: Any, b: Any) -> bool:
    if a is None or b is None:
        return a is b
    return math.isclose(a, b, rel_tol=MARGIN_RTOL, abs_tol=MARGIN_RTOL)


def changes(before: Mapping[str, Any], after: Mapping[str, Any]) -> list[str]:
    """What differs between two summaries: "verdict", "failing", "tightest_margin" (its value or its check)."""
    found = []
    if before["verdict"] != after["verdict"]:
        found.append("verdict")
    if sorted(before["failing"]) != sorted(after["failing"]):
        found.append("failing")
    same_check = before["tightest_check"] == after["tightest_check"]
    if not same_check or not _same_margin(before["tightest_margin"], after["tightest_margin"]):
        found.append("tightest_margin")
    return found


def check_changes(before: Mapping[str, Any], after: Mapping[str, Any]) -> list[dict[str, Any]]:
    """Each check whose pass/fail or margin differs, with its numbers before and after."""
    old = {c["name"]: c for c in before["checks"]}
    listed = []
    for check in after["checks"]:
        was = old.get(check["name"])
        if was is None or was["ok"] != check["ok"] or not _same_margin(was["margin"], check["margin"]):
            listed.append({"name": check["name"], "before": was, "after": check})
    return listed
