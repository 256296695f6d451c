"""``make load``: a bounded mix of calculation and parts traffic against calcsvc under gunicorn.

The server runs on a free loopback port with a fresh SQLite file, or with ``DATABASE_URL`` from the environment
(PostgreSQL; upgraded and seeded first). A second process drives, for ``--seconds`` after a warm-up:

- 60 % ``POST /v1/calc/*``: every calculation, varied valid bodies, many with part references and unit strings;
- 30 % reads: ``GET /v1/parts`` (pages, filters), ``/v1/parts/<id>`` and its revisions;
- 10 % writes with an editor token from ``calcsvc token create``: read a scratch part, ``PUT`` it with
  ``If-Match``, and on 412 (another client wrote it first) read it again and retry.

Writes go to scratch parts this script creates (``load-<run>-<k>``) and retires at the end, so the seed parts
and any real parts stay untouched; the token is revoked at the end. Prints requests/s, p50/p99 latency and the
non-2xx answers; 412 on a racing write is expected and counted apart. Exits 1 on any other non-2xx answer.
"""

from __future__ import annotations

import argparse
import os
import random
import sys
import time
from collections import Counter
from typing import Any

import orjson
from server import Server, calcsvc, gunicorn
from traffic import Client, Tally, drive, percentile

JSON = {"Content-Type": "application/json"}
MIX = (("calc", 0.6), ("read", 0.3), ("write", 0.1))
SCRATCH_PARTS = 3  # few, so concurrent writers collide and the 412 path is exercised
MAX_WRITE_ATTEMPTS = 5
MAX_PRINTED_FAILURES = 3  # per client thread

SCRATCH_LED = {"color": "red", "vf_typ_v": 2.0, "vf_min_v": 1.8, "vf_max_v": 2.4, "if_test_a": 0.02, "if_max_a": 0.03}
NPN = ("npn-small-signal", "npn-medium-power", "npn-power-tab", "npn-darlington-1a")
DRIVERS = ("driver-mcu-3v3", "driver-mcu-5v", "driver-logic-buffer-3v3")
OPAMPS = ("opamp-general-1mhz", "opamp-rrio-3mhz", "opamp-jfet-4mhz", "opamp-micropower-100khz")
SUPPLIES = ("supply-adapter-12v-2a", "supply-battery-9v-6aa")  # both leave headroom for the strings below
# (led part, LEDs per string, transistor): strings that fit under 9 V less 15 %.
STRINGS = (
    ("led-red-5mm", 3, "npn-small-signal"),
    ("led-green-5mm", 2, "npn-small-signal"),
    ("led-white-5mm", 2, "npn-small-signal"),
    ("led-blue-5mm", 2, "npn-small-signal"),
)
SEED_PARTS = (*NPN, *DRIVERS, *OPAMPS, *SUPPLIES, *(s[0] for s in STRINGS), "led-deep-red-grow-1w")
KINDS = ("led", "bjt", "opamp", "supply", "driver")


def calc_body(rng: random.Random) -> tuple[str, dict[str, Any]]:
    """One valid calculation request: its name and body."""
    kind = rng.randrange(7)
    if kind == 0:  # LED string from numbers
        return "led-string", {
            "supply_v": round(rng.uniform(7.5, 24.0), 2), "supply_tolerance": 0.05, "vf_typ_v": 2.0, "vf_min_v": 1.8,
            "vf_max_v": 2.4, "if_max_a": 0.03, "leds_in_series": 3, "strings": rng.randint(1, 3),
            "current_a": round(rng.uniform(0.004, 0.025), 4), "e_series": rng.choice(("E12", "E24", "E96")),
        }  # fmt: skip
    if kind == 1:  # LED string from parts, current with a unit
        led, in_series, transistor = rng.choice(STRINGS)
        return "led-string", {
            "supply": rng.choice(SUPPLIES), "led": led, "transistor": transistor, "leds_in_series": in_series,
            "strings": rng.randint(1, 6), "current_a": f"{rng.randint(5, 25)} mA",
        }  # fmt: skip
    if kind == 2:  # a grow-light string of 1 W LEDs
        return "led-string", {
            "supply": "supply-adapter-12v-2a", "led": "led-deep-red-grow-1w", "transistor": "npn-medium-power",
            "leds_in_series": 4, "current_a": f"{rng.choice((300, 330, 350))} mA",
        }  # fmt: skip
    if kind == 3:
        return "bjt-switch", {
            "transistor": rng.choice(NPN), "driver": rng.choice(DRIVERS),
            "collector_current_a": round(rng.uniform(0.01, 0.5), 3), "duty_cycle": round(rng.random(), 2),
        }  # fmt: skip
    if kind == 4:
        body: dict[str, Any] = {
            "opamp": rng.choice(OPAMPS), "gain": round(rng.uniform(1.0, 100.0), 1),
            "configuration": rng.choice(("inverting", "non_inverting")), "signal_hz": f"{rng.randint(1, 20)} kHz",
        }  # fmt: skip
        if rng.random() < 0.2:
            body.update(sweep_start_hz=10, sweep_stop_hz=1e6, sweep_points=100)
        return "closed-loop-bandwidth", body
    if kind == 5:
        return "slew-limit", {
            "opamp": rng.choice(OPAMPS), "frequency_hz": rng.randint(100, 50_000),
            "amplitude_v": round(rng.uniform(0.1, 4.0), 2), "supply_v": "12 V",
        }  # fmt: skip
    return "duty-cycle-power", {
        "supply": rng.choice(SUPPLIES),
        "loads": [
            {"name": "grow lights", "peak_current_a": 0.04, "duty_cycle": round(rng.random(), 2), "count": 6},
            {"name": "controller", "peak_current_a": "30 mA", "duty_cycle": 1},
        ],
    }


def editor(token: str) -> dict[str, str]:
    return {**JSON, "Authorization": f"Bearer {token}"}


class Mix:
    """One action of the mix per call; ``failures`` collects unexpected answers for the report."""

    def __init__(self, token: str, scratch: list[str]) -> None:
        self.auth = editor(token)
        self.scratch = scratch
        self.printed = 0

    def __call__(self, client: Client, rng: random.Random) -> None:
        draw = rng.random()
        if draw < MIX[0][1]:
            name, body = calc_body(rng)
            label = f"calc: {name}"
            self.expect(client.request(label, "POST", f"/v1/calc/{name}", orjson.dumps(body), JSON), label, "")
        elif draw < MIX[0][1] + MIX[1][1]:
            self.read(client, rng)
        else:
            self.write(client, rng)

    def read(self, client: Client, rng: random.Random) -> None:
        choice = rng.randrange(4)
        if choice == 0:
            path = f"/v1/parts?limit={rng.choice((10, 50, 200))}&offset={rng.randrange(0, 20)}"
        elif choice == 1:
            path = f"/v1/parts?kind={rng.choice(KINDS)}&status=approved"
        elif choice == 2:
            path = f"/v1/parts/{rng.choice(SEED_PARTS)}"
        else:
            path = f"/v1/parts/{rng.choice(SEED_PARTS)}/revisions"
        self.expect(client.request("read", "GET", path), "read", path)

    def write(self, client: Client, rng: random.Random) -> None:
        """Read-modify-write of one scratch part; a 412 means another client wrote first: read again."""
        part_id = rng.choice(self.scratch)
        for _ in range(MAX_WRITE_ATTEMPTS):
            answer = client.request("write: read", "GET", f"/v1/parts/{part_id}")
            if not self.expect(answer, "write: read", part_id):
                return
            _status, headers, body = answer
            parameters = {**orjson.loads(body)["parameters"], "vf_typ_v": round(rng.uniform(1.9, 2.1), 3)}
            put = orjson.dumps({"parameters": parameters, "description": f"load test, revised {rng.random():.6f}"})
            headers_out = {**self.auth, "If-Match": headers["ETag"]}
            answer = client.request("write", "PUT", f"/v1/parts/{part_id}", put, headers_out)
            if answer[0] != 412:
                self.expect(answer, "write", part_id)
                return

    def expect(self, answer: tuple[int, Any, bytes], label: str, what: str) -> bool:
        status, _headers, body = answer
        if 200 <= status < 300:
            return True
        if self.printed < MAX_PRINTED_FAILURES:
            self.printed += 1
            print(f"unexpected {status or 'no answer'} on {label} {what}: {body[:300]!r}", file=sys.stderr)
        return False


def setup_scratch(server: Server, token: str, run: str) -> list[str]:
    client = Client(server.port)
    made = []
    for k in range(SCRATCH_PARTS):
        part_id = f"load-{run}-{k}"
        body = {"part_id": part_id, "kind": "led", "description": "load-test scratch part", "parameters": SCRATCH_LED}
        status, _h, answer = client.request("setup", "POST", "/v1/parts", orjson.dumps(body), editor(token))
        if status != 201:
            raise RuntimeError(f"creating scratch part {part_id} answered {status}: {answer[:300]!r}")
        made.append(part_id)
    client.connection.close()
    return made


def retire_scratch(server: Server, token: str, scratch: list[str]) -> None:
    client = Client(server.port)
    for part_id in scratch:
        _status, headers, _body = client.request("teardown", "GET", f"/v1/parts/{part_id}")
        retire = {**editor(token), "If-Match": headers["ETag"]}
        reason = orjson.dumps({"reason": "load-test scratch part, no longer needed"})
        status, _h, answer = client.request("teardown", "DELETE", f"/v1/parts/{part_id}", reason, retire)
        if status != 200:
            raise RuntimeError(f"retiring scratch part {part_id} answered {status}: {answer[:300]!r}")
    client.connection.close()


def summary(tally: Tally) -> tuple[list[str], int]:
    """Report lines, and the number of unexpected answers (non-2xx other than 412 on a write; no answer)."""
    groups: dict[str, Counter[int]] = {}
    for (label, status), count in tally.statuses.items():
        groups.setdefault(label, Counter())[status] += count
    unexpected = 0
    width = max(len(label) for label in [*groups, "requests"]) + 2
    lines = [f"{'requests':<{width}}{'count':>8}{'req/s':>9}{'p50 ms':>9}{'p99 ms':>9}  non-2xx"]
    for label in sorted(groups):
        statuses = groups[label]
        count = sum(statuses.values())
        latencies = tally.latencies.get(label, [])
        racing = statuses.get(412, 0) if label == "write" else 0
        bad = {s: c for s, c in statuses.items() if not 200 <= s < 300 and not (s == 412 and label == "write")}
        unexpected += sum(bad.values())
        notes = ", ".join(f"{s or 'no answer'}: {c}" for s, c in sorted(bad.items())) or "0"
        if racing:
            notes += f"; besides, {racing} × 412 on racing writes (expected, retried)"
        lines.append(
            f"{label:<{width}}{count:>8}{count / tally.seconds:>9.1f}{1e3 * percentile(latencies, 0.5):>9.1f}"
            f"{1e3 * percentile(latencies, 0.99):>9.1f}  {notes}"
        )
    every = tally.all_latencies()
    lines.append(
        f"{'all':<{width}}{tally.requests:>8}{tally.requests / tally.seconds:>9.1f}{1e3 * percentile(every, 0.5):>9.1f}"
        f"{1e3 * percentile(every, 0.99):>9.1f}  unexpected: {unexpected}"
    )
    return lines, unexpected


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0] if __doc__ else None)
    parser.add_argument("--seconds", type=float, default=20.0, help="counted seconds of traffic (default 20)")
    parser.add_argument("--warmup", type=float, default=1.0, help="uncounted seconds first (default 1)")
    parser.add_argument("--clients", type=int, default=1, help="client processes (default 1)")
    parser.add_argument("--threads", type=int, default=4, help="connections per client process (default 4)")
    parser.add_argument("--seed", type=int, default=0, help="seed of the request mix (default 0)")
    args = parser.parse_args(argv)
    if not 0 < args.seconds <= 3600 or args.warmup < 0 or args.clients < 1 or args.threads < 1:
        parser.error("--seconds must be in (0, 3600], --warmup ≥ 0, --clients and --threads ≥ 1")

    database_url = os.environ.get("DATABASE_URL", "").strip() or None
    store = "PostgreSQL (DATABASE_URL)" if database_url else "SQLite (a temporary file)"
    run = f"{int(time.time())}-{os.getpid()}"
    token_name = f"load-{run}"
    with gunicorn(database_url=database_url) as server:
        print(f"calcsvc on {server.url} with {len(server.workers())} workers, store: {store}", flush=True)
        token = calcsvc(server.env, "token", "create", "--name", token_name, "--role", "editor").split()[0]
        scratch: list[str] = []
        try:
            scratch = setup_scratch(server, token, run)
            print(
                f"driving {args.clients} process(es) × {args.threads} connection(s) for {args.warmup:g} s warm-up + "
                f"{args.seconds:g} s, mix {', '.join(f'{int(100 * share)} % {name}' for name, share in MIX)}",
                flush=True,
            )
            tally = drive(
                server.port,
                Mix(token, scratch),
                seconds=args.seconds,
                warmup=args.warmup,
                processes=args.clients,
                threads=args.threads,
                seed=args.seed,
            )
        finally:
            if scratch:
                retire_scratch(server, token, scratch)
            calcsvc(server.env, "token", "revoke", token_name)
    lines, unexpected = summary(tally)
    print("\n".join(lines))
    cpu = tally.client_cpu_s / tally.seconds
    print(f"the client used {cpu:.2f} CPU seconds per second on the same {len(os.sched_getaffinity(0))} cores")
    if unexpected:
        print(f"FAILED: {unexpected} unexpected answer(s) to valid requests", file=sys.stderr)
        return 1
    print("ok: every valid request answered 2xx")
    return 0


if __name__ == "__main__":
    sys.exit(main())
