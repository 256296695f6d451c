"""The review page in a real browser: headless Chromium from the system's packages, driven by Playwright, against
the app served over HTTP. Runs once, on its own SQLite store; screenshots go to each test's tmp_path."""

from __future__ import annotations

import os
import re
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any
from urllib.parse import urlencode

import pytest
import requests
from flask import Flask
from helpers import bearer, live_server

from calcsvc import create_app
from calcsvc.data.database import upgrade
from calcsvc.data.seed import load_seed
from calcsvc.data.tokens import create_token
from calcsvc.web.pages.channel import DEMO_CHANNEL

CHROMIUM = "/usr/bin/chromium"
if not os.access(CHROMIUM, os.X_OK):
    message = f"{CHROMIUM} is absent: install the Debian package 'chromium'"
    if os.environ.get("CALCSVC_REQUIRE_BROWSER"):
        # CI installs the browser, so its absence there is a failure, never a silent skip.
        raise RuntimeError(message)
    pytest.skip(message, allow_module_level=True)
sync_api = pytest.importorskip("playwright.sync_api", reason="the playwright Python package is not installed")

REPO = Path(__file__).resolve().parents[2]
OPAMP_ID = "opamp-general-1mhz"
STEP_MS = 10_000  # a step waits at most this long


@pytest.fixture(scope="module")
def served(tmp_path_factory: pytest.TempPathFactory) -> Iterator[tuple[str, dict[str, str]]]:
    """The app on a free loopback port with the seed parts and three tokens; yields the base URL and tokens."""
    url = f"sqlite:///{tmp_path_factory.mktemp('browser') / 'calcsvc.sqlite'}"
    upgrade(url)
    app: Flask = create_app({"DATABASE_URL": url, "SEED_DIR": str(REPO / "seed_parts"), "LOG_LEVEL": "WARNING"})
    with app.extensions["calcsvc.db"].transaction() as session:
        load_seed(session, REPO / "seed_parts")
        tokens = {name: create_token(session, name, role) for name, role in (("edna", "editor"), ("rita", "reviewer"))}
    with live_server(app) as base:
        yield base, tokens
    app.extensions["calcsvc.db"].dispose()


@pytest.fixture(scope="module")
def browser() -> Iterator[Any]:
    with sync_api.sync_playwright() as playwright:
        chromium = playwright.chromium.launch(
            executable_path=CHROMIUM,
            args=["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking"],
        )
        yield chromium
        chromium.close()


@pytest.fixture
def tab(browser: Any) -> Iterator[Any]:
    # Page scripts off: the page must work without them (the test's own probes still run).
    context = browser.new_context(viewport={"width": 1100, "height": 900}, java_script_enabled=False)
    context.set_default_timeout(STEP_MS)
    page = context.new_page()
    yield page
    context.close()


def images_loaded(page: Any) -> list[bool]:
    """Whether each image has arrived and decoded (scrolled to first: plots load lazily where scripts run)."""
    for image in page.locator("img").all():
        image.scroll_into_view_if_needed()
    # Polled from here: the page's CSP forbids the string evaluation wait_for_function would use.
    deadline = time.monotonic() + STEP_MS / 1000
    while not all(page.eval_on_selector_all("img", "images => images.map(i => i.complete)")):
        assert time.monotonic() < deadline, "the plots did not load"
        page.wait_for_timeout(50)
    return page.eval_on_selector_all("img", "images => images.map(i => i.naturalWidth > 0)")


def shot(page: Any, folder: Path, name: str) -> None:
    images_loaded(page)
    page.screenshot(path=str(folder / f"{name}.png"), full_page=True)


def test_review_a_revision_and_approve_it(tab: Any, served: tuple[str, dict[str, str]], tmp_path: Path) -> None:
    base, tokens = served
    # An editor changes the op-amp's gain-bandwidth product through the API.
    etag = requests.get(f"{base}/v1/parts/{OPAMP_ID}", timeout=5).headers["ETag"]
    current = requests.get(f"{base}/v1/parts/{OPAMP_ID}", timeout=5).json()["parameters"]
    edited = requests.put(
        f"{base}/v1/parts/{OPAMP_ID}",
        json={"parameters": {**current, "gbw_hz": "1.5 MHz"}},
        headers={**bearer(tokens["edna"]), "If-Match": etag},
        timeout=5,
    )
    assert edited.status_code == 200, edited.text

    tab.goto(f"{base}/review/")
    assert "Parts" in tab.title()
    drafts = tab.locator("section.drafts")
    assert OPAMP_ID in drafts.inner_text()
    shot(tab, tmp_path, "1-parts")

    drafts.get_by_role("link", name=OPAMP_ID).click()
    tab.wait_for_url(f"**/review/parts/{OPAMP_ID}")
    assert tab.locator("#part-status").inner_text() == "draft"
    change = tab.locator("#revision-2 li.change-changed")
    assert change.inner_text().replace("\N{NO-BREAK SPACE}", " ") == "gbw_hz changed: 1.2 MHz → 1.5 MHz"
    assert images_loaded(tab) == [True, True]
    shot(tab, tmp_path, "2-part-draft")

    # The editor's own token is refused on the page, and the part stays a draft.
    tab.get_by_label("Reviewer token").fill(tokens["edna"])
    tab.get_by_role("button", name="Approve revision 2").click()
    assert "approving needs a reviewer" in tab.get_by_role("alert").inner_text()
    assert tab.locator("#part-status").inner_text() == "draft"
    shot(tab, tmp_path, "3-part-refused")

    # The editor changes it again while the reviewer still has revision 2 on screen: approving what she read
    # is refused, and revision 3, which she has not seen, is not approved either.
    edited = requests.put(
        f"{base}/v1/parts/{OPAMP_ID}",
        json={"parameters": {**current, "gbw_hz": "1.3 MHz"}},
        headers={**bearer(tokens["edna"]), "If-Match": edited.headers["ETag"]},
        timeout=5,
    )
    assert edited.status_code == 200, edited.text
    tab.get_by_label("Reviewer token").fill(tokens["rita"])
    tab.get_by_role("button", name="Approve revision 2").click()
    assert "someone changed the part since you loaded the page" in tab.get_by_role("alert").inner_text()
    assert tab.locator("#part-status").inner_text() == "draft"
    shot(tab, tmp_path, "4-part-changed-meanwhile")

    tab.get_by_label("Reviewer token").fill(tokens["rita"])
    tab.get_by_role("button", name="Approve revision 3").click()
    tab.wait_for_url(f"**/review/parts/{OPAMP_ID}?approved=3")
    assert tab.locator("#part-status").inner_text() == "approved"
    assert tab.get_by_role("status").inner_text() == "Revision 3 approved."
    assert "approved by rita" in tab.locator("#revision-3").inner_text()
    assert "not approved" in tab.locator("#revision-2").inner_text()
    shot(tab, tmp_path, "5-part-approved")
    assert requests.get(f"{base}/v1/parts/{OPAMP_ID}", timeout=5).json()["approved_by"] == "rita"


def test_demo_channel_review(tab: Any, served: tuple[str, dict[str, str]], tmp_path: Path) -> None:
    base, _ = served
    tab.goto(f"{base}/review/channel")
    assert tab.get_by_label("Current per string").input_value() == DEMO_CHANNEL["current_a"]
    tab.get_by_role("button", name="Review the channel").click()
    tab.wait_for_url("**/review/channel?*")
    verdict = tab.locator("#verdict").inner_text()
    expected = requests.get(f"{base}/review/channel.json?{urlencode(DEMO_CHANNEL)}", timeout=10).json()
    assert verdict == expected["verdict"]
    assert tab.locator("table.checks tbody tr").count() == len(expected["checks"])
    # What to build: every resistor's value and minimum wattage, with units, as the JSON has them.
    bom = tab.locator(".bom-tables").inner_text()
    for entry in expected["bill_of_materials"]["per_channel"]:
        if entry["kind"] == "resistor":
            assert f"{entry['value_ohm']:.6g} Ω" in bom and f"{entry['rating_min_w']:.6g} W" in bom
    assert "300 Ω" in bom and "360 Ω" in bom
    # Checks carry their units: the LED current in A, the headroom in V.
    rows = {
        row.locator("td").first.inner_text(): row.inner_text() for row in tab.locator("table.checks tbody tr").all()
    }
    assert " A" in rows["led_current_rating"] and " V" in rows["headroom"] and "%" in rows["headroom"]
    # Cautions sit right under the verdict, before the bill of materials and the checks, with the safety line.
    cautions = tab.locator("#cautions")
    assert "Mains adapter" in cautions.inner_text() and "licensed practice" in cautions.inner_text()
    heights = [
        tab.locator(sel).bounding_box()["y"] for sel in ("#verdict", "#cautions", "#bom-heading", "table.checks")
    ]
    assert heights == sorted(heights)
    # Every build passes, and the page still plots the distribution of the tightest check.
    assert expected["yield"]["most_failing_check"] is None and expected["yield"]["tightest_check"]
    assert tab.locator("#histogram").is_visible()
    assert all(images_loaded(tab))
    assert "licensed practice" in tab.locator("#safety-line").inner_text()
    shot(tab, tmp_path, "5-channel")


def test_send_a_draft_back_with_a_reason(tab: Any, served: tuple[str, dict[str, str]], tmp_path: Path) -> None:
    base, tokens = served
    part = "led-red-5mm"
    etag = requests.get(f"{base}/v1/parts/{part}", timeout=5).headers["ETag"]
    current = requests.get(f"{base}/v1/parts/{part}", timeout=5).json()["parameters"]
    edited = requests.put(
        f"{base}/v1/parts/{part}",
        json={"parameters": {**current, "vf_max_v": 2.3}},
        headers={**bearer(tokens["edna"]), "If-Match": etag},
        timeout=5,
    )
    assert edited.status_code == 200, edited.text
    revision = edited.json()["revision"]
    tab.goto(f"{base}/review/parts/{part}")
    tab.get_by_label("Reason").fill("vf_max_v is the 10 mA figure; give the 20 mA one")
    tab.get_by_label("Token of the reviewer sending it back").fill(tokens["rita"])
    tab.get_by_role("button", name=f"Send revision {revision} back").click()
    tab.wait_for_url(f"**/review/parts/{part}?returned={revision}")
    assert tab.get_by_role("status").inner_text() == f"Revision {revision} sent back to edna."
    assert tab.locator("#part-status").inner_text() == "draft"
    # What the author sees when she opens the part: who sent it back and why, above everything else.
    assert "vf_max_v is the 10 mA figure" in tab.locator(".sent-back").inner_text()
    assert "Sent back by rita" in tab.locator(f"#revision-{revision}").inner_text()
    shot(tab, tmp_path, "7-sent-back")
    history = requests.get(f"{base}/v1/parts/{part}/revisions", timeout=5).json()["revisions"]
    returned = [e for e in history[revision - 1]["events"] if e["action"] == "returned"]
    assert [(e["actor"], e["reason"]) for e in returned] == [
        ("rita", "vf_max_v is the 10 mA figure; give the 20 mA one")
    ]


def test_narrow_screen(browser: Any, served: tuple[str, dict[str, str]], tmp_path: Path) -> None:
    base, _ = served
    context = browser.new_context(viewport={"width": 380, "height": 800})
    context.set_default_timeout(STEP_MS)
    page = context.new_page()
    try:
        page.goto(f"{base}/review/parts/{OPAMP_ID}")
        # Nothing but the scrollable tables may be wider than the screen.
        overflow = page.evaluate("document.documentElement.scrollWidth - document.documentElement.clientWidth")
        assert overflow <= 0
        shot(page, tmp_path, "6-narrow")
        # The channel result: its checks and bill of materials stack instead of scrolling sideways.
        page.goto(f"{base}/review/channel?{urlencode(DEMO_CHANNEL)}")
        overflow = page.evaluate("document.documentElement.scrollWidth - document.documentElement.clientWidth")
        assert overflow <= 0
        widest = page.eval_on_selector_all(
            "table", "tables => Math.max(...tables.map(t => t.scrollWidth - t.clientWidth))"
        )
        assert widest <= 0
        shot(page, tmp_path, "6-narrow-channel")
    finally:
        context.close()


def test_a_draft_shows_its_impact_on_saved_designs_before_approval(
    tab: Any, served: tuple[str, dict[str, str]], tmp_path: Path
) -> None:
    base, tokens = served
    saved = requests.post(
        f"{base}/v1/designs",
        json={"design_id": "greenhouse-bench", "request": DEMO_CHANNEL},
        headers=bearer(tokens["edna"]),
        timeout=30,
    )
    assert saved.status_code == 201, saved.text
    # A reel of the demo's red LEDs binned higher (invented, class-typical values): 2.6 to 3.4 V.
    led = requests.get(f"{base}/v1/parts/led-red-5mm", timeout=5)
    higher = {**led.json()["parameters"], "vf_typ_v": 2.9, "vf_min_v": 2.6, "vf_max_v": 3.4}
    edited = requests.put(
        f"{base}/v1/parts/led-red-5mm",
        json={"parameters": higher},
        headers={**bearer(tokens["edna"]), "If-Match": led.headers["ETag"]},
        timeout=5,
    )
    assert edited.status_code == 200, edited.text
    revision = edited.json()["revision"]

    tab.goto(f"{base}/review/parts/led-red-5mm")
    approval = tab.locator("section.approval").inner_text()
    summary = f"Approving revision {revision} of led-red-5mm turns 1 saved design from pass to fail"
    assert approval.index(summary) < approval.index(f"Approve revision {revision}")  # read before the button
    design = tab.locator("#impact-greenhouse-bench").inner_text().replace("\N{NO-BREAK SPACE}", " ")
    # Headroom at the worst corner, 11.4 V - 3 x Vf,max - 0.25 V: 3.65 V before, 0.95 V after, each a little more
    # with the LEDs' own warming (their forward voltage falls about 4 mV/K).
    assert "pass → fail" in design and re.search(r"headroom: 3\.(6[5-9]|7)\d* V → 9[5-9]\d(\.\d+)? mV", design)
    assert "fails" in design
    shot(tab, tmp_path, "impact-draft")

    tab.get_by_label("Reviewer token").fill(tokens["rita"])
    tab.get_by_role("button", name=f"Approve revision {revision}").click()
    tab.wait_for_url(f"**/review/parts/led-red-5mm?approved={revision}")
    assert tab.locator("#design-impact").count() == 0  # approved: nothing pending to weigh
    failing = requests.get(f"{base}/v1/designs?fails_at_current=true", timeout=30).json()
    assert [d["design_id"] for d in failing["items"]] == ["greenhouse-bench"]
