"""The Python client over real HTTP: a threaded server on loopback serving the test app (both stores), and tiny
stub servers for the retry rules."""

from __future__ import annotations

import csv
import io
import json
import socket
import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from typing import Any

import pytest

from calcsvc import client as client_module
from calcsvc.client import CalcsvcConnectionError, CalcsvcError, Client

pytest_plugins = ("live_server",)

LED = {
    "color": "amber",
    "vf_typ_v": 2.1,
    "vf_min_v": "1.9 V",
    "vf_max_v": 2.5,
    "if_test_a": "20 mA",
    "if_max_a": 0.03,
}


ROLES = {"supply", "led", "transistor", "driver", "opamp"}


@pytest.fixture
def calc_client(live_url: str, seeded: Any) -> Iterator[Client]:
    with Client(live_url) as client:
        yield client


@pytest.fixture
def sleeps(monkeypatch: pytest.MonkeyPatch) -> list[float]:
    """The client's backoff delays, recorded instead of slept."""
    delays: list[float] = []
    monkeypatch.setattr(client_module.time, "sleep", delays.append)
    return delays


# --- calculations against the seeded parts --------------------------------------------------------------------


@pytest.mark.parametrize(
    ("method", "inputs", "result", "expected"),
    [
        # 12 V - 3 x 2.1 V = 5.7 V across the resistor; 5.7 V / 20 mA = 285 ohm, up to the E24 300 ohm (arithmetic).
        (
            "led_string",
            {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "leds_in_series": 3, "current_a": "20 mA"},
            "resistor_ohm",
            300.0,
        ),
        # Ib = 60 mA / (the part's Vce(sat) test ratio 10 / 1.05 for a +5 % E24 resistor) = 6.3 mA.
        (
            "bjt_switch",
            {"transistor": "npn-small-signal", "driver": "driver-mcu-3v3", "collector_current_a": "60 mA"},
            "base_current_required_a",
            0.0063,
        ),
        # Single pole: bandwidth = GBW/NG + GBW/A0 = 1.2 MHz/10 + 1.2 MHz/150 000 (Sedra & Smith, Microelectronic
        # Circuits, 7th ed., §2.7.3, from memory).
        ("closed_loop_bandwidth", {"opamp": "opamp-general-1mhz", "gain": 10}, "bandwidth_hz", 120_008.0),
        # Required slew rate of a sine: 2 pi f A = 2 pi x 20 kHz x 5 V (from memory).
        (
            "slew_limit",
            {"opamp": "opamp-general-1mhz", "frequency_hz": "20 kHz", "amplitude_v": 5},
            "required_slew_rate_v_per_s",
            628_318.53,
        ),
        # Six 60 mA loads at 50 % duty: 6 x 60 mA x 0.5 = 180 mA average (arithmetic).
        (
            "duty_cycle_power",
            {"supply": "supply-battery-9v-6aa", "loads": [{"peak_current_a": 0.06, "duty_cycle": 0.5, "count": 6}]},
            "average_current_a",
            0.18,
        ),
    ],
)
def test_each_calculation_method(
    calc_client: Client, method: str, inputs: dict[str, Any], result: str, expected: float
) -> None:
    envelope = getattr(calc_client, method)(**inputs)
    assert envelope["results"][result] == pytest.approx(expected, rel=1e-4)
    assert envelope["calculation"] == method.replace("_", "-")
    referenced = {value for name, value in inputs.items() if name in ROLES}
    assert {p["part_id"] for p in envelope["parts"]} == referenced
    assert all(p["revision"] == 1 and p["status"] == "approved" for p in envelope["parts"])
    assert len(envelope["fingerprint"]) == 64
    assert envelope == calc_client.calc(method.replace("_", "-"), **inputs)  # pure: same inputs, same answer


def test_a_failing_check_is_an_answer_not_an_error(calc_client: Client) -> None:
    envelope = calc_client.slew_limit(opamp="opamp-general-1mhz", frequency_hz=20_000, amplitude_v=5, supply_v=24)
    checks = {c["name"]: c["ok"] for c in envelope["checks"]}
    # 628 kV/s needed against 0.6 V/µs; 24 V is inside the op-amp's 6-30 V.
    assert checks == {"slew_rate": False, "output_swing": True, "opamp_supply_min": True, "opamp_supply_max": True}


# --- parts -----------------------------------------------------------------------------------------------------


def test_parts_round_trip(live_url: str, tokens: dict[str, str]) -> None:
    with Client(live_url, tokens["edna"]) as edna, Client(live_url, tokens["rita"]) as rita:
        created, etag = edna.create_part("led-amber-3mm", "led", LED, "Amber indicator LED, 3 mm")
        assert (created["revision"], created["status"], created["parameters"]["if_test_a"]) == (1, "draft", 0.02)
        part, read_etag = edna.get_part("led-amber-3mm")
        assert read_etag == etag and part == created
        updated, new_etag = edna.update_part("led-amber-3mm", {**part["parameters"], "if_max_a": "25 mA"}, read_etag)
        assert (updated["revision"], updated["parameters"]["if_max_a"]) == (2, 0.025)
        assert updated["description"] == "Amber indicator LED, 3 mm"  # None keeps it
        assert new_etag != read_etag
        with pytest.raises(CalcsvcError) as stale:
            rita.approve_part("led-amber-3mm", read_etag)  # revision 1 is not what would be approved
        assert stale.value.status == 412
        approved, approved_etag = rita.approve_part("led-amber-3mm", new_etag)
        assert (approved["status"], approved["approved_by"]) == ("approved", "rita")
        history = edna.revisions("led-amber-3mm")
        assert [(r["revision"], r["author"], r["approved_by"]) for r in history] == [
            (1, "edna", None),
            (2, "edna", "rita"),
        ]
        assert [r["parameters"]["if_max_a"] for r in history] == [0.03, 0.025]
        retired, retired_etag = edna.retire_part("led-amber-3mm", approved_etag, reason="replaced")
        assert retired["status"] == "retired"
        assert [(e["action"], e["reason"]) for e in edna.revisions("led-amber-3mm")[-1]["events"]][-1] == (
            "retired",
            "replaced",
        )
        restored, restored_etag = edna.restore_part("led-amber-3mm", retired_etag, reason="back in stock")
        assert (restored["revision"], restored["status"], restored_etag) == (3, "draft", '"led-amber-3mm-r3"')
        assert rita.approve_part("led-amber-3mm", restored_etag)[0]["status"] == "approved"


def test_reviewer_cannot_approve_own_revision(live_url: str, tokens: dict[str, str]) -> None:
    with Client(live_url, tokens["rita"]) as rita:
        _, etag = rita.create_part("led-amber-3mm", "led", LED)
        with pytest.raises(CalcsvcError) as caught:
            rita.approve_part("led-amber-3mm", etag)
    assert caught.value.status == 403
    assert "revision" in caught.value.errors


def test_stale_etag_is_refused_and_the_part_is_unchanged(live_url: str, tokens: dict[str, str]) -> None:
    with Client(live_url, tokens["edna"]) as edna:
        _, etag = edna.create_part("led-amber-3mm", "led", LED)
        edna.update_part("led-amber-3mm", {**LED, "if_max_a": 0.025}, etag)
        with pytest.raises(CalcsvcError) as caught:
            edna.update_part("led-amber-3mm", {**LED, "if_max_a": 0.02}, etag, "overwrite")
        stored, _ = edna.get_part("led-amber-3mm")
    assert caught.value.status == 412
    assert caught.value.type == "urn:calcsvc:problem:stale-revision"
    assert caught.value.instance == "/v1/parts/led-amber-3mm"
    assert (stored["revision"], stored["parameters"]["if_max_a"], stored["description"]) == (2, 0.025, "")


def test_validation_errors_name_the_field(live_url: str, tokens: dict[str, str], seeded: Any) -> None:
    with Client(live_url, tokens["edna"]) as edna:
        with pytest.raises(CalcsvcError) as wrong_unit:
            edna.create_part("led-amber-3mm", "led", {**LED, "if_max_a": "30 mV"})
        with pytest.raises(CalcsvcError) as bad_input:
            edna.led_string(supply="supply-adapter-12v-2a", led="led-red-5mm", leds_in_series="x", current_a=0.02)
        with pytest.raises(CalcsvcError) as unknown_part:
            edna.led_string(supply="no-such-supply", led="led-red-5mm", leds_in_series=3, current_a=0.02)
        assert [p["part_id"] for p in edna.list_parts(kind="led")].count("led-amber-3mm") == 0
    assert wrong_unit.value.status == 422
    assert "dimension" in wrong_unit.value.errors["parameters.if_max_a"][0]
    assert (bad_input.value.status, list(bad_input.value.errors)) == (422, ["leds_in_series"])
    assert (unknown_part.value.status, list(unknown_part.value.errors)) == (404, ["supply"])
    assert "leds_in_series" in bad_input.value.describe()
    # The message itself says what is wrong with each field, not only which fields.
    reason = bad_input.value.errors["leds_in_series"][0]
    assert str(bad_input.value).endswith(f"(leds_in_series: {reason})")


def test_writes_need_a_token(live_url: str) -> None:
    with Client(live_url) as anonymous, pytest.raises(CalcsvcError) as caught:
        anonymous.create_part("led-amber-3mm", "led", LED)
    assert caught.value.status == 401


def test_list_parts_follows_pages(live_url: str, seeded: Any, monkeypatch: pytest.MonkeyPatch) -> None:
    with Client(live_url) as client:
        whole = client.list_parts()
        monkeypatch.setattr(client_module, "PAGE_SIZE", 4)
        paged = client.list_parts()
        leds = client.list_parts(kind="led", status="approved")
    assert len(whole) >= 20
    assert paged == whole
    assert [p["part_id"] for p in whole] == sorted(p["part_id"] for p in whole)
    assert {p["kind"] for p in leds} == {"led"} and len(leds) == 6


# --- batch (POST /v1/batch/<name>, written against its contract) ----------------------------------------------

ROWS = [
    {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "leds_in_series": 3, "current_a": "20 mA"},
    {"supply": "supply-adapter-12v-2a", "led": "led-red-5mm", "leds_in_series": 3, "current_a": "20 V"},
]


def test_batch_of_dicts(calc_client: Client) -> None:
    answer = calc_client.batch("led-string", ROWS)
    assert (answer["calculation"], answer["count"], answer["ok_count"]) == ("led-string", 2, 1)
    good, bad = answer["rows"]
    assert (good["row"], good["ok"], good["results"]["resistor_ohm"]) == (0, True, 300.0)  # as the single call
    assert {"checks", "warnings", "cautions"} <= good.keys()
    assert (bad["row"], bad["ok"]) == (1, False)
    assert "current_a" in bad["problem"]["errors"]


def test_batch_from_a_csv_file(calc_client: Client, tmp_path: Path) -> None:
    path = tmp_path / "rows.csv"
    path.write_text("supply,led,leds_in_series,current_a\nsupply-adapter-12v-2a,led-red-5mm,3,20 mA\n")
    answer = calc_client.batch("led-string", path)
    assert answer["ok_count"] == 1 and answer["rows"][0]["results"]["resistor_ohm"] == 300.0
    text = calc_client.batch("led-string", str(path), accept="csv")
    header, line = csv.reader(io.StringIO(text))  # the cautions cell holds commas, so it is quoted
    assert header[:3] == ["row", "computed", "passes"] and "resistor_ohm" in header
    assert dict(zip(header, line, strict=True))["resistor_ohm"] == "300.0"


# --- retries and transport errors, against stub servers --------------------------------------------------------

Answer = tuple[int, str, bytes]


@contextmanager
def stub_server(answer: Callable[[str, str], Answer]) -> Iterator[tuple[str, list[tuple[str, str, dict[str, str]]]]]:
    """A loopback HTTP server answering ``answer(method, path)``; yields its URL and the requests it saw."""
    seen: list[tuple[str, str, dict[str, str]]] = []

    class Handler(BaseHTTPRequestHandler):
        def _reply(self) -> None:
            self.rfile.read(int(self.headers.get("Content-Length") or 0))
            seen.append((self.command, self.path, dict(self.headers)))
            status, content_type, body = answer(self.command, self.path)
            self.send_response(status)
            self.send_header("Content-Type", content_type)
            self.send_header("Content-Length", str(len(body)))
            self.send_header("ETag", '"stub-r1"')
            self.end_headers()
            self.wfile.write(body)

        do_GET = do_POST = do_PUT = do_DELETE = _reply

        def log_message(self, *_args: Any) -> None:
            pass

    server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
    thread = threading.Thread(target=server.serve_forever, kwargs={"poll_interval": 0.02}, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{server.server_port}", seen
    finally:
        server.shutdown()
        server.server_close()
        thread.join(timeout=5)


def flaky(failures: int, status: int = 503) -> Callable[[str, str], Answer]:
    """``failures`` answers of ``status`` (as problem documents), then 200 with a part."""
    count = 0

    def answer(_method: str, _path: str) -> Answer:
        nonlocal count
        count += 1
        if count <= failures:
            problem = {"type": "about:blank", "title": "Service unavailable", "status": status, "detail": "busy"}
            return status, "application/problem+json", json.dumps(problem).encode()
        return 200, "application/json", json.dumps({"part_id": "stub", "revision": 1}).encode()

    return answer


IDEMPOTENT_CALLS: dict[str, Callable[[Client], Any]] = {
    "get": lambda c: c.get_part("stub"),
    "put": lambda c: c.update_part("stub", {"vf_typ_v": 2.0}, '"stub-r1"'),
    "delete": lambda c: c.retire_part("stub", '"stub-r1"'),
    "restore": lambda c: c.restore_part("stub", '"stub-r1"'),
    "calculation": lambda c: c.led_string(supply_v=12),
    "batch": lambda c: c.batch("led-string", [{"supply_v": 12}]),
}


@pytest.mark.parametrize("call", IDEMPOTENT_CALLS.values(), ids=IDEMPOTENT_CALLS.keys())
def test_idempotent_calls_retry_503_with_growing_backoff(call: Callable[[Client], Any], sleeps: list[float]) -> None:
    with stub_server(flaky(2)) as (url, seen), Client(url, retries=3, backoff=0.05) as client:
        answer = call(client)
    assert len(seen) == 3
    assert len({(method, path) for method, path, _ in seen}) == 1  # the same request, repeated
    assert sleeps == [0.05, 0.1]
    part = answer[0] if isinstance(answer, tuple) else answer
    assert part["part_id"] == "stub"


def test_a_retried_put_keeps_its_if_match(sleeps: list[float]) -> None:
    with stub_server(flaky(1, 502)) as (url, seen), Client(url, backoff=0.01) as client:
        client.update_part("stub", {"vf_typ_v": 2.0}, '"stub-r7"')
    assert [headers["If-Match"] for _, _, headers in seen] == ['"stub-r7"', '"stub-r7"']


NEVER_RETRIED: dict[str, Callable[[Client], Any]] = {
    "create": lambda c: c.create_part("stub", "led", LED),
    "approve": lambda c: c.approve_part("stub", '"stub-r1"'),
}


@pytest.mark.parametrize("call", NEVER_RETRIED.values(), ids=NEVER_RETRIED.keys())
def test_creating_and_approving_are_never_retried(call: Callable[[Client], Any], sleeps: list[float]) -> None:
    with stub_server(flaky(2)) as (url, seen), Client(url, retries=3) as client, pytest.raises(CalcsvcError) as caught:
        call(client)
    assert len(seen) == 1 and sleeps == []
    assert (caught.value.status, caught.value.detail) == (503, "busy")


def test_retries_are_bounded(sleeps: list[float]) -> None:
    with stub_server(flaky(100, 504)) as (url, seen), Client(url, retries=2, backoff=0.01) as client:
        with pytest.raises(CalcsvcError) as caught:
            client.get_part("stub")
    assert len(seen) == 3 and caught.value.status == 504


def test_other_errors_are_not_retried_and_non_problem_bodies_still_raise(sleeps: list[float]) -> None:
    def broken(_method: str, _path: str) -> Answer:
        return 500, "text/html", b"<html><body>Internal   Server Error</body></html>"

    with stub_server(broken) as (url, seen), Client(url) as client, pytest.raises(CalcsvcError) as caught:
        client.get_part("stub")
    assert len(seen) == 1 and sleeps == []
    error = caught.value
    assert (error.status, error.title, error.errors, error.instance) == (
        500,
        "Internal Server Error",
        {},
        "/v1/parts/stub",
    )
    assert error.detail == "<html><body>Internal Server Error</body></html>"


def unused_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


def test_connection_refused_raises_after_bounded_retries(sleeps: list[float]) -> None:
    with Client(f"http://127.0.0.1:{unused_port()}", retries=2, backoff=0.01, timeout=2) as client:
        with pytest.raises(CalcsvcConnectionError) as read:
            client.list_parts()
        assert sleeps == [0.01, 0.02]
        with pytest.raises(CalcsvcConnectionError) as write:
            client.create_part("stub", "led", LED)
        assert sleeps == [0.01, 0.02]  # a create is tried once
    assert read.value.status == 0 and isinstance(read.value, CalcsvcError)
    assert "after 3 attempts" in read.value.detail and "after 1 attempt:" in write.value.detail


def test_base_url_must_be_http() -> None:
    with pytest.raises(ValueError, match="http"):
        Client("127.0.0.1:8000")
