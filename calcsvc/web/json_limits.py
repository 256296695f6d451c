"""Array lengths checked on the raw JSON body, before any value is built.

A JSON parser builds every element before a schema can count them: a 60 MiB body of samples became 31 million
Python floats before the 100,000-sample rule ran. :func:`first_too_long` finds an array (or object) with more
members than allowed by scanning the bytes: it jumps from bracket to bracket, skips strings, and counts the
commas between with ``bytes.count``, so a long array of numbers costs one C-level count and no objects.
"""

from __future__ import annotations

import functools
import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from flask import Request
from marshmallow import Schema, fields, validate
from webargs.flaskparser import FlaskParser, is_json_request

from calcsvc.web.problems import Problem

# Members allowed in an array or object whose schema states no maximum: far above any object of named inputs.
UNDECLARED = 1000
# Nesting deeper than any request body has (the deepest, a load's waveform, is 4): the scan keeps a path per
# level, so a body of 100,000 brackets would otherwise cost memory quadratic in its depth.
MAX_DEPTH = 32

_STRUCTURE = re.compile(rb'[\[\]{}"]')
_STRING_REST = re.compile(rb'[^"\\]*(?:\\.[^"\\]*)*"', re.DOTALL)  # one way to match each byte: linear


@dataclass(frozen=True)
class TooLong:
    path: str  # dotted, with array indices: "loads.0.waveform.time_s"; "" for the whole body
    limit: int


class TooDeep(ValueError):
    """The body nests arrays and objects deeper than :data:`MAX_DEPTH`."""


@dataclass
class _Container:
    is_array: bool
    pattern: str  # the path with "*" for array indices, as limits are declared
    path: str
    limit: int
    commas: int = 0
    key: str = ""
    expect_key: bool = True


def _child(parent: str, step: str) -> str:
    return f"{parent}.{step}" if parent else step


def first_too_long(body: bytes, limit_of: Callable[[str], int]) -> TooLong | None:
    """The first array or object with more members than ``limit_of(pattern)`` allows, or None.

    Invalid JSON is left to the parser: the scan only has to be right for what a parser would build. Raises
    :class:`TooDeep` past :data:`MAX_DEPTH` levels.
    """
    if b"[" not in body and body.count(b"{") <= 1 and body.count(b",") < limit_of(""):
        return None  # one flat object (a single calculation's inputs): too few commas anywhere to be too long
    stack: list[_Container] = []
    position = 0
    while True:
        found = _STRUCTURE.search(body, position)
        end = found.start() if found else len(body)
        if stack:
            top = stack[-1]
            commas = body.count(b",", position, end)
            if commas:
                top.commas += commas
                top.expect_key = not top.is_array
                if top.commas >= top.limit:  # members = commas + 1
                    return TooLong(top.path, top.limit)
        if found is None:
            return None
        char = body[end : end + 1]
        position = end + 1
        if char == b'"':
            rest = _STRING_REST.match(body, position)
            if rest is None:
                return None
            if stack and not stack[-1].is_array and stack[-1].expect_key:
                stack[-1].key = body[position : rest.end() - 1].decode("utf-8", "replace")
                stack[-1].expect_key = False
            position = rest.end()
        elif char in (b"[", b"{"):
            if len(stack) >= MAX_DEPTH:
                raise TooDeep(f"the request body nests arrays and objects more than {MAX_DEPTH} deep")
            pattern = path = ""
            if stack:
                parent = stack[-1]
                step = str(parent.commas) if parent.is_array else parent.key
                pattern = _child(parent.pattern, "*" if parent.is_array else step)
                path = _child(parent.path, step)
            stack.append(_Container(char == b"[", pattern, path, limit_of(pattern)))
        elif stack:
            stack.pop()


def declared_limits(schema: Schema) -> dict[str, int]:
    """The largest length each list field of ``schema`` takes, by pattern ("loads.*.waveform.time_s")."""
    # By class: webargs builds a new instance per request when a route is given a schema class.
    return _class_limits(type(schema))


@functools.cache
def _class_limits(schema_class: type[Schema]) -> dict[str, int]:
    limits: dict[str, int] = {}

    def walk(schema: Schema, prefix: str) -> None:
        for name, field in schema.fields.items():
            path = _child(prefix, field.data_key or name)
            if isinstance(field, fields.Nested) and isinstance(field.schema, Schema):
                walk(field.schema, path)
            elif isinstance(field, fields.List):
                for rule in field.validators:
                    if isinstance(rule, validate.Length) and rule.max is not None:
                        limits[path] = rule.max
                if isinstance(field.inner, fields.Nested) and isinstance(field.inner.schema, Schema):
                    walk(field.inner.schema, _child(path, "*"))

    walk(schema_class(), "")
    return limits


class LengthCheckingParser(FlaskParser):
    """Refuses a JSON body holding a longer array than its schema takes (422 naming it) before parsing it."""

    def load_json(self, req: Request, schema: Schema) -> Any:
        if is_json_request(req):
            limits = declared_limits(schema)
            try:
                found = first_too_long(req.get_data(cache=True), lambda pattern: limits.get(pattern, UNDECLARED))
            except TooDeep as exc:
                raise Problem(400, str(exc), "malformed-body") from exc
            if found is not None:
                message = f"more than {found.limit:,} items"
                raise Problem(
                    422, f"{found.path or 'body'}: {message}", "validation", {found.path or "body": [message]}
                )
        return super().load_json(req, schema)
