"""What a part revision would do to the saved designs before anyone approves it: every active design that uses
the part, reviewed at today's approved parts and again with that revision in the part's place, both in one
batched pass (``design_batch``); listed where the verdict, the failing checks or the tightest margin changes."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from calcsvc.data.database import Database
from calcsvc.data.design_store import DesignStore, DesignView
from calcsvc.data.models import DesignPart, Part
from calcsvc.data.store import PartStore
from calcsvc.service.design_outcome import changes, check_changes, outline
from calcsvc.service.designs import run_planned, today_requests

_ORDER = {("pass", "fail"): 0, ("pass", "error"): 0, ("fail", "pass"): 1, ("error", "pass"): 1}


def _turn(entry: dict[str, Any]) -> tuple[str, str]:
    return entry["before"]["verdict"], entry["after"]["verdict"]


def _entry(view: DesignView, before: dict[str, Any], after: dict[str, Any]) -> dict[str, Any]:
    return {
        "design_id": view.design_id,
        "revision": view.revision,
        "owner": view.content.owner,
        "description": view.content.description,
        "before": outline(before),
        "after": outline(after),
        "changes": changes(before, after),
        "check_changes": check_changes(before, after),
    }


def impacts(session: Session, views: list[DesignView], substitute: Mapping[str, int]) -> list[dict[str, Any]]:
    """Each design before (today's approved parts) and after (``substitute``: part_id -> revision put in), the
    designs whose outcome changes first by how their verdict turns, then by design_id."""
    planned = today_requests(session, views) + today_requests(session, views, substitute)
    summaries = run_planned(session, planned)
    before, after = summaries[: len(views)], summaries[len(views) :]
    entries = [_entry(view, b, a) for view, b, a in zip(views, before, after, strict=True)]
    return sorted(entries, key=lambda e: (_ORDER.get(_turn(e), 2), e["design_id"]))


def headline(part_id: str, revision: int, entries: list[dict[str, Any]]) -> dict[str, Any]:
    """The counts a reviewer reads first, and the sentence that says them."""
    turns = [(e["before"]["verdict"], e["after"]["verdict"]) for e in entries]
    broken = sum(1 for b, a in turns if b == "pass" and a != "pass")
    fixed = sum(1 for b, a in turns if b != "pass" and a == "pass")
    changed = sum(1 for e in entries if e["changes"])
    parts = [f"turns {broken} saved design{'s' if broken != 1 else ''} from pass to fail"]
    if fixed:
        parts.append(f"{fixed} from fail to pass")
    others = changed - broken - fixed
    if others:
        parts.append(f"changes the failing checks or tightest margin of {others} more")
    sentence = f"approving revision {revision} of {part_id} " + ", ".join(parts)
    one = len(entries) == 1
    sentence += f" (of {len(entries)} saved design{'' if one else 's'} that use{'s' if one else ''} it)"
    return {"pass_to_fail": broken, "fail_to_pass": fixed, "changed": changed, "using": len(entries), "text": sentence}


def part_impact(database: Database, part_id: str, revision: int | None = None) -> dict[str, Any]:
    """The impact of ``revision`` of a part (default: its current revision, typically the draft under review)."""
    with database.transaction() as session:
        parts = PartStore(session)
        target = parts.get(part_id) if revision is None else parts.get_revision(part_id, revision)
        store = DesignStore(session)
        views, _ = store.list("active", store.using_part(part_id), limit=None, as_saved=False)
        entries = impacts(session, views, {part_id: target.revision})
    return {
        "part_id": part_id,
        "revision": target.revision,
        "status": target.status,
        "summary": headline(part_id, target.revision, entries),
        "designs": [e for e in entries if e["changes"]],
    }


def draft_impacts(session: Session) -> dict[str, list[dict[str, Any]]]:
    """Per active design, the pending drafts (parts whose current revision is a draft) that would change its
    outcome if approved, each as an impact entry with its part_id and revision."""
    drafted = session.execute(
        select(Part.part_id, Part.revision)
        .join(DesignPart, DesignPart.part_id == Part.part_id)
        .where(Part.status == "draft")
        .distinct()
    ).all()
    store = DesignStore(session)
    found: dict[str, list[dict[str, Any]]] = {}
    for part_id, revision in drafted:
        views, _ = store.list("active", store.using_part(part_id), limit=None, as_saved=False)
        for entry in impacts(session, views, {part_id: revision}):
            if entry["changes"]:
                change = {"part_id": part_id, "part_revision": revision, **entry}
                found.setdefault(entry["design_id"], []).append(change)
    return found
