"""The review page: lists, a part's parameters, history and plots, approval through the form, the channel form."""

from __future__ import annotations

import re
import time
from html.parser import HTMLParser
from typing import Any
from urllib.parse import quote, urlencode

import pytest
from flask import Flask
from flask.testing import FlaskClient
from helpers import assert_problem, bearer

from calcsvc import create_app
from calcsvc.web.pages.channel import DEMO_CHANNEL, channel_body
from calcsvc.web.pages.common import CSRF_COOKIE, whole_number

OPAMP_ID = "opamp-general-1mhz"


VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}


class Page(HTMLParser):
    """What the tests read from a page: labelled controls, images, and the text of elements with an id."""

    def __init__(self, html: str) -> None:
        super().__init__()
        self.labels: set[str] = set()
        self.controls: list[str] = []
        self.images: list[str] = []
        self.hidden: dict[str, str] = {}
        self.text: dict[str, str] = {}
        self._open: list[str | None] = []  # the id of each open element, None where it has none
        self.feed(html)

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = {k: v or "" for k, v in attrs}
        if tag == "label":
            self.labels.add(a.get("for", ""))
        elif tag in {"input", "select", "textarea"}:
            if a.get("type") == "hidden":
                self.hidden[a["name"]] = a.get("value", "")
            else:
                self.controls.append(a.get("id", ""))
        elif tag == "img":
            self.images.append(a["src"])
        if tag not in VOID:
            self._open.append(a.get("id"))
            if "id" in a:
                self.text[a["id"]] = ""

    def handle_endtag(self, tag: str) -> None:
        if tag not in VOID:
            self._open.pop()

    def handle_data(self, data: str) -> None:
        for element in self._open:
            if element is not None:
                self.text[element] += data


def page(client: FlaskClient, url: str, status: int = 200) -> tuple[str, Page]:
    response = client.get(url)
    assert response.status_code == status, response.get_data(as_text=True)[:2000]
    assert response.mimetype == "text/html"
    html = response.get_data(as_text=True).replace("\N{NO-BREAK SPACE}", " ")  # values keep their units on one line
    parsed = Page(html)
    assert set(parsed.controls) <= parsed.labels, "every form control has a <label for=...>"
    return html, parsed


def create(client: FlaskClient, token: str, part: dict[str, Any]) -> None:
    assert client.post("/v1/parts", json=part, headers=bearer(token)).status_code == 201


def edit(client: FlaskClient, token: str, part_id: str, parameters: dict[str, Any]) -> None:
    etag = client.get(f"/v1/parts/{part_id}").headers["ETag"]
    response = client.put(
        f"/v1/parts/{part_id}", json={"parameters": parameters}, headers={**bearer(token), "If-Match": etag}
    )
    assert response.status_code == 200, response.get_json()


def approve(client: FlaskClient, part_id: str, token: str, revision: int | None = None) -> Any:
    """Post the part page's approval form as a browser would, with the page's CSRF token and cookie."""
    _, parsed = page(client, f"/review/parts/{part_id}")
    form = {**parsed.hidden, "token": token}
    if revision is not None:
        form["revision"] = str(revision)
    return client.post(f"/review/parts/{part_id}/approve", data=form)


def status_of(client: FlaskClient, part_id: str) -> str:
    return client.get(f"/v1/parts/{part_id}").get_json()["status"]


OPAMP_PARAMETERS = {
    "gbw_hz": "1.5 MHz",
    "slew_rate_v_per_s": 600000,
    "open_loop_gain": "103.5 dB",
    "supply_min_v": 6,
    "supply_max_v": 30,
    "output_headroom_v": 1.4,
}


def test_list_shows_kind_status_revision_and_filters(client: FlaskClient, seeded: Any) -> None:
    html, _ = page(client, "/review/")
    assert "opamp-general-1mhz" in html and "led-red-5mm" in html
    assert re.search(r"opamp-general-1mhz</a></th>\s*<td>opamp</td>", html)
    assert "Nothing is waiting" in html
    leds, _ = page(client, "/review/?kind=led&status=approved")
    assert "led-red-5mm" in leds and "opamp-general-1mhz" not in leds
    assert "6 parts of kind led, approved" in " ".join(leds.split())
    wrong, _ = page(client, "/review/?kind=resistor", status=422)
    assert "no part kind &#39;resistor&#39;" in wrong


def test_drafts_wait_for_approval_on_the_list(client: FlaskClient, seeded: Any, tokens: dict[str, str]) -> None:
    edit(client, tokens["edna"], OPAMP_ID, OPAMP_PARAMETERS)
    html, _ = page(client, "/review/")
    drafts = html[html.index("Waiting for approval") : html.index("</section>")]
    assert "Waiting for approval (1)" in drafts
    assert OPAMP_ID in drafts and "revision 2 by edna" in drafts


def test_part_page_shows_parameters_with_units_and_each_revisions_difference(
    client: FlaskClient, seeded: Any, tokens: dict[str, str]
) -> None:
    # gbw 1.2 → 1.5 MHz, open_loop_gain 150000 → 103.5 dB (149 623.6 V/V), input_offset_v removed
    edit(client, tokens["edna"], OPAMP_ID, OPAMP_PARAMETERS)
    html, parsed = page(client, f"/review/parts/{OPAMP_ID}")
    assert '<data value="1500000.0">1.5 MHz</data>' in html
    assert '<data value="600000">600 kV/s</data>' in html
    assert "149624 V/V</data>" in html  # a voltage gain: 20·log10 (IEC 60027-3), shown as a ratio
    assert parsed.text["part-status"] == "draft"
    revision_2 = html[html.index('id="revision-2"') : html.index('id="revision-1"')]
    assert "Written by edna" in revision_2 and "not approved" in revision_2
    assert re.search(r"<code>gbw_hz</code> changed:\s*<del>1.2 MHz</del> → <ins>1.5 MHz</ins>", revision_2)
    assert re.search(r"<code>input_offset_v</code> removed:\s*<del>2.5 mV</del>", revision_2)
    assert "slew_rate_v_per_s" not in revision_2  # unchanged fields are not listed
    revision_1 = html[html.index('id="revision-1"') :]
    assert "First revision." in revision_1 and "approved by seed" in revision_1


def test_opamp_page_shows_its_plots_pinned_to_the_revision(client: FlaskClient, seeded: Any) -> None:
    _, parsed = page(client, f"/review/parts/{OPAMP_ID}")
    assert len(parsed.images) == 2
    closed_loop, slew = parsed.images
    assert closed_loop.startswith("/v1/plots/closed-loop.svg?") and "opamp_revision=1" in closed_loop
    # At the demo channel's operating point: its preamp's gain 20, 2 V peak at 1 kHz.
    assert "gain=20" in closed_loop and "amplitude_v=2.0" in slew and "frequency_hz=1000.0" in slew
    assert slew.startswith("/v1/plots/slew-limit.svg?") and "supply_v=12.0" in slew
    for url in parsed.images:
        response = client.get(url.replace("&amp;", "&"))
        assert response.status_code == 200 and response.mimetype == "image/svg+xml"


@pytest.mark.parametrize(("vf_typ_v", "in_series"), [(2.0, 3), (3.8, 1)])
def test_led_page_plots_three_in_series_when_they_fit(
    client: FlaskClient, seeded: Any, tokens: dict[str, str], vf_typ_v: float, in_series: int
) -> None:
    led = {
        "part_id": "led-test",
        "kind": "led",
        "parameters": {
            "color": "amber",
            "vf_typ_v": vf_typ_v,
            "vf_min_v": vf_typ_v - 0.2,
            "vf_max_v": vf_typ_v + 0.3,
            "if_test_a": 0.02,
            "if_max_a": 0.03,
        },
    }
    create(client, tokens["edna"], led)
    _, parsed = page(client, "/review/parts/led-test")
    (url,) = parsed.images
    url = url.replace("&amp;", "&")
    # 3 × 3.8 V leaves 0.6 V of 12 V, under the 10 % headroom a resistor needs to regulate (common practice).
    assert f"leds_in_series={in_series}" in url and "supply=supply-adapter-12v-2a" in url and "current_a=0.02" in url
    assert client.get(url).status_code == 200


def test_part_page_marks_informational_parameters(client: FlaskClient, seeded: Any) -> None:
    html, _ = page(client, "/review/parts/led-red-5mm")
    row = html[html.index("<code>if_test_a</code>") :]
    assert "(informational: the datasheet&#39;s test condition" in row[: row.index("</tr>")]
    row = html[html.index("<code>vf_typ_v</code>") :]
    assert "informational" not in row[: row.index("</tr>")]


def test_parts_without_plots_show_none(client: FlaskClient, seeded: Any) -> None:
    _, parsed = page(client, "/review/parts/npn-small-signal")
    assert parsed.images == []


def test_reviewer_approves_through_the_form(client: FlaskClient, seeded: Any, tokens: dict[str, str]) -> None:
    edit(client, tokens["edna"], OPAMP_ID, OPAMP_PARAMETERS)
    response = approve(client, OPAMP_ID, tokens["rita"])
    assert response.status_code == 303
    assert response.headers["Location"].endswith(f"/review/parts/{OPAMP_ID}?approved=2")
    assert tokens["rita"] not in response.headers.get("Set-Cookie", "")
    assert status_of(client, OPAMP_ID) == "approved"
    html, parsed = page(client, f"/review/parts/{OPAMP_ID}?approved=2")
    assert parsed.text["part-status"] == "approved"
    assert "Revision 2 approved." in html and "approved by rita" in html


@pytest.mark.parametrize(
    ("who", "status", "message"),
    [
        ("edna", 403, "approving needs a reviewer"),
        ("nobody", 401, "not valid"),
        ("", 401, "Paste your reviewer token"),
    ],
)
def test_approval_refusals_show_on_the_page(
    client: FlaskClient, seeded: Any, tokens: dict[str, str], who: str, status: int, message: str
) -> None:
    edit(client, tokens["edna"], OPAMP_ID, OPAMP_PARAMETERS)
    response = approve(client, OPAMP_ID, tokens.get(who, "cs_" + who if who else ""))
    assert response.status_code == status
    assert response.mimetype == "text/html"
    assert message in response.get_data(as_text=True)
    assert status_of(client, OPAMP_ID) == "draft"


def send_back(client: FlaskClient, part_id: str, token: str, reason: str) -> Any:
    """Post the part page's send-back form as a browser would."""
    _, parsed = page(client, f"/review/parts/{part_id}")
    return client.post(f"/review/parts/{part_id}/send-back", data={**parsed.hidden, "token": token, "reason": reason})


def test_a_reviewer_sends_a_draft_back_from_the_page_and_the_author_sees_why(
    client: FlaskClient, seeded: Any, tokens: dict[str, str]
) -> None:
    edit(client, tokens["edna"], OPAMP_ID, OPAMP_PARAMETERS)
    response = send_back(client, OPAMP_ID, tokens["rita"], "gbw_hz: the datasheet gives 1.2 MHz <typ>")
    assert response.status_code == 303 and response.headers["Location"].endswith("?returned=2")
    html, parsed = page(client, response.headers["Location"])
    assert "Revision 2 sent back to edna." in html and parsed.text["part-status"] == "draft"
    assert "Sent back</strong> by rita" in html and "gbw_hz: the datasheet gives 1.2 MHz &lt;typ&gt;" in html
    revision_2 = html[html.index('id="revision-2"') : html.index('id="revision-1"')]
    assert "Sent back by rita" in revision_2
    listed, _ = page(client, "/review/")
    assert "sent back by rita: gbw_hz: the datasheet gives 1.2 MHz &lt;typ&gt;" in listed  # in the drafts list too
    events = client.get(f"/v1/parts/{OPAMP_ID}/revisions").get_json()["revisions"][1]["events"]
    assert [(e["action"], e["reason"]) for e in events][-1] == ("returned", "gbw_hz: the datasheet gives 1.2 MHz <typ>")
    for who, reason, status, message in (
        ("edna", "why", 403, "sending a draft back needs a reviewer"),
        ("rita", "  ", 422, "Say why the draft goes back"),
    ):
        refused = send_back(client, OPAMP_ID, tokens[who], reason)
        assert refused.status_code == status and message in refused.get_data(as_text=True)
    assert status_of(client, OPAMP_ID) == "draft"


def test_author_cannot_approve_their_own_revision(client: FlaskClient, seeded: Any, tokens: dict[str, str]) -> None:
    edit(client, tokens["rita"], OPAMP_ID, OPAMP_PARAMETERS)  # a reviewer may edit, but not approve her edit
    response = approve(client, OPAMP_ID, tokens["rita"])
    assert response.status_code == 403
    assert "cannot be approved by its own author" in response.get_data(as_text=True)
    assert approve(client, OPAMP_ID, tokens["ravi"]).status_code == 303


def test_a_revision_changed_since_the_page_loaded_is_not_approved(
    client: FlaskClient, seeded: Any, tokens: dict[str, str]
) -> None:
    edit(client, tokens["edna"], OPAMP_ID, OPAMP_PARAMETERS)
    edit(client, tokens["edna"], OPAMP_ID, {**OPAMP_PARAMETERS, "gbw_hz": "1.3 MHz"})
    response = approve(client, OPAMP_ID, tokens["rita"], revision=2)
    assert response.status_code == 412
    assert "review it again" in response.get_data(as_text=True)
    assert status_of(client, OPAMP_ID) == "draft"


def test_approval_needs_the_pages_csrf_token(client: FlaskClient, seeded: Any, tokens: dict[str, str]) -> None:
    edit(client, tokens["edna"], OPAMP_ID, OPAMP_PARAMETERS)
    url = f"/review/parts/{OPAMP_ID}/approve"
    forged = {"token": tokens["rita"], "revision": "2", "csrf_token": "x" * 43}
    assert client.post(url, data=forged).status_code == 400  # no cookie yet: a cross-site post has none
    page(client, f"/review/parts/{OPAMP_ID}")  # now the browser holds a cookie, but the forger cannot read it
    response = client.post(url, data=forged)
    assert response.status_code == 400
    assert "form has expired" in response.get_data(as_text=True)
    assert status_of(client, OPAMP_ID) == "draft"


def test_csrf_cookie_is_httponly_strict_and_secure_over_https(client: FlaskClient, seeded: Any) -> None:
    plain = client.get(f"/review/parts/{OPAMP_ID}").headers["Set-Cookie"]
    assert plain.startswith(f"{CSRF_COOKIE}=") and "HttpOnly" in plain and "SameSite=Strict" in plain
    assert "Path=/review" in plain and "Secure" not in plain
    secure = client.get(f"/review/parts/{OPAMP_ID}", base_url="https://parts.example").headers["Set-Cookie"]
    assert "Secure" in secure
    headers = client.get("/review/").headers
    assert "frame-ancestors 'none'" in headers["Content-Security-Policy"]
    assert headers["Cache-Control"] == "no-store"


def test_unknown_part_and_protected_reads(client: FlaskClient, database_url: str) -> None:
    html, _ = page(client, "/review/parts/no-such-part", status=404)
    assert "There is no part" in html
    protected = create_app({"DATABASE_URL": database_url, "READ_REQUIRES_TOKEN": True})
    try:
        html, _ = page(protected.test_client(), "/review/", status=403)
        assert "requires a token for every read" in html
    finally:
        protected.extensions["calcsvc.db"].dispose()


def test_channel_form_starts_with_the_demo(client: FlaskClient, seeded: Any) -> None:
    html, parsed = page(client, "/review/channel")
    for role in ("supply", "driver", "transistor", "led", "opamp"):
        assert f'<option value="{DEMO_CHANNEL[role]}" selected>' in html
    assert 'value="pnp-small-signal"' not in html  # the switch must be an NPN
    assert {"leds_in_series", "strings", "current_a", "duty_cycle", "channels", "gain"} <= set(parsed.controls)
    assert "Verdict" not in html


def test_demo_channel_review_shows_the_verdict_checks_and_report(app: Flask, client: FlaskClient, seeded: Any) -> None:
    from calcsvc.service.review import run_review

    html, parsed = page(client, "/review/channel?" + urlencode(DEMO_CHANNEL))
    expected = run_review(app.extensions["calcsvc.db"], channel_body(DEMO_CHANNEL))
    assert parsed.text["verdict"] == expected["verdict"]
    assert "<table class='checks stack'>" in html and '<pre class="report"># Channel review:' in html
    assert all(check["name"] in html for check in expected["checks"])
    json_url = re.search(r'<a href="([^"]+)">This review as JSON</a>', html)
    assert json_url is not None
    answer = client.get(json_url.group(1).replace("&amp;", "&"))
    assert answer.status_code == 200 and answer.get_json()["fingerprint"] == expected["fingerprint"]
    # The preamp's windows, output error, noise and phase margin, each in a section of its own.
    front = expected["stages"]["front_stage"]
    for title in ("single-supply windows", "dc output error", "noise", "stability"):
        assert f"<h3>Front stage: {title}</h3>" in html, title
    for name in ("input_common_mode_max_v", "output_error_v", "output_noise_rms_v", "phase_margin_deg"):
        assert f"{front[name]:.6g}" in html, name


def test_channel_form_errors_name_the_field(client: FlaskClient, seeded: Any) -> None:
    html, _ = page(client, "/review/channel?" + urlencode({**DEMO_CHANNEL, "duty_cycle": "1.5"}), status=422)
    assert "<code>duty_cycle</code>" in html and 'id="duty_cycle"' in html and 'aria-invalid="true"' in html
    html, _ = page(client, "/review/channel?" + urlencode({**DEMO_CHANNEL, "led": "no-such-led"}), status=404)
    assert "<code>led</code>" in html
    without_opamp = channel_body({**DEMO_CHANNEL, "opamp": ""})
    assert "opamp" not in without_opamp and "gain" not in without_opamp
    assert without_opamp["leds_in_series"] == 3 and without_opamp["current_a"] == 0.02
    assert not {"reference_v", "rf_ohm", "adc_bits", "load_capacitance_f"} & set(without_opamp)


# --- hostile addresses, query strings and forms: always a page, never a 500 or a JSON problem ------------------

# Numbers the page must refuse: non-ASCII digits (str.isdigit() takes them, int() takes some), too large for the
# store's integers, signs, spaces, separators, other notations, NUL bytes, and length.
HOSTILE_NUMBERS = ["²", "٣", "３", "9" * 30, "9" * 5000, "-1", "+1", " 1", "1 ", "1_0", "1e3", "0x10", "1\x00", "\x00"]
HOSTILE_TEXT = ["\x00", "led\x00", "x" * 5000, "a" * 65, "LED", "led-rød", "led-red-5mm\n", "-led", "<script>"]


def test_number_parsing_is_ascii_and_bounded() -> None:
    assert whole_number("0042", 0, 100) == 42
    assert whole_number("100", 0, 100) == 100 and whole_number("101", 0, 100) is None
    assert all(whole_number(text, 0, 10**12) is None for text in [*HOSTILE_NUMBERS, "", None])


@pytest.mark.parametrize("offset", HOSTILE_NUMBERS)
def test_list_refuses_a_hostile_offset_on_the_page_and_shows_the_first_page(
    client: FlaskClient, seeded: Any, offset: str
) -> None:
    html, _ = page(client, "/review/?" + urlencode({"kind": "opamp", "offset": offset}), status=422)
    assert "The offset must be a whole number from 0 to 1000000" in html
    assert OPAMP_ID in html  # the first page of the filter that was asked for
    assert "9" * 41 not in html  # what was sent is quoted short


def test_list_pages_up_to_the_largest_offset(client: FlaskClient, seeded: Any) -> None:
    html, _ = page(client, "/review/?offset=1000000")
    assert "No part matches." in html
    page(client, "/review/?offset=1000001", status=422)
    page(client, "/review/?offset=")  # an empty field is the first page, as an empty filter is any kind


@pytest.mark.parametrize("text", HOSTILE_TEXT)
def test_list_refuses_hostile_filters_on_the_page(client: FlaskClient, seeded: Any, text: str) -> None:
    html, _ = page(client, "/review/?" + urlencode({"kind": text, "status": text}), status=422)
    assert "There is no part kind" in html and "There is no status" in html
    assert "x" * 41 not in html and "\x00" not in html and "<script>" not in html


@pytest.mark.parametrize("approved", HOSTILE_NUMBERS)
def test_part_page_ignores_a_hostile_approved_notice(client: FlaskClient, seeded: Any, approved: str) -> None:
    html, _ = page(client, f"/review/parts/{OPAMP_ID}?" + urlencode({"approved": approved}))
    assert "approved." not in html


@pytest.mark.parametrize("part_id", HOSTILE_TEXT)
def test_hostile_part_ids_are_pages_not_found(client: FlaskClient, seeded: Any, part_id: str) -> None:
    url = "/review/parts/" + quote(part_id, safe="")
    html, _ = page(client, url, status=404)
    assert "There is no part" in html and "x" * 41 not in html
    response = client.post(url + "/approve", data={"revision": "1", "token": "cs_x"})
    assert (response.status_code, response.mimetype) == (404, "text/html")


@pytest.mark.parametrize("revision", HOSTILE_NUMBERS)
def test_approval_refuses_a_hostile_revision_on_the_page(
    client: FlaskClient, seeded: Any, tokens: dict[str, str], revision: str
) -> None:
    edit(client, tokens["edna"], OPAMP_ID, OPAMP_PARAMETERS)
    _, parsed = page(client, f"/review/parts/{OPAMP_ID}")
    form = {**parsed.hidden, "token": tokens["rita"], "revision": revision}
    response = client.post(f"/review/parts/{OPAMP_ID}/approve", data=form)
    assert (response.status_code, response.mimetype) == (400, "text/html")
    assert "did not say which revision" in response.get_data(as_text=True)
    assert status_of(client, OPAMP_ID) == "draft"


def test_approval_refuses_hostile_tokens_and_form_tokens_on_the_page(
    client: FlaskClient, seeded: Any, tokens: dict[str, str]
) -> None:
    edit(client, tokens["edna"], OPAMP_ID, OPAMP_PARAMETERS)
    url = f"/review/parts/{OPAMP_ID}/approve"
    for token in ("\x00", "cs_\x00" + "x" * 5000, "²"):
        response = approve(client, OPAMP_ID, token)
        assert (response.status_code, response.mimetype) == (401, "text/html")
    for csrf in ("\x00", "x" * 5000, "é" * 43):
        response = client.post(url, data={"csrf_token": csrf, "token": tokens["rita"], "revision": "2"})
        assert (response.status_code, response.mimetype) == (400, "text/html")
    # A multipart field over the form memory limit is refused as it is read.
    response = client.post(url, data={"token": "x" * 600_000, "revision": "2"}, content_type="multipart/form-data")
    assert (response.status_code, response.mimetype) == (413, "text/html")
    assert status_of(client, OPAMP_ID) == "draft"


@pytest.mark.parametrize(
    ("name", "value"),
    [
        *((name, value) for name in ("leds_in_series", "current_a", "led") for value in ("²", "٣", "３", "1\x00")),
        *((name, "9" * 30) for name in ("leds_in_series", "strings", "channels", "duty_cycle")),
        *((name, "1" * 5000) for name in ("current_a", "gain", "supply")),
        ("signal_hz", "1e999"),
        ("current_a", "20 mA\x00"),
        ("opamp", "o" * 81),
    ],
)
def test_channel_form_refuses_hostile_values_naming_the_field(
    client: FlaskClient, seeded: Any, name: str, value: str
) -> None:
    html, _ = page(client, "/review/channel?" + urlencode({**DEMO_CHANNEL, name: value}), status=422)
    assert f"<code>{name}</code>" in html and "Verdict" not in html
    answer = client.get("/review/channel.json?" + urlencode({**DEMO_CHANNEL, name: value}))
    assert_problem(answer, 422, name)  # the JSON view answers as the API does


def test_channel_form_takes_unit_symbols(client: FlaskClient, seeded: Any) -> None:
    _, parsed = page(client, "/review/channel?" + urlencode({**DEMO_CHANNEL, "current_a": "20000 µA"}))
    assert parsed.text["verdict"]


@pytest.mark.parametrize(
    ("method", "url", "status"),
    [
        ("GET", "/review/no-such-page", 404),
        ("GET", "/review/parts/", 404),
        ("GET", f"/review/parts/{OPAMP_ID}/approve", 405),
        ("DELETE", f"/review/parts/{OPAMP_ID}", 405),
        ("GET", "/review/static/no-such.css", 404),
    ],
)
def test_unknown_page_addresses_and_methods_are_pages(
    client: FlaskClient, seeded: Any, method: str, url: str, status: int
) -> None:
    response = client.open(url, method=method)
    assert (response.status_code, response.mimetype) == (status, "text/html")
    assert f"Not shown ({status})" in response.get_data(as_text=True)
    if status == 405:
        assert "Allow" in response.headers


@pytest.mark.parametrize(
    "unreachable_url",
    ["sqlite:////nonexistent/calcsvc/calcsvc.sqlite", "postgresql+psycopg://calcsvc@127.0.0.1:1/calcsvc"],
    ids=["sqlite-file-missing", "postgresql-refused"],
)
@pytest.mark.parametrize("url", ["/review/", f"/review/parts/{OPAMP_ID}", "/review/channel"])
def test_database_outage_is_a_page_saying_when_to_retry(unreachable_url: str, url: str) -> None:
    unreachable = create_app({"DATABASE_URL": unreachable_url})
    try:
        response = unreachable.test_client().get(url)
    finally:
        unreachable.extensions["calcsvc.db"].dispose()
    assert (response.status_code, response.mimetype) == (503, "text/html")
    assert "the database is not reachable" in response.get_data(as_text=True)
    assert int(response.headers["Retry-After"]) > 0


# The same field as the API's: tests/test_hostile_input.py puts every hostile unit string through it.
@pytest.mark.parametrize("hostile", ["1" * 100_000 + "!", "\u0662\u0660 mA"], ids=["100,001 chars", "Arabic-Indic 20"])
def test_channel_form_refuses_hostile_unit_strings_at_once(client: FlaskClient, seeded: Any, hostile: str) -> None:
    started = time.perf_counter()
    html, _ = page(client, "/review/channel?" + urlencode({**DEMO_CHANNEL, "current_a": hostile}), status=422)
    assert time.perf_counter() - started < 1.0  # generous: 900 digits once took 3.5 s, 100,000 did not finish
    assert "<code>current_a</code>" in html


def test_a_retirement_and_its_reason_are_in_the_page_history(
    client: FlaskClient, seeded: Any, tokens: dict[str, str]
) -> None:
    etag = client.get(f"/v1/parts/{OPAMP_ID}").headers["ETag"]
    headers = {**bearer(tokens["edna"]), "If-Match": etag}
    assert (
        client.delete(f"/v1/parts/{OPAMP_ID}", json={"reason": "no longer stocked"}, headers=headers).status_code == 200
    )
    html, parsed = page(client, f"/review/parts/{OPAMP_ID}")
    assert parsed.text["part-status"] == "retired"
    assert "Retired by edna on " in html and ": no longer stocked" in html
    assert "may restore it as a new draft revision" in html
    assert client.get("/review/parts/opamp-general-1mhz%0A").status_code == 404


def test_a_high_power_leds_plot_shows_the_heat_cautions_of_its_operating_point(
    client: FlaskClient, seeded: Any
) -> None:
    html, parsed = page(client, "/review/parts/led-deep-red-grow-1w")
    assert len(parsed.images) == 1 and "current_a=0.35" in parsed.images[0]
    cautions = html[html.index('class="caution plot-cautions"') :]
    # At 350 mA the string resistor dissipates watts: the calculation's heat cautions sit under its plot.
    assert "runs hot" in cautions and "High-power LEDs" in cautions and "Mains adapter" in cautions
    # A supply part's page states the standing cautions every design on it carries.
    supply_page, _ = page(client, "/review/parts/supply-battery-9v-6aa")
    assert "never recharge primary" in supply_page and 'id="standing-cautions"' in supply_page


def test_channel_page_takes_the_pwm_and_shows_its_checks(client: FlaskClient, seeded: Any) -> None:
    query = {**DEMO_CHANNEL, "pwm_frequency_hz": "2 kHz", "pwm_resolution_bits": "6", "samples": "0"}
    assert channel_body(query)["pwm_resolution_bits"] == 6
    html, _ = page(client, "/review/channel?" + urlencode(query))
    assert 'name="pwm_frequency_hz"' in html and "2 kHz" in html
    assert "shortest_pulse_covers_edges" in html and "flicker_low_risk" in html
