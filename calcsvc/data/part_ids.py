"""The one rule for a part_id, applied wherever an id enters: API, calculations, batch, search, pages, files,
and the store itself, so no id is stored that cannot be addressed in a URL, a header or a form afterwards."""

from __future__ import annotations

import re
from typing import Any

MAX_LENGTH = 64
# For the OpenAPI document: in JSON Schema (ECMA-262) "$" is the end of the string; never use it with Python's re.
PATTERN = rf"^[a-z0-9][a-z0-9-]{{0,{MAX_LENGTH - 1}}}$"
RULE = f"a part_id is 1 to {MAX_LENGTH} lowercase ASCII letters, digits and hyphens, starting with a letter or digit"
# fullmatch and re.ASCII: Python's "$" also matches before a trailing newline.
_PART_ID = re.compile(PATTERN.removeprefix("^").removesuffix("$"), re.ASCII)


def is_part_id(value: Any) -> bool:
    return isinstance(value, str) and len(value) <= MAX_LENGTH and _PART_ID.fullmatch(value) is not None


def suggest(value: str) -> str | None:
    """A valid id close to ``value`` (lowercased, other characters as hyphens, trimmed), or None if nothing is left."""
    candidate = re.sub(r"[^a-z0-9-]+", "-", value.strip().lower(), flags=re.ASCII).strip("-")[:MAX_LENGTH]
    candidate = candidate.rstrip("-")
    return candidate if is_part_id(candidate) else None
