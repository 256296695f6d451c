"""Scale-out: two server processes on different ports sharing one PostgreSQL see each other's edits at once
and honour each other's ETags (the service keeps no state but the database)."""

from __future__ import annotations

from pathlib import Path

import pytest
import requests
from flask import Flask
from helpers import bearer
from test_entrypoint import entrypoint

from calcsvc.data.tokens import create_token

LED = {
    "part_id": "led-amber-3mm",
    "kind": "led",
    "parameters": {
        "color": "amber",
        "vf_typ_v": 2.1,
        "vf_min_v": 1.9,
        "vf_max_v": 2.5,
        "if_test_a": 0.02,
        "if_max_a": 0.03,
    },
}


def test_two_servers_share_one_postgresql(app: Flask, database_url: str, tmp_path: Path) -> None:
    if not database_url.startswith("postgresql"):
        pytest.skip("scale-out is proven on PostgreSQL, the store several servers share")
    with app.extensions["calcsvc.db"].transaction() as session:
        token = create_token(session, "edna", "editor")
    headers = bearer(token)
    # Started one after the other: the second finds the table seeded and leaves it alone.
    with entrypoint(tmp_path, database_url, "a") as a, entrypoint(tmp_path, database_url, "b") as b:
        created = requests.post(f"{a.url}/v1/parts", json=LED, headers=headers, timeout=10)
        assert created.status_code == 201
        seen = requests.get(f"{b.url}/v1/parts/led-amber-3mm", timeout=10)
        assert seen.status_code == 200 and seen.headers["ETag"] == created.headers["ETag"]

        edit = {"parameters": {**LED["parameters"], "if_max_a": 0.025}}
        on_b = requests.put(
            f"{b.url}/v1/parts/led-amber-3mm",
            json=edit,
            headers={**headers, "If-Match": seen.headers["ETag"]},
            timeout=10,
        )
        assert on_b.status_code == 200
        stale = {"parameters": {**LED["parameters"], "if_max_a": 0.02}}
        on_a = requests.put(
            f"{a.url}/v1/parts/led-amber-3mm",
            json=stale,
            headers={**headers, "If-Match": created.headers["ETag"]},
            timeout=10,
        )
        assert on_a.status_code == 412  # A honours the revision B wrote
        stored = requests.get(f"{a.url}/v1/parts/led-amber-3mm", timeout=10).json()
        assert stored["revision"] == 2 and stored["parameters"]["if_max_a"] == 0.025
