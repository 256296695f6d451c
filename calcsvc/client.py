"""Python client for the calcsvc HTTP API.

Every non-2xx answer raises :class:`CalcsvcError`, built from the RFC 9457 problem document the server sends;
failing to get any answer at all raises its subclass :class:`CalcsvcConnectionError` (``status`` 0).

Retries: a request is repeated (up to ``retries`` more times, sleeping ``backoff``, ``2*backoff``,
``4*backoff``... between attempts) after a connection error, a timeout or a 502/503/504 answer, but only when
repeating it cannot change the outcome:

- GET reads nothing but state;
- PUT carries If-Match, so a repeat of an edit that did land is refused with 412 instead of applied twice
  (a 412 after a retried :meth:`Client.update_part` may therefore mean the first attempt succeeded: re-read);
- DELETE retires the revision its If-Match names, and retiring a retired part changes nothing;
- restoring carries If-Match, so a repeat of a restore that did land is refused with 412, as for PUT;
- the calculation, batch and review POSTs are pure functions of their body and the part revisions they
  reference: they write nothing, so a repeat gives the same answer.

Creating a part and approving one are never retried: a lost answer does not tell whether the write happened.
"""

from __future__ import annotations

import os
import time
from pathlib import Path
from typing import Any
from urllib.parse import quote

import requests

DEFAULT_URL = "http://127.0.0.1:8000"
RETRY_STATUSES = frozenset({502, 503, 504})
PAGE_SIZE = 500  # the server's largest page
_TRANSIENT = (requests.ConnectionError, requests.Timeout, requests.exceptions.ChunkedEncodingError)

Part = dict[str, Any]


class CalcsvcError(Exception):
    """An error answer from the service, or (status 0) no answer at all.

    The attributes mirror the problem document: ``errors`` maps each offending field (dotted path for
    nested fields) to its messages and is empty when the problem names no field.
    """

    def __init__(
        self,
        status: int,
        title: str,
        detail: str,
        type: str = "about:blank",
        errors: dict[str, list[str]] | None = None,
        instance: str | None = None,
    ) -> None:
        reasons = "; ".join(f"{name}: {message}" for name, messages in (errors or {}).items() for message in messages)
        message = f"{status} {title}: {detail}" if status else f"{title}: {detail}"
        # The detail names the fields; the reasons say what is wrong with each.
        super().__init__(f"{message} ({reasons})" if reasons else message)
        self.headline = message
        self.status = status
        self.title = title
        self.detail = detail
        self.type = type
        self.errors = errors or {}
        self.instance = instance

    @classmethod
    def from_response(cls, response: requests.Response) -> CalcsvcError:
        """From a problem document; from the status line and body text when the body is something else."""
        try:
            body = response.json()
        except ValueError:
            body = None
        if isinstance(body, dict) and "title" in body and "detail" in body:
            errors = body.get("errors")
            return cls(
                response.status_code,
                str(body["title"]),
                str(body["detail"]),
                str(body.get("type", "about:blank")),
                errors if isinstance(errors, dict) else None,
                body.get("instance"),
            )
        text = " ".join(response.text.split())[:300]
        return cls(
            response.status_code,
            response.reason or "HTTP error",
            text or f"{response.request.method} {response.url} failed",
            instance=response.request.path_url,
        )

    def describe(self) -> str:
        """The message with one line per field error, for people reading a terminal."""
        lines = [self.headline]
        lines += [f"  {name}: {' '.join(messages)}" for name, messages in self.errors.items()]
        return "\n".join(lines)


class CalcsvcConnectionError(CalcsvcError):
    """No HTTP answer (refused, unreachable, timed out) after the permitted attempts; ``status`` is 0."""


class Client:
    """A session with one calcsvc server; use as a context manager or call :meth:`close`.

    ``retries`` counts the extra attempts an idempotent request may make (see the module docstring);
    ``timeout`` (seconds) applies to connecting and to each read.
    """

    def __init__(
        self,
        base_url: str = DEFAULT_URL,
        token: str | None = None,
        timeout: float = 10.0,
        retries: int = 3,
        backoff: float = 0.2,
    ) -> None:
        if not base_url.startswith(("http://", "https://")):
            raise ValueError(f"the service URL must start with http:// or https:// (got {base_url!r})")
        if retries < 0 or backoff < 0:
            raise ValueError("retries and backoff must not be negative")
        self.base_url = base_url.rstrip("/")
        self.timeout = timeout
        self.retries = retries
        self.backoff = backoff
        self.session = requests.Session()
        self.session.headers["Accept"] = "application/json, application/problem+json"
        if token:
            self.session.headers["Authorization"] = f"Bearer {token}"

    def __enter__(self) -> Client:
        return self

    def __exit__(self, *_exc: object) -> None:
        self.close()

    def close(self) -> None:
        self.session.close()

    # --- transport -----------------------------------------------------------------------------------------

    def request(self, method: str, path: str, *, idempotent: bool, **kwargs: Any) -> requests.Response:
        """Send one request (``kwargs`` as for ``requests``); a 2xx response or :class:`CalcsvcError`."""
        url = self.base_url + path
        attempts = 1 + (self.retries if idempotent else 0)
        failure: Exception | None = None
        for attempt in range(attempts):
            if attempt:
                time.sleep(self.backoff * 2 ** (attempt - 1))
            try:
                response = self.session.request(method, url, timeout=self.timeout, **kwargs)
            except _TRANSIENT as exc:
                failure = exc
                continue
            except requests.RequestException as exc:
                raise CalcsvcConnectionError(0, "Request failed", f"{method} {url}: {exc}") from exc
            if response.status_code in RETRY_STATUSES and attempt + 1 < attempts:
                continue
            if response.ok:
                return response
            raise CalcsvcError.from_response(response)
        tries = f"{attempts} attempt{'s' if attempts > 1 else ''}"
        raise CalcsvcConnectionError(0, "No answer", f"{method} {url} failed after {tries}: {failure}") from failure

    def _json(self, method: str, path: str, *, idempotent: bool, **kwargs: Any) -> Any:
        return _body(self.request(method, path, idempotent=idempotent, **kwargs))

    def _part(self, method: str, path: str, *, idempotent: bool, **kwargs: Any) -> tuple[Part, str]:
        response = self.request(method, path, idempotent=idempotent, **kwargs)
        return _body(response), response.headers.get("ETag", "")

    # --- calculations --------------------------------------------------------------------------------------

    def calc(self, name: str, /, **inputs: Any) -> dict[str, Any]:
        """Run calculation ``name`` (POST /v1/calc/<name>); returns the envelope: ``calculation``,
        ``inputs`` (resolved, SI), ``parts``, ``results``, ``checks``, ``warnings``, ``cautions``,
        ``fingerprint``. Inputs are SI numbers, strings with units ("20 mA"), or part references
        (``led="led-red-5mm"``, ``led_revision=2``)."""
        return self._json("POST", f"/v1/calc/{quote(name, safe='')}", idempotent=True, json=inputs)

    def closed_loop_bandwidth(self, **inputs: Any) -> dict[str, Any]:
        """Gain, bandwidth, rise time and response of an op-amp gain stage."""
        return self.calc("closed-loop-bandwidth", **inputs)

    def slew_limit(self, **inputs: Any) -> dict[str, Any]:
        """Largest undistorted amplitude, full-power bandwidth and required slew rate."""
        return self.calc("slew-limit", **inputs)

    def bjt_switch(self, **inputs: Any) -> dict[str, Any]:
        """Base resistor and checks of a saturated NPN low-side switch."""
        return self.calc("bjt-switch", **inputs)

    def led_string(self, **inputs: Any) -> dict[str, Any]:
        """Series resistor, worst-case current and dissipation of LED strings."""
        return self.calc("led-string", **inputs)

    def duty_cycle_power(self, **inputs: Any) -> dict[str, Any]:
        """Average and peak supply current and power of duty-cycled ``loads``."""
        return self.calc("duty-cycle-power", **inputs)

    def review_channel(self, **inputs: Any) -> dict[str, Any]:
        """Review one output channel as a whole (POST /v1/review/channel); pure, so retried like a calculation."""
        return self._json("POST", "/v1/review/channel", idempotent=True, json=inputs)

    def batch(self, name: str, rows: list[dict[str, Any]] | str | os.PathLike[str], accept: str = "json") -> Any:
        """Run calculation ``name`` on many rows (POST /v1/batch/<name>).

        ``rows`` is a list of input dicts (sent as a JSON array) or the path of a CSV file (sent as text/csv,
        one row per line, a header of input names). With ``accept="json"`` the parsed answer
        ``{"calculation", "count", "ok_count", "rows": [...]}`` is returned; with ``accept="csv"`` the CSV text.
        A bad row does not fail the batch: its entry has ``ok: false`` and a ``problem``.
        """
        if accept not in ("json", "csv"):
            raise ValueError("accept must be 'json' or 'csv'")
        headers = {"Accept": "text/csv" if accept == "csv" else "application/json, application/problem+json"}
        path = f"/v1/batch/{quote(name, safe='')}"
        if isinstance(rows, list):
            response = self.request("POST", path, idempotent=True, json=rows, headers=headers)
        else:
            body = Path(rows).read_bytes()
            headers["Content-Type"] = "text/csv"
            response = self.request("POST", path, idempotent=True, data=body, headers=headers)
        return response.text if accept == "csv" else _body(response)

    # --- parts ---------------------------------------------------------------------------------------------

    def list_parts(self, kind: str | None = None, status: str | None = None) -> list[Part]:
        """Every part (current revision), by part_id, following the pages; filters as the server's."""
        params: dict[str, Any] = {"limit": PAGE_SIZE}
        if kind:
            params["kind"] = kind
        if status:
            params["status"] = status
        parts: list[Part] = []
        while True:
            page = self._json("GET", "/v1/parts", idempotent=True, params={**params, "offset": len(parts)})
            parts.extend(page["items"])
            if not page["items"] or len(parts) >= page["total"]:
                return parts

    def get_part(self, part_id: str) -> tuple[Part, str]:
        """The part at its current revision and that revision's ETag (for :meth:`update_part`)."""
        return self._part("GET", _part_path(part_id), idempotent=True)

    def create_part(
        self, part_id: str, kind: str, parameters: dict[str, Any], description: str = ""
    ) -> tuple[Part, str]:
        """Add a part as a draft at revision 1 (editor token); returns it and its ETag. Never retried."""
        body = {"part_id": part_id, "kind": kind, "description": description, "parameters": parameters}
        return self._part("POST", "/v1/parts", idempotent=False, json=body)

    def update_part(
        self, part_id: str, parameters: dict[str, Any], etag: str, description: str | None = None
    ) -> tuple[Part, str]:
        """Store a new revision if the part is still at the revision ``etag`` names (else 412); it returns
        to draft. ``description=None`` keeps the current one. Returns the part and its new ETag."""
        body: dict[str, Any] = {"parameters": parameters}
        if description is not None:
            body["description"] = description
        return self._part("PUT", _part_path(part_id), idempotent=True, json=body, headers={"If-Match": etag})

    def approve_part(self, part_id: str, etag: str) -> tuple[Part, str]:
        """Approve the revision ``etag`` names, the one you reviewed (reviewer token, not its author); 412 when
        the part has changed since. Never retried."""
        return self._part("POST", f"{_part_path(part_id)}/approve", idempotent=False, headers={"If-Match": etag})

    def send_back_part(self, part_id: str, etag: str, reason: str) -> tuple[Part, str]:
        """Send the draft ``etag`` names back to its author with ``reason`` (reviewer token); it stays a draft and
        the reason is kept with the revision. 412 when the part changed since, 409 when it is not a draft."""
        path = f"{_part_path(part_id)}/send-back"
        return self._part("POST", path, idempotent=False, json={"reason": reason}, headers={"If-Match": etag})

    def comment_revision(self, part_id: str, revision: int, comment: str) -> list[dict[str, Any]]:
        """Comment on one revision (any token); returns every revision with its events, the comment included."""
        path = f"{_part_path(part_id)}/revisions/{int(revision)}/comments"
        return self._json("POST", path, idempotent=False, json={"comment": comment})["revisions"]

    def retire_part(self, part_id: str, etag: str, reason: str | None = None) -> tuple[Part, str]:
        """Withdraw the part at the revision ``etag`` names from new designs (editor token), recording
        ``reason`` in its history; its revisions stay readable and pinnable. 412 when it changed since."""
        body = None if reason is None else {"reason": reason}
        return self._part("DELETE", _part_path(part_id), idempotent=True, json=body, headers={"If-Match": etag})

    def restore_part(self, part_id: str, etag: str, reason: str | None = None) -> tuple[Part, str]:
        """Bring a retired part (at the revision ``etag`` names) back as a new draft revision (editor token);
        a reviewer approves it as any other. Returns the draft and its ETag."""
        body = None if reason is None else {"reason": reason}
        path = f"{_part_path(part_id)}/restore"
        return self._part("POST", path, idempotent=True, json=body, headers={"If-Match": etag})

    def revisions(self, part_id: str) -> list[dict[str, Any]]:
        """Every revision of the part, oldest first, with parameters, author and approval."""
        return self._json("GET", f"{_part_path(part_id)}/revisions", idempotent=True)["revisions"]

    # --- saved designs -------------------------------------------------------------------------------------

    def list_designs(self, fails_at_current: bool = False, affected_by_draft: bool = False) -> list[dict[str, Any]]:
        """Every active saved design, or only those the watch-list filters keep (each with what they found)."""
        found: list[dict[str, Any]] = []
        params: dict[str, Any] = {"status": "active", "limit": 500}
        params |= {"fails_at_current": "true"} if fails_at_current else {}
        params |= {"affected_by_draft": "true"} if affected_by_draft else {}
        while True:
            page = self._json("GET", "/v1/designs", idempotent=True, params={**params, "offset": len(found)})
            found += page["items"]
            if not page["items"] or len(found) >= page["total"]:
                return found

    def save_design(
        self, design_id: str, request: dict[str, Any], calculation: str = "channel", description: str = ""
    ) -> tuple[dict[str, Any], str]:
        """Save a new design, or a new revision of an active one of that id; the design and its ETag."""
        body = {"calculation": calculation, "description": description, "request": request}
        path = f"/v1/designs/{quote(design_id, safe='')}"
        try:
            return self._part("POST", "/v1/designs", idempotent=False, json={"design_id": design_id, **body})
        except CalcsvcError as exc:
            if exc.status != 409:
                raise
        etag = self.request("GET", path, idempotent=True).headers.get("ETag", "")
        return self._part("PUT", path, idempotent=False, json=body, headers={"If-Match": etag})

    def part_impact(self, part_id: str, revision: int | None = None) -> dict[str, Any]:
        """What a revision of a part (default: its current one) would do to the saved designs that use it."""
        tail = "/impact" if revision is None else f"/revisions/{revision}/impact"
        return self._json("GET", _part_path(part_id) + tail, idempotent=True)  # type: ignore[no-any-return]


def _part_path(part_id: str) -> str:
    return f"/v1/parts/{quote(part_id, safe='')}"


def _body(response: requests.Response) -> Any:
    try:
        return response.json()
    except ValueError as exc:
        raise CalcsvcError(
            response.status_code, "Unreadable response", f"expected JSON, got {response.headers.get('Content-Type')}"
        ) from exc
