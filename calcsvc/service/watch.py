"""The watch list: the saved designs that need attention, those that fail at today's approved parts and those a
pending draft would change, with why."""

from __future__ import annotations

from typing import Any

from calcsvc.data.database import Database
from calcsvc.data.design_store import DesignStore, DesignView
from calcsvc.service.designs import run_today
from calcsvc.service.impact import draft_impacts


def watch_list(
    database: Database,
    status: str | None,
    fails_at_current: bool,
    affected_by_draft: bool,
    offset: int = 0,
    limit: int = 50,
) -> tuple[list[tuple[DesignView, dict[str, Any]]], int]:
    """The designs of ``status`` (with both filters: active ones), kept when they meet every filter given, by
    design_id, in pages; each with what the filters found (``current``: the summary at today's approved parts;
    ``drafts``: the impact of each pending draft that changes it)."""
    with database.transaction() as session:
        store = DesignStore(session)
        if not (fails_at_current or affected_by_draft):
            views, total = store.list(status, offset=offset, limit=limit)
            return [(view, {}) for view in views], total
        views, _ = store.list(status or "active", limit=None)
        found: dict[str, dict[str, Any]] = {view.design_id: {} for view in views}
        if affected_by_draft:
            drafts = draft_impacts(session)
            views = [view for view in views if view.design_id in drafts]
            for view in views:
                found[view.design_id]["drafts"] = drafts[view.design_id]
        if fails_at_current:
            current = run_today(session, views)
            pairs = zip(views, current, strict=True)
            kept = [(view, summary) for view, summary in pairs if summary["verdict"] != "pass"]
            views = [view for view, _ in kept]
            for view, summary in kept:
                found[view.design_id]["current"] = summary
    page = views[offset : offset + limit]
    return [(view, found[view.design_id]) for view in page], len(views)
