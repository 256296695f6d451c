"""Hostile input on every /v1 endpoint: each answer is a problem document (or, with pick=, one line of text),
never a 5xx or a stack trace, and the parts table is exactly as it was afterwards.

The endpoints come from the committed OpenAPI document, so a new one is covered by the generic cases (bad JSON,
wrong media type, deep nesting, numbers JSON or floats cannot hold, unknown fields, oversized bodies) the moment
it is published; the table below adds the physics of each calculation and the rules of the parts table.
"""

from __future__ import annotations

import json
import time
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest
from flask import Flask
from flask.testing import FlaskClient
from helpers import HOSTILE_UNIT_STRINGS, PROBLEM, bearer
from sqlalchemy import text

from calcsvc import create_app
from calcsvc.data.part_ids import PATTERN as PART_ID
from calcsvc.data.seed import load_seed
from calcsvc.data.tokens import create_token
from calcsvc.units import MAX_QUANTITY_LENGTH, QUANTITY_PATTERN, QUERY_QUANTITY_PATTERN

REPO = Path(__file__).resolve().parents[2]
SPEC = json.loads((REPO / "openapi" / "openapi.json").read_text())
SEED_DIR = REPO / "seed_parts"
PART = "npn-small-signal"  # a seeded, approved part
SMALL_LIMIT = 1024  # MAX_CONTENT_LENGTH of the second app, which must refuse larger bodies with 413

OPERATIONS = {
    f"{method.upper()} {path}": operation
    for path, item in SPEC["paths"].items()
    if path.startswith("/v1/")
    for method, operation in item.items()
    if method != "parameters"
}


@dataclass(frozen=True)
class Case:
    operation: str  # "METHOD /path" as in the spec
    name: str
    status: tuple[int, ...]  # acceptable statuses
    body: bytes | None = None
    content_type: str = "application/json"
    query: str = ""
    part_id: str = PART  # fills {part_id}
    field: str | None = None  # the problem must name it
    role: str | None = None  # token sent: editor, reviewer or none
    if_match: str | None = None  # "current": the part's current ETag
    small_limit: bool = False
    answer: str = "problem"  # "problem", "text" (pick=) or "rows" (a batch refusing each row)
    quick: bool = False  # refused in well under a second
    also: tuple[str, ...] = ()  # further fields the answer must name

    @property
    def id(self) -> str:
        return f"{self.operation} {self.name}"


def as_json(value: Any) -> bytes:
    return json.dumps(value).encode()


def literal(template: Any, raw: str) -> bytes:
    """``template`` as JSON with the string "@" replaced by ``raw``, a literal JSON tools refuse to write."""
    return json.dumps(template).replace('"@"', raw).encode()


# ---- what each operation takes ---------------------------------------------------------------------------


def _schema(ref_or_schema: dict[str, Any]) -> dict[str, Any]:
    if "$ref" in ref_or_schema:
        return SPEC["components"]["schemas"][ref_or_schema["$ref"].rsplit("/", 1)[1]]
    return ref_or_schema


def numeric_property(operation: dict[str, Any]) -> str | None:
    """A property of the JSON body (or of a batch row) that takes a number, to carry hostile numbers."""
    schema = _schema(operation["requestBody"]["content"]["application/json"]["schema"])
    if "oneOf" in schema or schema.get("type") == "array":
        schema = _schema(batch_row(schema))
    for name, prop in sorted(schema.get("properties", {}).items()):
        kinds = [prop.get("type")] + [alt.get("type") for alt in prop.get("oneOf", [])]
        if "number" in kinds:
            return name
    return None


def batch_row(schema: dict[str, Any]) -> dict[str, Any]:
    """The schema of one row of a batch body (which may also come as an object of columns)."""
    rows = next(alternative for alternative in schema.get("oneOf", [schema]) if alternative.get("type") == "array")
    return rows["items"]


def is_batch(operation: str) -> bool:
    return operation.startswith("POST /v1/batch/")


def role_for(operation: str) -> str | None:
    if operation.startswith(("POST /v1/parts", "PUT /v1/parts", "DELETE /v1/parts")):
        return "reviewer" if operation.endswith(("/approve", "/send-back")) else "editor"
    if operation.startswith(("POST /v1/designs", "PUT /v1/designs", "DELETE /v1/designs")):
        return "editor"
    return None


def body_template(operation: str) -> Any:
    """A body whose only fault is the "@" placeholder, in the shape the operation takes."""
    if operation == "POST /v1/parts":
        return {"part_id": "hostile-part", "kind": "bjt", "parameters": {"hfe_min": "@"}}
    if operation == "PUT /v1/parts/{part_id}":
        return {"parameters": {"hfe_min": "@"}}
    if operation.startswith("DELETE /v1/parts") or operation.endswith(("/restore", "/send-back")):
        return {"reason": "@"}
    if operation.endswith("/comments"):
        return {"comment": "@"}
    name = numeric_property(OPERATIONS[operation]) or "zzz_unknown"
    return [{name: "@"}] if is_batch(operation) else {name: "@"}


def generic_body_cases(operation: str) -> list[Case]:
    role = role_for(operation)
    if_match = "current" if operation.startswith("PUT") else None
    template = body_template(operation)
    unknown: Any = [{"zzz_unknown": 1}] if is_batch(operation) else {"zzz_unknown": 1}

    def case(name: str, status: tuple[int, ...], body: bytes, **kwargs: Any) -> Case:
        return Case(operation, name, status, body, role=role, if_match=if_match, **kwargs)

    return [
        case("malformed JSON", (400,), b'{"supply_v": 12,'),
        case("JSON with a trailing comma", (400,), b'{"supply_v": 12,}'),
        case("wrong content type", (415,), b"<supply_v>12</supply_v>", content_type="application/xml"),
        case("form-encoded", (415,), b"supply_v=12", content_type="application/x-www-form-urlencoded"),
        case("100k nested arrays", (400,), b"[" * 100_000 + b"]" * 100_000),
        case("100k nested objects", (400,), b'{"a":' * 100_000 + b"1" + b"}" * 100_000),
        case("1e400", (400, 422), literal(template, "1e400")),
        case("10**400 as an integer literal", (400, 422), literal(template, "1" + "0" * 400)),
        case("10**5000 as an integer literal", (400, 422), literal(template, "1" + "0" * 5000)),
        case("NaN literal", (400, 422), literal(template, "NaN")),
        case("Infinity literal", (400, 422), literal(template, "Infinity")),
        case("-Infinity literal", (400, 422), literal(template, "-Infinity")),
        case("invalid UTF-8", (400,), b'{"supply_v": "\xff\xfe"}'),
        case("a bare string", (422,), b'"supply_v"'),
        case(
            "unknown field",
            (200,) if is_batch(operation) else (422,),
            as_json(unknown),
            field="zzz_unknown",
            answer="rows" if is_batch(operation) else "problem",
        ),
        case("oversized body", (413,), as_json({"padding": "x" * 2 * SMALL_LIMIT}), small_limit=True),
    ]


def generic_query_cases(operation: str) -> list[Case]:
    query = [p for p in OPERATIONS[operation].get("parameters", []) if p["in"] == "query"]
    numeric = next((p["name"] for p in query if "oneOf" in p["schema"] or p["schema"].get("type") == "integer"), None)
    cases = [Case(operation, "unknown query parameter", (422,), query="zzz_unknown=1", field="zzz_unknown")]
    if numeric:
        for raw in ("1e400", "NaN", "-Infinity", "9" * 5000, "12 parsecs"):
            cases.append(Case(operation, f"{numeric}={raw[:12]}", (422,), query=f"{numeric}={raw}", field=numeric))
    return cases


# ---- the physics of each calculation ---------------------------------------------------------------------

VALID = {
    "led-string": {"supply_v": 12, "vf_typ_v": 2.0, "vf_min_v": 1.8, "vf_max_v": 2.4, "if_max_a": 0.03,
                   "leds_in_series": 3, "current_a": 0.02},
    "bjt-switch": {"hfe_min": 100, "vbe_sat_v": 0.85, "vce_sat_v": 0.2, "ic_max_a": 0.2, "power_max_w": 0.625,
                   "collector_current_a": 0.04, "drive_high_v": 3.3},
    "slew-limit": {"slew_rate_v_per_s": 5e5, "frequency_hz": 1000, "amplitude_v": 1},
    "closed-loop-bandwidth": {"gbw_hz": 1e6, "gain": 10},
}  # fmt: skip
# (calculation, field, value, why): each value is impossible for the field; the answer must name it.
IMPOSSIBLE = [
    ("led-string", "supply_v", -12, "negative supply"),
    ("led-string", "supply_v", 0, "zero supply"),
    ("led-string", "supply_v", 5, "supply below the string's forward voltage"),
    ("led-string", "current_a", 0, "zero current"),
    ("led-string", "leds_in_series", 0, "no LEDs"),
    ("led-string", "supply_v", "12 A", "a current for a voltage"),
    ("led-string", "current_a", "20 mV", "a voltage for a current"),
    ("led-string", "supply_v", "1e31 V", "beyond the practical range"),
    ("bjt-switch", "collector_current_a", -0.04, "negative load current"),
    ("bjt-switch", "hfe_min", 0, "zero gain"),
    ("bjt-switch", "forced_beta", 0.5, "forced beta below 1"),
    ("bjt-switch", "drive_high_v", 0.5, "drive below the base-emitter voltage"),
    ("bjt-switch", "drive_high_v", "3.3 ohm", "a resistance for a voltage"),
    ("bjt-switch", "duty_cycle", 1.5, "duty cycle above 1"),
    ("slew-limit", "slew_rate_v_per_s", 0, "zero slew rate"),
    ("slew-limit", "frequency_hz", -1000, "negative frequency"),
    ("slew-limit", "slew_rate_v_per_s", "0.5 V", "a voltage for a slew rate"),
    ("closed-loop-bandwidth", "gbw_hz", 0, "zero gain-bandwidth"),
    ("closed-loop-bandwidth", "gain", 0.5, "non-inverting gain below 1"),
    ("closed-loop-bandwidth", "gbw_hz", "1 V", "a voltage for a frequency"),
    ("closed-loop-bandwidth", "sweep_points", 2001, "sweep of 2001 points"),
]
SWEEP = {"sweep_start_hz": 10, "sweep_stop_hz": 1e6}
PICK = {"led-string": "resistor_ohm", "bjt-switch": "rb_ohm", "slew-limit": "max_amplitude_v",
        "closed-loop-bandwidth": "bandwidth_hz"}  # fmt: skip


def impossible_inputs(calculation: str, field: str, value: Any) -> dict[str, Any]:
    inputs = {**VALID[calculation], field: value}
    return {**inputs, **SWEEP} if field == "sweep_points" else inputs


def query_string(inputs: dict[str, Any]) -> str:
    return "&".join(f"{name}={value}" for name, value in inputs.items())


def physics_cases() -> list[Case]:
    cases = []
    for calculation, field, value, why in IMPOSSIBLE:
        inputs = impossible_inputs(calculation, field, value)
        cases += [
            Case(f"POST /v1/calc/{calculation}", why, (422,), as_json(inputs), field=field),
            Case(f"GET /v1/calc/{calculation}", why, (422,), query=query_string(inputs), field=field),
            Case(
                f"GET /v1/calc/{calculation}",
                f"{why}, pick=",
                (422,),
                query=query_string(inputs) + f"&pick={PICK[calculation]}",
                field=field,
                answer="text",
            ),
            Case(f"POST /v1/batch/{calculation}", why, (200,), as_json([inputs, inputs]), field=field, answer="rows"),
            Case(
                f"POST /v1/batch/{calculation}",
                f"{why} (CSV)",
                (200,),
                csv_table(inputs),
                "text/csv",
                field=field,
                answer="rows",
            ),
        ]
        plot = f"GET /v1/plots/{calculation.removesuffix('-bandwidth')}.svg"
        if plot in OPERATIONS:
            cases.append(Case(plot, why, (422,), query=query_string(inputs), field=field))
    duty = "POST /v1/calc/duty-cycle-power"
    load = {"peak_current_a": 0.1, "duty_cycle": 0.5}
    many = list(range(100_001))
    for why, body, field in [
        ("zero supply", {"supply_v": 0, "loads": [load]}, "supply_v"),
        ("a charge for a voltage", {"supply_v": "2 Ah", "loads": [load]}, "supply_v"),
        ("negative load current", {"supply_v": 12, "loads": [{**load, "peak_current_a": -0.1}]},
         "loads.0.peak_current_a"),
        ("duty cycle above 1", {"supply_v": 12, "loads": [{**load, "duty_cycle": 1.5}]}, "loads.0.duty_cycle"),
        ("on time longer than the period", {"supply_v": 12, "loads": [
            {"peak_current_a": 0.1, "on_time_s": 2, "period_s": 1}]}, "loads.0.on_time_s"),
        ("no loads", {"supply_v": 12, "loads": []}, "loads"),
        ("100,001 waveform samples", {"supply_v": 12, "loads": [{"waveform": {"time_s": many, "current_a": many}}]},
         "loads.0.waveform.time_s"),
        ("waveform time running backwards", {"supply_v": 12, "loads": [
            {"waveform": {"time_s": [0, 2, 1], "current_a": [0, 1, 0]}}]}, "loads.0.waveform"),
    ]:  # fmt: skip
        cases.append(Case(duty, why, (422,), as_json(body), field=field))
    return cases


def csv_table(inputs: dict[str, Any]) -> bytes:
    return (",".join(inputs) + "\n" + ",".join(str(v) for v in inputs.values()) + "\n").encode()


# ---- the rules of the parts table ------------------------------------------------------------------------

BJT = {"polarity": "npn", "hfe_min": 100, "hfe_typ": 200, "vbe_sat_v": 0.85, "vce_sat_v": 0.2, "ic_max_a": 0.2,
       "vceo_max_v": 40, "power_max_w": 0.625}  # fmt: skip
NEW = {"part_id": "hostile-new", "kind": "bjt", "description": "", "parameters": BJT}
ODD_IDS = {
    "a NUL": "a%00b",
    "10,000 characters": "x" * 10_000,
    "non-ASCII": "%C3%BC%E2%82%AC",
    "upper case": "NPN-SMALL-SIGNAL",
    "a trailing newline": f"{PART}%0A",
    "an encoded slash": "..%2F..%2Fetc%2Fpasswd",
}


def parts_cases() -> list[Case]:
    post, put, approve = "POST /v1/parts", "PUT /v1/parts/{part_id}", "POST /v1/parts/{part_id}/approve"
    retire, restore = "DELETE /v1/parts/{part_id}", "POST /v1/parts/{part_id}/restore"
    cases = [
        Case(post, "no token", (401,), as_json(NEW)),
        Case(post, "a negative gain", (422,), as_json({**NEW, "parameters": {**BJT, "hfe_min": -5}}),
             field="parameters.hfe_min", role="editor"),
        Case(post, "a current for a voltage", (422,), as_json({**NEW, "parameters": {**BJT, "vbe_sat_v": "0.8 A"}}),
             field="parameters.vbe_sat_v", role="editor"),
        Case(post, "an unknown parameter", (422,), as_json({**NEW, "parameters": {**BJT, "zzz": 1}}),
             field="parameters.zzz", role="editor"),
        Case(post, "true for a parameter", (422,), as_json({**NEW, "parameters": {**BJT, "hfe_min": True}}),
             field="parameters.hfe_min", role="editor"),
        Case(put, "a list for a parameter and a stale If-Match", (422,),
             as_json({"parameters": {**BJT, "hfe_min": [100]}}), field="parameters.hfe_min", role="editor",
             if_match=f'"{PART}-r9"'),
        Case(post, "a path for a part id", (422,), as_json({**NEW, "part_id": "../etc"}), field="part_id",
             role="editor"),
        Case(post, "a NUL in the description", (422,), as_json({**NEW, "description": "a\x00b"}),
             field="description", role="editor"),
        Case(post, "an existing part id", (409,), as_json({**NEW, "part_id": PART}), role="editor"),
        Case(post, "an unknown kind", (422,), as_json({**NEW, "kind": "flux-capacitor"}), field="kind",
             role="editor"),
        Case(put, "no If-Match", (428,), as_json({"parameters": BJT}), role="editor"),
        Case(put, "a stale If-Match", (412,), as_json({"parameters": BJT}), role="editor",
             if_match=f'"{PART}-r9"'),
        Case(put, "an If-Match of another part", (412,), as_json({"parameters": BJT}), role="editor",
             if_match='"led-red-5mm-r1"'),
        Case(put, "an If-Match of 10**12", (412,), as_json({"parameters": BJT}), role="editor",
             if_match=f'"{PART}-r1000000000000"'),
        Case(put, "a negative gain", (422,), as_json({"parameters": {**BJT, "hfe_min": -5}}),
             field="parameters.hfe_min", role="editor", if_match="current"),
        Case(put, "no token", (401,), as_json({"parameters": BJT}), if_match="current"),
        Case(put, "an unknown part", (404,), as_json({"parameters": BJT}), part_id="no-such-part", role="editor",
             if_match='"no-such-part-r1"'),
        Case(retire, "no token", (401,), if_match="current"),
        Case(retire, "no If-Match", (428,), field="If-Match", role="editor"),
        Case(retire, "a stale If-Match", (412,), field="If-Match", role="editor", if_match=f'"{PART}-r9"'),
        Case(retire, "an If-Match of another part", (412,), role="editor", if_match='"led-red-5mm-r1"'),
        Case(retire, "a reason of 501 characters", (422,), as_json({"reason": "x" * 501}), field="reason",
             role="editor", if_match="current"),
        Case(retire, "a NUL in the reason", (422,), as_json({"reason": "a\x00b"}), field="reason", role="editor",
             if_match="current"),
        Case(retire, "an unknown part", (404,), part_id="no-such-part", role="editor", if_match='"no-such-part-r1"'),
        Case(restore, "no If-Match", (428,), field="If-Match", role="editor"),
        Case(restore, "a part that is not retired", (409,), role="editor", if_match="current"),
        Case(restore, "a stale If-Match", (412,), role="editor", if_match=f'"{PART}-r9"'),
        Case(restore, "an unknown part", (404,), part_id="no-such-part", role="editor", if_match='"no-such-part-r1"'),
        Case(approve, "an editor's token", (403,), role="editor", if_match="current"),
        Case(approve, "no If-Match", (428,), field="If-Match", role="reviewer"),
        Case(approve, "a revision in the body, no If-Match", (428,), as_json({"revision": 1}), role="reviewer"),
        Case(approve, "a revision that is not current", (412,), field="If-Match", role="reviewer",
             if_match=f'"{PART}-r2"'),
        Case(approve, "an If-Match of 10**12", (412,), role="reviewer", if_match=f'"{PART}-r1000000000000"'),
        Case(approve, "a weak If-Match with junk after it", (412,), role="reviewer", if_match=f'W/"{PART}-r1"x'),
        Case(approve, "an unknown part", (404,), part_id="no-such-part", role="reviewer",
             if_match='"no-such-part-r1"'),
    ]  # fmt: skip
    for query, field in [("limit=0", "limit"), ("limit=-1", "limit"), ("limit=1e400", "limit"),
                         ("offset=-1", "offset"), ("limit=" + "9" * 5000, "limit"), ("kind=flux", "kind"),
                         ("status=%00", "status"), ("stauts=draft", "stauts")]:  # fmt: skip
        cases.append(Case("GET /v1/parts", query[:20], (422,), query=query, field=field))
    for operation in OPERATIONS:
        if "{part_id}" in operation or "{design_id}" in operation:
            role = role_for(operation)
            for why, part_id in ODD_IDS.items():
                body = b"{}" if operation.startswith(("POST", "PUT")) else None
                cases.append(Case(operation, f"a part id with {why}", (404, 405), body, part_id=part_id, role=role))
    return cases


# ---- strings: over-long and hostile in every field -----------------------------------------------------------

LONG = "1" * 100_000 + "!"  # the parser once took minutes to refuse this; any input must refuse it at once
LED_PART = "led-red-5mm"  # a seeded LED: a part with a text parameter
LED = {"color": "red", "vf_typ_v": 2.0, "vf_min_v": 1.8, "vf_max_v": 2.4, "if_test_a": 0.02, "if_max_a": 0.03}
NEW_LED = {"part_id": "hostile-led", "kind": "led", "description": "", "parameters": LED}
Path = tuple[str | int, ...]


@dataclass(frozen=True)
class Input:
    path: Path  # where it goes in the body (or its query parameter)
    schema: dict[str, Any]
    shared: tuple[str, Path] | None  # (schema several operations refer to, path within it) for inner inputs

    @property
    def name(self) -> str:
        return ".".join(map(str, self.path))

    @property
    def text_forms(self) -> list[dict[str, Any]]:
        """The string forms the input accepts."""
        forms = [self.schema, *self.schema.get("oneOf", [])]
        return [form for form in forms if form.get("type") in ("string", ["string", "null"])]


def inputs(schema: dict[str, Any], path: Path = (), shared: tuple[str, Path] | None = None) -> Iterator[Input]:
    """Every input a request schema names, inner inputs of objects and arrays (their first item) included.
    A part's parameters are keyed by the kind's names, so an LED's are used."""
    if path and "$ref" in schema:
        shared = (schema["$ref"], path)
    schema = _schema(schema)
    if path:
        yield Input(path, schema, shared and (shared[0], path[len(shared[1]) :]))
    for alternative in schema.get("oneOf", []) or [schema]:
        inner = (alternative["$ref"], path) if "$ref" in alternative else shared
        alternative = _schema(alternative)
        for name, prop in sorted(alternative.get("properties", {}).items()):
            yield from inputs(prop, (*path, name), inner)
        if alternative.get("type") == "array":
            yield from inputs(alternative["items"], (*path, 0), inner)
        if path and path[-1] == "parameters" and isinstance(alternative.get("additionalProperties"), dict):
            for name in LED:
                yield from inputs(alternative["additionalProperties"], (*path, name), inner)


def request_inputs(operation: str) -> list[Input]:
    spec = OPERATIONS[operation]
    found = [Input((p["name"],), p["schema"], None) for p in spec.get("parameters", []) if p["in"] == "query"]
    body = spec.get("requestBody", {}).get("content", {}).get("application/json")
    if body:
        schema = _schema(body["schema"])
        found += inputs(batch_row(schema) if is_batch(operation) else schema)  # a batch: the inputs of a row
    return found


def placed(path: Path, value: Any, base: Any) -> Any:
    """``base`` with ``value`` at ``path``, the objects and lists on the way made where missing."""
    if not path:
        return value
    key, rest = path[0], path[1:]
    if isinstance(key, int):
        return [placed(rest, value, base[0] if isinstance(base, list) and base else None)]
    inner = base if isinstance(base, dict) else {}
    return {**inner, key: placed(rest, value, inner.get(key))}


def strings_case(operation: str, name: str, values: dict[Path, str], quick: bool = False) -> Case:
    """``operation`` with each of ``values`` at its path; the answer must name every one."""
    fields = tuple(".".join(map(str, path)) for path in values)
    common: dict[str, Any] = {"field": fields[0], "also": fields[1:], "quick": quick}
    if "requestBody" not in OPERATIONS[operation]:
        query = "&".join(f"{path[0]}={value}" for path, value in values.items())
        return Case(operation, name, (422,), query=query, answer="text" if "pick" in fields else "problem", **common)
    body: Any = {}
    if operation == "POST /v1/parts":
        body = NEW_LED
    elif operation == "PUT /v1/parts/{part_id}":
        body = {"parameters": LED}
    for path, value in values.items():
        body = placed(path, value, body)
    if is_batch(operation):
        return Case(operation, name, (200,), as_json([body]), answer="rows", **common)
    part_id = LED_PART if operation.startswith(("PUT", "POST /v1/parts/")) else PART
    if_match = "current" if operation.startswith("PUT") else None
    return Case(operation, name, (422,), as_json(body), part_id=part_id, role=role_for(operation), if_match=if_match,
                **common)  # fmt: skip


def csv_case(operation: str, name: str, column: str, value: str) -> Case:
    body = f"{column}\n{value}\n".encode()
    return Case(operation, name, (200,), body, "text/csv", field=column, answer="rows", quick=True)


def string_cases() -> list[Case]:
    """A 100,000-character string in every input of every operation (an input of a schema several operations
    share, in one of them) and in every column of a CSV batch; every input that takes text, just over its
    published length limit."""
    cases = []
    shared: set[tuple[str, Path]] = set()
    for operation in OPERATIONS:
        for each in request_inputs(operation):
            if each.shared not in shared:
                cases.append(strings_case(operation, f"{each.name} of 100,000 characters", {each.path: LONG}, True))
            if each.shared:
                shared.add(each.shared)
            if is_batch(operation) and len(each.path) == 1:
                cases.append(csv_case(operation, f"{each.name} of 100,000 characters (CSV)", each.name, LONG))
            for form in each.text_forms:
                if "maxLength" in form:
                    length = form["maxLength"] + 1
                    value = "1" + " " * (length - 2) + "V" if "pattern" in form else "x" * length
                    cases.append(strings_case(operation, f"{each.name} of {length} characters", {each.path: value}))
    return cases


# Each way a unit string reaches the parser: (operation, path of the input).
UNIT_ROUTES: list[tuple[str, Path]] = [
    ("POST /v1/calc/led-string", ("supply_v",)),
    ("GET /v1/calc/led-string", ("supply_v",)),
    ("POST /v1/calc/duty-cycle-power", ("loads", 0, "peak_current_a")),
    ("POST /v1/batch/led-string", ("supply_v",)),
    ("POST /v1/select/bjt-switch", ("transistor", "where", "hfe_min", "min")),
    ("POST /v1/review/channel", ("current_a",)),
    ("GET /v1/plots/led-string.svg", ("supply_v",)),
    ("POST /v1/parts", ("parameters", "vf_typ_v")),
    ("PUT /v1/parts/{part_id}", ("parameters", "vf_typ_v")),
]


def unit_string_cases() -> list[Case]:
    cases = []
    for hostile in HOSTILE_UNIT_STRINGS:
        label = f"unit string of {len(hostile)} characters {hostile[:6]!r}"
        cases += [strings_case(operation, label, {path: hostile}, quick=True) for operation, path in UNIT_ROUTES]
        cases.append(csv_case("POST /v1/batch/led-string", f"{label} (CSV)", "supply_v", hostile))
    return cases


CASES = [
    *(case for op in OPERATIONS if "requestBody" in OPERATIONS[op] for case in generic_body_cases(op)),
    *(
        case
        for op in OPERATIONS
        if op.startswith("GET") and OPERATIONS[op].get("parameters")
        for case in generic_query_cases(op)
    ),
    *physics_cases(),
    *parts_cases(),
    *string_cases(),
    *unit_string_cases(),
]


# ---- running a case --------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def target(database_url: str) -> Iterator[dict[str, Any]]:
    """The app on each store with the seed parts and tokens, a twin with a small body limit, and the table's
    state before any hostile request."""
    app = create_app({"DATABASE_URL": database_url, "SEED_DIR": str(SEED_DIR)})
    small = create_app({"DATABASE_URL": database_url, "MAX_CONTENT_LENGTH": SMALL_LIMIT})
    with app.extensions["calcsvc.db"].transaction() as session:
        for table in ("part_events", "part_revisions", "parts", "api_tokens"):
            session.execute(text(f"DELETE FROM {table}"))
        load_seed(session, SEED_DIR)
        tokens = {role: create_token(session, name, role) for name, role in (("edna", "editor"), ("rita", "reviewer"))}
    client = app.test_client()
    yield {"app": app, "small": small, "tokens": tokens, "before": table_state(client, with_revisions=True)}
    for each in (app, small):
        each.extensions["calcsvc.db"].dispose()


def table_state(client: FlaskClient, with_revisions: bool = False) -> dict[str, Any]:
    """Every part as listed, and (optionally) every revision of each: any write changes one of them."""
    listed = client.get("/v1/parts?limit=500").get_json()
    state: dict[str, Any] = {"parts": listed}
    if with_revisions:
        state["revisions"] = {
            item["part_id"]: client.get(f"/v1/parts/{item['part_id']}/revisions").get_json() for item in listed["items"]
        }
    return state


def send(case: Case, target: dict[str, Any]) -> Any:
    app: Flask = target["small"] if case.small_limit else target["app"]
    client = app.test_client()
    method, path = case.operation.split(" ", 1)
    path = path.replace("{design_id}", case.part_id).replace("{revision}", "1")  # a design's id has the same rule
    url = path.replace("{part_id}", case.part_id) + (f"?{case.query}" if case.query else "")
    headers = bearer(target["tokens"][case.role]) if case.role else {}
    if case.if_match == "current":
        headers["If-Match"] = client.get(f"/v1/parts/{case.part_id}").headers["ETag"]
    elif case.if_match:
        headers["If-Match"] = case.if_match
    kwargs: dict[str, Any] = {"headers": headers}
    if case.body is not None:
        kwargs.update(data=case.body, content_type=case.content_type)
    return client.open(url, method=method, **kwargs)


def check_problem(response: Any, case: Case) -> None:
    assert response.mimetype == PROBLEM
    body = json.loads(response.get_data(as_text=True))
    assert {"type", "title", "status", "detail"} <= body.keys()
    assert body["status"] == response.status_code
    for field in [case.field, *case.also] if case.field else []:
        assert field in body.get("errors", {}), body


def check_line(response: Any, case: Case) -> None:
    line = response.get_data(as_text=True)
    assert response.mimetype == "text/plain"
    assert line.startswith("error: ") and "\n" not in line and len(line) <= 300, line
    assert case.field is None or case.field in line, line


def check_rows(response: Any, case: Case) -> None:
    """A batch keeps its 200 and refuses each row with a problem of its own that names the field."""
    assert response.mimetype == "application/json"
    rows = response.get_json()["rows"]
    assert rows and not any(row["ok"] for row in rows)
    for row in rows:
        problem = row["problem"]
        assert {"type", "title", "status", "detail"} <= problem.keys()
        for field in (case.field, *case.also):
            assert field in problem["errors"], problem


@pytest.mark.parametrize("case", CASES, ids=[case.id for case in CASES])
def test_hostile_input_is_refused_with_a_problem(case: Case, target: dict[str, Any]) -> None:
    started = time.perf_counter()
    response = send(case, target)
    assert not case.quick or time.perf_counter() - started < 1.0  # generous: milliseconds are usual
    answer = response.get_data(as_text=True)
    assert response.status_code < 500, answer
    assert response.status_code in case.status, answer
    assert "Traceback" not in answer and 'File "' not in answer
    {"problem": check_problem, "text": check_line, "rows": check_rows}[case.answer](response, case)
    if role_for(case.operation):  # only these write; the last test below checks the table after every case
        assert table_state(target["app"].test_client()) == {"parts": target["before"]["parts"]}


def test_every_endpoint_meets_hostile_input() -> None:
    """The table reaches every /v1 operation of the committed document, so a new endpoint cannot slip by."""
    assert set(OPERATIONS) <= {case.operation for case in CASES}


def test_the_parts_table_and_its_revisions_are_unchanged(target: dict[str, Any]) -> None:
    """Runs after the hostile cases on the same store."""
    assert table_state(target["app"].test_client(), with_revisions=True) == target["before"]


def test_every_text_input_has_a_published_length_limit() -> None:
    """The limit the server enforces before reading a string is in the document (choices and part ids, whose
    pattern bounds them, need none), so an input added later cannot take text of any length unseen."""
    unbounded = [
        f"{operation} {each.name}"
        for operation in OPERATIONS
        for each in request_inputs(operation)
        for form in each.text_forms
        if not {"maxLength", "enum"} & form.keys() and form.get("pattern") != PART_ID
    ]
    assert not unbounded


def test_quantity_strings_are_published_with_the_parsers_pattern() -> None:
    published = {
        (operation, form.get("pattern"), form.get("maxLength"))
        for operation in OPERATIONS
        for each in request_inputs(operation)
        if "x-unit" in each.schema
        for form in each.text_forms
    }
    # A body and the plots' query take a decimal point only; the calculations' query form also a comma (read
    # with decimal=comma).
    for operation, pattern, _ in published:
        comma = operation.startswith("GET /v1/calc/")
        assert pattern == (QUERY_QUANTITY_PATTERN if comma else QUANTITY_PATTERN), operation
    assert {length for *_, length in published} == {MAX_QUANTITY_LENGTH}
