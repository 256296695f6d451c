"""The impact list on a draft's review page: what approving the revision would do to the saved designs that use
the part (calcsvc.service.impact), shown above the approval form so the reviewer reads it first."""

from __future__ import annotations

from typing import Any

from calcsvc.core.channel_spec import CHECK_UNITS
from calcsvc.data.store import PartView
from calcsvc.service.impact import part_impact
from calcsvc.web.auth import database
from calcsvc.web.pages.common import bp
from calcsvc.web.plots import eng


def number(check: dict[str, Any] | None, key: str) -> str:
    """A check's value or limit with its unit where the review declares one; '—' where it has none."""
    if check is None or check.get(key) is None:
        return "—"
    return eng(check[key], CHECK_UNITS.get(check["name"], ""))


def margin(value: float | None) -> str:
    return "—" if value is None else f"{value:+.1%}"


def design_impact(part: PartView) -> dict[str, Any] | None:
    """The impact of a draft's revision on the saved designs, or None when the part is not a draft."""
    if part.status != "draft":
        return None
    return part_impact(database(), part.part_id, part.revision)


@bp.app_context_processor
def _helpers() -> dict[str, Any]:
    return {"design_impact": design_impact, "impact_number": number, "impact_margin": margin}
