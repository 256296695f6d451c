"""The production app plus one bare JSON route, ``POST /bench/echo``: the ceiling the benchmark compares the
calculation endpoints with (same app, hooks and gunicorn settings; no schema, parts or core). Benchmark only,
never deployed: ``gunicorn --pythonpath benchmarks echo_app:app``."""

from __future__ import annotations

from typing import Any

from flask import request

from calcsvc import create_app

app = create_app()


@app.post("/bench/echo")
def echo() -> dict[str, Any]:
    body = request.get_json()
    return {"status": "ok", "fields": len(body)}
