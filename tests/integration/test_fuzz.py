"""Schema-driven fuzzing: every operation of the committed OpenAPI document, in-process, on each store.

Schemathesis generates schema-valid and schema-violating requests (explicit examples, coverage of boundaries,
then random cases) from ``openapi/openapi.json`` (the file the app serves; tests/test_openapi.py keeps them
equal) and checks each answer: no 5xx, the status explicitly documented for the operation, the documented
content type, the body and headers valid against the documented schema, schema-violating data refused. Part
ids, ETags, tokens and part bodies are steered on some schema-valid cases so the write paths succeed too,
not only end in 404 or 412.
"""

from __future__ import annotations

import json
from collections import Counter
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
import schemathesis
from hypothesis import HealthCheck, settings
from hypothesis import strategies as st
from sqlalchemy import text

from calcsvc import create_app
from calcsvc.data.part_ids import PATTERN
from calcsvc.data.seed import load_seed
from calcsvc.data.tokens import create_token

REPO = Path(__file__).resolve().parents[2]
SPEC = REPO / "openapi" / "openapi.json"
SEED_DIR = REPO / "seed_parts"
SEED_PARTS = {
    part["part_id"]: part for path in sorted(SEED_DIR.glob("*.json")) for part in json.loads(path.read_text())["parts"]
}
EXAMPLES_PER_OPERATION = 15

SETTINGS: dict[str, Any] = {
    "generation": {"mode": "all", "deterministic": True},
    "checks": {
        # It expects 2xx for every schema-valid request, but JSON Schema cannot state physics or the table's
        # state: a supply below the LED string's forward voltage, a unit of the wrong dimension in a string
        # that fits the pattern, a part id no one created, a stale ETag are rightly 404/412/422 problems.
        "positive_data_acceptance": {"enabled": False},
    },
    "operations": [
        {
            # A batch answers 200 with a problem on each bad row ("a bad row does not fail the batch"), so a
            # schema-violating row is refused inside the 200 (tests/test_batch_api.py checks those rows).
            "include-tag": "batch",
            "checks": {"negative_data_rejection": {"enabled": False}},
        },
        {
            # Their bodies are the calculation inputs again (whose boundaries the coverage phase walks on
            # /v1/calc, /v1/batch and /v1/plots) plus ranking options; walking them all again would take more
            # than the rest of the run, so these get the random cases only.
            "include-path-regex": "^/v1/(select|review)/",
            "phases": {"coverage": {"enabled": False}},
        },
    ],
}
schema = schemathesis.openapi.from_path(SPEC, config=schemathesis.Config.from_dict(SETTINGS))
# The steered test draws from an extra strategy, which explicit examples cannot supply.
steered = schemathesis.openapi.from_path(
    SPEC, config=schemathesis.Config.from_dict({**SETTINGS, "phases": {"examples": {"enabled": False}}})
).exclude(path_regex="^(?!/v1/parts)")  # include() would be ORed with the per-operation settings


class FuzzSummary:
    """Requests and failing operations per store, printed in pytest's terminal summary whatever ``-s`` says."""

    def __init__(self) -> None:
        self.requests: Counter[str] = Counter()
        self.per_operation: dict[str, Counter[str]] = {}
        self.failing: dict[str, set[str]] = {}
        self.lines: list[str] = []

    def pytest_terminal_summary(self, terminalreporter: Any) -> None:
        if self.lines:
            terminalreporter.section("schema fuzzing")
            for line in self.lines:
                terminalreporter.write_line(line)


SUMMARY = FuzzSummary()


def explicitly_documented_status(ctx: Any, response: Any, case: Any) -> None:
    """Stricter than status_code_conformance, which lets ``default`` cover any status: name each one."""
    if case.method.upper() != case.operation.method.upper():
        return  # a probe with another method: the unsupported_method check judges its 405
    documented = {str(code) for code in case.operation.responses.status_codes} - {"default"}
    status = str(response.status_code)
    if status not in documented and f"{status[0]}XX" not in documented:
        raise AssertionError(f"{case.operation.label} answered {status}, documented only {sorted(documented)}")


@pytest.fixture(scope="module")
def fuzz_target(database_url: str, request: pytest.FixtureRequest) -> Iterator[dict[str, Any]]:
    """One app per store for the whole module, with the seed parts and an editor's and a reviewer's token."""
    app = create_app({"DATABASE_URL": database_url, "SEED_DIR": str(SEED_DIR)})
    database = app.extensions["calcsvc.db"]
    with database.transaction() as session:
        for table in ("part_events", "part_revisions", "parts", "api_tokens"):
            session.execute(text(f"DELETE FROM {table}"))
        load_seed(session, SEED_DIR)
        tokens = {role: create_token(session, name, role) for name, role in (("edna", "editor"), ("rita", "reviewer"))}
    if not request.config.pluginmanager.is_registered(SUMMARY):
        request.config.pluginmanager.register(SUMMARY, "calcsvc-fuzz-summary")
    backend = database_url.split(":", 1)[0].split("+", 1)[0]
    parameters = {part_id: part["parameters"] for part_id, part in SEED_PARTS.items()}
    yield {
        "app": app,
        "tokens": tokens,
        "backend": backend,
        "parameters": parameters,
        "created": [],
        "drafts": [],
        "retired": [],
    }
    database.dispose()


MOSTLY = st.sampled_from([True, True, True, False])


def _steer(case: Any, data: st.DataObject, target: dict[str, Any]) -> None:
    """On most schema-valid cases, name a real part (a draft to approve, one of this run's own to retire, a retired
    one to restore), send its current ETag and a well-formed body, so that writes succeed and their answers are
    checked too."""
    known = target["parameters"]
    # Every draw happens whatever the pools hold: a draw that depends on state left by earlier cases makes
    # hypothesis see a different data shape when it replays an example.
    name_part, send_etag, send_body, pick = data.draw(st.tuples(MOSTLY, MOSTLY, MOSTLY, st.integers(0, 2**16)))
    if "part_id" in (case.path_parameters or {}) and name_part:
        pools = {"DELETE": target["created"], "POST": target["drafts"]}
        pool = (target["retired"] if case.path.endswith("/restore") else pools.get(case.method)) or sorted(known)
        case.path_parameters["part_id"] = pool[pick % len(pool)]
    part_id = (case.path_parameters or {}).get("part_id")
    if case.method in ("PUT", "POST", "DELETE") and part_id and send_etag:
        current = target["app"].test_client().get(f"/v1/parts/{part_id}")
        if current.status_code == 200:
            case.headers = {**(case.headers or {}), "If-Match": current.headers["ETag"]}
    if case.method == "PUT" and part_id in known and send_body:
        case.body = {"parameters": known[part_id]}
    if case.method == "POST" and case.path == "/v1/parts" and data.draw(MOSTLY):
        template = SEED_PARTS[data.draw(st.sampled_from(sorted(SEED_PARTS)))]
        new_id = data.draw(st.from_regex(PATTERN.removeprefix("^").removesuffix("$"), fullmatch=True))
        case.body = {"part_id": new_id, "kind": template["kind"], "parameters": template["parameters"]}


def _remember(case: Any, response: Any, target: dict[str, Any]) -> None:
    """Parts this run created (to retire), revisions waiting for review (to approve) and retired parts (to
    restore)."""
    if response is None or response.status_code not in (200, 201) or case.method == "GET":
        return
    part = response.json()
    if response.status_code == 201:
        target["created"].append(part["part_id"])
        target["parameters"][part["part_id"]] = part["parameters"]
    for status, pool in (("draft", target["drafts"]), ("retired", target["retired"])):
        if part.get("status") == status and part["part_id"] not in pool:
            pool.append(part["part_id"])
        elif part.get("status") != status and part["part_id"] in pool:
            pool.remove(part["part_id"])


def _boundary_case_off_the_store(case: Any) -> bool:
    """Boundary cases of the calculation inputs exercise the same code on any store: SQLite runs them."""
    phase = case.meta.phase.name.value if case.meta is not None else None
    return phase == "coverage" and not case.operation.path.startswith("/v1/parts")


def _call(case: Any, fuzz_target: dict[str, Any]) -> Any:
    backend, label = fuzz_target["backend"], case.operation.label
    if backend != "sqlite" and _boundary_case_off_the_store(case):
        return None
    if str((case.query or {}).get("sheet")).lower() in ("true", "1"):
        # Sheet mode answers a refusal with 200 so that a cell shows it (tests/integration/test_sheet_mode.py):
        # the case is checked for its refusal without it.
        del case.query["sheet"]
    headers = {}
    if case.method != "GET":
        # The editor writes and the reviewer approves, so approving someone else's revision can succeed.
        role = "reviewer" if case.path.endswith(("/approve", "/send-back")) else "editor"
        headers["Authorization"] = f"Bearer {fuzz_target['tokens'][role]}"
    SUMMARY.requests[backend] += 1
    SUMMARY.per_operation.setdefault(backend, Counter())[label] += 1
    try:
        return case.call_and_validate(
            headers=headers, app=fuzz_target["app"], additional_checks=[explicitly_documented_status]
        )
    except BaseException:  # schemathesis reports failures as a BaseExceptionGroup
        SUMMARY.failing.setdefault(backend, set()).add(label)
        raise


FUZZ_SETTINGS = settings(
    max_examples=EXAMPLES_PER_OPERATION,
    deadline=None,
    derandomize=True,
    database=None,
    suppress_health_check=list(HealthCheck),
)


@schema.parametrize()
@FUZZ_SETTINGS
def test_every_operation_conforms(case: Any, fuzz_target: dict[str, Any]) -> None:
    """Examples, boundary coverage (valid and invalid) and random cases, exactly as the schema describes them."""
    _call(case, fuzz_target)


@steered.parametrize()
@steered.given(data=st.data())
@FUZZ_SETTINGS
def test_part_writes_conform_when_they_succeed(case: Any, data: st.DataObject, fuzz_target: dict[str, Any]) -> None:
    """Random cases of the parts operations, some steered to real parts, current ETags and valid bodies."""
    if case.meta is not None and case.meta.generation.mode.is_positive:
        _steer(case, data, fuzz_target)
    _remember(case, _call(case, fuzz_target), fuzz_target)


def test_fuzzing_reached_every_operation(fuzz_target: dict[str, Any], record_property: Any) -> None:
    """Runs after the fuzzing on the same store: every documented operation got requests, none failed."""
    backend = fuzz_target["backend"]
    per_operation = SUMMARY.per_operation.get(backend, Counter())
    operations = {f"{method.upper()} {path}" for path, item in json.loads(SPEC.read_text())["paths"].items()
                  for method in item if method != "parameters"}  # fmt: skip
    failing = SUMMARY.failing.get(backend, set())
    line = (
        f"schemathesis ({backend}): {SUMMARY.requests[backend]} requests, {len(operations)} operations, "
        f"{len(failing)} failures"
    )
    SUMMARY.lines.append(line)
    record_property("schemathesis", line)
    assert not operations - set(per_operation), f"not fuzzed: {sorted(operations - set(per_operation))}"
    assert not failing, f"failing operations: {sorted(failing)}"
