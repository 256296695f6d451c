"""Writes the OpenAPI document generated from the code (``make openapi``)."""

from __future__ import annotations

import json
import sys
from pathlib import Path
from typing import Any


def generated_spec() -> dict[str, Any]:
    from calcsvc import create_app

    # The spec does not depend on the store; an in-memory URL keeps this free of files.
    app = create_app({"DATABASE_URL": "sqlite:///:memory:"})
    spec: dict[str, Any] = app.extensions["calcsvc.api"].spec.to_dict()
    return spec


def render(spec: dict[str, Any]) -> str:
    return json.dumps(spec, indent=2, sort_keys=True, ensure_ascii=False) + "\n"


def main(argv: list[str]) -> int:
    target = Path(argv[1] if len(argv) > 1 else "openapi/openapi.json")
    target.parent.mkdir(parents=True, exist_ok=True)
    target.write_text(render(generated_spec()))
    print(f"wrote {target}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
