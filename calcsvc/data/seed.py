"""Loads the generic parts in ``seed_parts/`` into an empty or partly seeded table."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from sqlalchemy.orm import Session

from calcsvc.data.models import Part
from calcsvc.data.store import PartStore

SEED_AUTHOR = "seed"


def seed_files(folder: Path) -> list[Path]:
    return sorted(folder.glob("*.json"))


def load_seed(session: Session, folder: Path) -> int:
    """Add every seed part whose id is not yet in the table; never touches existing parts (user edits win)."""
    store = PartStore(session)
    added = 0
    for path in seed_files(folder):
        document: dict[str, Any] = json.loads(path.read_text())
        for entry in document["parts"]:
            if session.get(Part, entry["part_id"]) is not None:
                continue
            store.create(
                entry["part_id"],
                entry["kind"],
                entry["description"],
                entry["parameters"],
                SEED_AUTHOR,
                approve=True,
            )
            added += 1
    return added
