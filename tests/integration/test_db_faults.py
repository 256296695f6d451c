"""Database faults on PostgreSQL: terminated connections, an unreachable server and an outage with recovery.

The shared test server is never stopped: faults are injected by terminating only this test's own
backends (tagged by application_name) and by putting a throwaway TCP proxy between service and server.
"""

from __future__ import annotations

import contextlib
import itertools
import os
import socket
import threading
import time
import uuid
from collections import Counter
from collections.abc import Iterator
from typing import Any

import pytest
import requests
from flask import Flask
from helpers import as_flask, assert_problem, bearer, live_server
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url
from tcp_proxy import TcpProxy
from test_concurrency import LED, writer_edit

from calcsvc import create_app
from calcsvc.web.problems import RETRY_UNREACHABLE_S

pytestmark = pytest.mark.postgres

TIMEOUT_S = 30  # a guard against a hung request; every answer here comes within a few seconds
WORKERS = 4
FAULTS = 5
OUTAGE = 503  # what a request answers while the database is gone: a problem clients retry, never a hang or a 500


@pytest.fixture
def pg_url(database_url: str) -> str:
    if not database_url.startswith("postgresql"):
        hint = "" if os.environ.get("CALCSVC_TEST_DATABASE_URL") else "; set CALCSVC_TEST_DATABASE_URL to run them"
        pytest.skip("database faults are injected on PostgreSQL only" + hint)
    return database_url


def tagged(url: str, tag: str, connect_timeout_s: int | None = None, **changes: Any) -> str:
    """``url`` with the service's connections named ``tag`` (so only they are terminated), host/port changed."""
    query = {"application_name": tag}
    if connect_timeout_s is not None:
        query["connect_timeout"] = str(connect_timeout_s)
    return make_url(url).set(**changes).update_query_dict(query).render_as_string(hide_password=False)


def terminate(url: str, tag: str) -> int:
    """Kill every server backend of connections named ``tag``, from a connection of our own; how many."""
    engine = create_engine(url, isolation_level="AUTOCOMMIT")
    try:
        with engine.connect() as connection:
            killed = connection.execute(
                text(
                    "SELECT count(*) FILTER (WHERE pg_terminate_backend(pid)) FROM pg_stat_activity "
                    "WHERE datname = current_database() AND pid <> pg_backend_pid() AND application_name = :tag"
                ),
                {"tag": tag},
            ).scalar_one()
    finally:
        engine.dispose()
    return int(killed)


def assert_every_write_whole(url: str) -> int:
    """Each part has revisions 1..current, the current one equal to the part row; returns the part count."""
    engine = create_engine(url)
    try:
        with engine.connect() as connection:
            parts = connection.execute(text("SELECT part_id, revision, description FROM parts")).all()
            revisions: dict[str, dict[int, str]] = {}
            for part_id, revision, description in connection.execute(
                text("SELECT part_id, revision, description FROM part_revisions")
            ):
                revisions.setdefault(part_id, {})[revision] = description
    finally:
        engine.dispose()
    for part_id, revision, description in parts:
        assert sorted(revisions.get(part_id, {})) == list(range(1, revision + 1)), part_id
        assert revisions[part_id][revision] == description, part_id
    assert revisions.keys() <= {p.part_id for p in parts}
    return len(parts)


def edit_cycle(base: str, token: str, part_id: str) -> list[tuple[str, requests.Response]]:
    """Create a part, edit it with its ETag, read it back; stops at the first failed step."""
    answers = []
    created = requests.post(
        f"{base}/v1/parts", json={**LED, "part_id": part_id}, headers=bearer(token), timeout=TIMEOUT_S
    )
    answers.append(("post", created))
    if created.status_code == 201:
        headers = {**bearer(token), "If-Match": created.headers["ETag"]}
        edited = requests.put(f"{base}/v1/parts/{part_id}", json=writer_edit(1), headers=headers, timeout=TIMEOUT_S)
        answers.append(("put", edited))
        answers.append(("get", requests.get(f"{base}/v1/parts/{part_id}", timeout=TIMEOUT_S)))
    answers.append(("list", requests.get(f"{base}/v1/parts?limit=5", timeout=TIMEOUT_S)))
    return answers


def assert_all_succeed(answers: list[tuple[str, requests.Response]]) -> None:
    assert [(op, r.status_code) for op, r in answers if r.status_code >= 300] == []


def test_terminated_connections_are_replaced_and_writes_stay_whole(
    app: Flask, tokens: dict[str, str], pg_url: str
) -> None:
    tag = f"calcsvc-faults-{uuid.uuid4().hex[:8]}"
    service = create_app({"DATABASE_URL": tagged(pg_url, tag)})
    token = tokens["edna"]
    try:
        with live_server(service) as base:
            assert_all_succeed(edit_cycle(base, token, "led-warm"))
            # Idle pooled connections killed between requests: the next requests must not notice.
            assert terminate(pg_url, tag) >= 1
            assert_all_succeed(edit_cycle(base, token, "led-after-idle-kill"))

            # Kill again and again while several clients write and read.
            outcomes: Counter[tuple[str, int]] = Counter()
            done = threading.Event()
            lock = threading.Lock()

            failures: list[BaseException] = []

            def stream(worker: int) -> None:
                try:
                    for n in itertools.count():
                        if done.is_set():
                            return
                        for op, answer in edit_cycle(base, token, f"led-w{worker}-{n}"):
                            with lock:
                                outcomes[(op, answer.status_code)] += 1
                            if answer.status_code >= 500:
                                assert_problem(as_flask(answer), answer.status_code)
                except BaseException as exc:  # a hang (read timeout) or a bare 500; reported by the main thread
                    failures.append(exc)

            workers = [threading.Thread(target=stream, args=(w,)) for w in range(WORKERS)]
            for worker in workers:
                worker.start()
            killed = 0
            for _ in range(FAULTS):
                time.sleep(0.2)
                killed += terminate(pg_url, tag)
            done.set()
            for worker in workers:
                worker.join()

            assert not failures, failures
            assert killed >= FAULTS
            statuses = {status for _, status in outcomes}
            assert statuses <= {200, 201, OUTAGE}, outcomes
            assert sum(n for (op, status), n in outcomes.items() if op == "post" and status == 201) > 0
            print(f"fault stream: {killed} backends killed; outcomes {sorted(outcomes.items())}")
            # After the faults, without a restart, everything works again.
            assert_all_succeed(edit_cycle(base, token, "led-after-faults"))
    finally:
        service.extensions["calcsvc.db"].dispose()
    # Interrupted writes are all-or-nothing: no part without its revision, no gap in any history.
    assert assert_every_write_whole(pg_url) >= 3


def test_readiness_is_503_while_the_server_refuses_and_200_when_it_answers(app: Flask, pg_url: str) -> None:
    refusing = create_app({"DATABASE_URL": tagged(pg_url, "calcsvc-refused", host="127.0.0.1", port=1)})
    try:
        client = refusing.test_client()
        body = assert_problem(client.get("/readyz"), 503)
        assert body["type"].endswith("database-unavailable")
        assert client.get("/healthz").status_code == 200  # the process itself is alive
        listed = client.get("/v1/parts")
        assert assert_problem(listed, 503)["type"].endswith("database-unavailable")
        assert listed.headers["Retry-After"] == str(RETRY_UNREACHABLE_S)  # clients retry 503s, after this
    finally:
        refusing.extensions["calcsvc.db"].dispose()
    assert app.test_client().get("/readyz").status_code == 200


@contextlib.contextmanager
def silent_listener(port: int = 0) -> Iterator[int]:
    """A port that completes TCP handshakes but never answers: a server hung or behind a dead link."""
    listener = socket.socket()
    listener.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    listener.bind(("127.0.0.1", port))
    listener.listen(16)
    try:
        yield listener.getsockname()[1]
    finally:
        listener.close()


@pytest.fixture
def proxy(pg_url: str) -> Iterator[TcpProxy]:
    server = make_url(pg_url)
    forwarder = TcpProxy((server.host or "127.0.0.1", server.port or 5432))
    forwarder.start()
    yield forwarder
    forwarder.stop()


def get(url: str, **kwargs: Any) -> requests.Response:
    return requests.get(url, timeout=TIMEOUT_S, **kwargs)


def test_outage_answers_problems_quickly_and_recovers_without_restart(
    app: Flask, tokens: dict[str, str], pg_url: str, proxy: TcpProxy
) -> None:
    url = tagged(pg_url, "calcsvc-outage", connect_timeout_s=2, host="127.0.0.1", port=proxy.port)
    service = create_app({"DATABASE_URL": url})
    editor = bearer(tokens["edna"])
    try:
        with live_server(service) as base:
            assert get(f"{base}/readyz").status_code == 200
            created = requests.post(f"{base}/v1/parts", json=LED, headers=editor, timeout=TIMEOUT_S)
            assert created.status_code == 201

            proxy.stop()  # the database is gone: refused connections
            assert_problem(as_flask(get(f"{base}/readyz")), 503)
            assert get(f"{base}/v1/parts").status_code == OUTAGE
            edit = requests.put(
                f"{base}/v1/parts/{LED['part_id']}",
                json=writer_edit(1),
                headers={**editor, "If-Match": created.headers["ETag"]},
                timeout=TIMEOUT_S,
            )
            assert_problem(as_flask(edit), 503)
            assert edit.headers["Retry-After"] == str(RETRY_UNREACHABLE_S)

            with silent_listener(proxy.port):  # the database hangs: connect_timeout must end the wait
                assert_problem(as_flask(get(f"{base}/readyz")), 503)
                assert get(f"{base}/v1/parts/{LED['part_id']}").status_code == OUTAGE

            proxy.start()  # back on the same address; the same app must recover by itself
            assert get(f"{base}/readyz").status_code == 200
            assert get(f"{base}/v1/parts/{LED['part_id']}").json()["revision"] == 1  # the outage edit left nothing
            edit = requests.put(
                f"{base}/v1/parts/{LED['part_id']}",
                json=writer_edit(1),
                headers={**editor, "If-Match": created.headers["ETag"]},
                timeout=TIMEOUT_S,
            )
            assert edit.status_code == 200 and edit.json()["revision"] == 2
    finally:
        service.extensions["calcsvc.db"].dispose()


def test_a_hung_server_cannot_hang_readiness_by_default(pg_url: str) -> None:
    """No connect_timeout in the URL: the service's own default must end the wait."""
    with silent_listener() as port:
        service = create_app({"DATABASE_URL": tagged(pg_url, "calcsvc-hung", host="127.0.0.1", port=port)})
        try:
            with live_server(service) as base:
                assert_problem(as_flask(get(f"{base}/readyz")), 503)
        finally:
            service.extensions["calcsvc.db"].dispose()
