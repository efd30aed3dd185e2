"""The review desk in a real browser (Debian's Chromium driven by Playwright), used as an analyst would."""

from __future__ import annotations

import math
import shutil
import threading
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer

import httpx
import pytest

from desk_support import HOSTILE_ID, free_port, start_server, stop, train_filter, write_queue

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"


class Canary(BaseHTTPRequestHandler):
    """A loopback listener that counts every request it gets (it should get none)."""

    hits: list = []

    def do_GET(self):  # noqa: N802 (the standard library's name)
        Canary.hits.append(self.path)
        self.send_response(204)
        self.end_headers()

    do_POST = do_GET

    def log_message(self, *args):
        pass


@pytest.fixture(scope="module")
def canary():
    server = ThreadingHTTPServer(("127.0.0.1", free_port()), Canary)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    yield server.server_address[1]
    server.shutdown()


@pytest.fixture(scope="module")
def desk(tmp_path_factory, canary):
    folder = tmp_path_factory.mktemp("browser")
    _, model = train_filter(folder)
    queue = write_queue(folder, 40, hostile_port=canary)
    process, base = start_server(model, "--queue", queue, "--db", folder / "reviews.sqlite")
    yield base
    stop(process)


@pytest.fixture(scope="module")
def browser():
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        # The system browser (Debian's chromium), never a downloaded one; no sandbox when run as root (CI).
        chromium = p.chromium.launch(executable_path=CHROMIUM, args=["--no-sandbox"])
        yield chromium
        chromium.close()


def expect(locator):
    from playwright.sync_api import expect as playwright_expect

    return playwright_expect(locator)


def watched_page(browser, base):
    page = browser.new_page()
    seen = {"requests": [], "errors": [], "dialogs": []}
    page.on("request", lambda r: seen["requests"].append(r.url))
    page.on("pageerror", lambda e: seen["errors"].append(str(e)))
    page.on("dialog", lambda d: (seen["dialogs"].append(d.message), d.dismiss()))
    return page, seen


def test_queue_message_edit_review_reload(desk, browser):
    page, seen = watched_page(browser, desk)
    page.goto(desk + "/")
    rows = page.locator("table.desk-journal tbody tr")
    assert rows.count() == 41
    first = rows.first.locator("a.desk-id")
    mid = first.inner_text()
    first.click()
    page.wait_for_selector("#ledger-now")
    queued_closing = float(page.get_attribute("#ledger-now", "data-closing"))
    api = httpx.get(f"{desk}/api/messages/{mid}/ledger").json()
    assert math.isclose(queued_closing, api["ledger"]["closing"], rel_tol=1e-9)

    # Edit the text as a person types: the ledger is explained again, and its balance is the API's.
    edited = "pay the parcel fee now at the link, urgent"
    page.fill("#try-text", "")
    page.type("#try-text", edited, delay=5)
    expect(page.locator("#try-status")).to_contain_text("Edited text")
    expected = httpx.post(f"{desk}/api/ledger", json={"text": edited}).json()["ledger"]["closing"]
    # (waits run through Playwright's own locators: the page's policy forbids evaluating strings)
    expect(page.locator("#try-status")).to_contain_text(f"closing balance {expected:+.2f}")
    shown = float(page.get_attribute("#ledger-now", "data-closing"))
    assert math.isclose(shown, expected, rel_tol=1e-9) and not math.isclose(shown, queued_closing, rel_tol=1e-6)
    assert page.locator("#ledger-now .nbl-closing .nbl-bal").inner_text().strip() == f"{expected:+.2f}"
    assert f"{expected:+.2f}" in page.inner_text("#try-status")

    # Record a review with the form, reload, find it kept.
    page.check("input[name=outcome][value=overturned]")
    page.fill("#reason", "a member's genuine sale, not a scam")
    page.click("text=Record review")
    page.wait_for_selector(".desk-saved")
    page.reload()
    history = page.inner_text("#history")
    assert "a member's genuine sale, not a scam" in history and "overturned" in history
    kept = httpx.get(f"{desk}/api/reviews", params={"message_id": mid}).json()["reviews"]
    assert [r["reason"] for r in kept] == ["a member's genuine sale, not a scam"]
    page.goto(desk + "/reviews")
    assert "a member's genuine sale, not a scam" in page.inner_text("table.desk-journal")
    assert not seen["errors"] and not seen["dialogs"]
    assert all(url.startswith(desk) for url in seen["requests"])


def test_a_hostile_message_is_shown_as_text_and_runs_and_fetches_nothing(desk, browser, canary):
    Canary.hits.clear()
    page, seen = watched_page(browser, desk)
    page.goto(f"{desk}/")  # the queue shows its start too
    page.goto(f"{desk}/messages/{HOSTILE_ID}")
    page.wait_for_selector("#ledger-now")
    shown = page.inner_text(".nbl-text")
    assert "<script>" in shown and "<style>" in shown and "<img src=" in shown  # as text, visible
    assert page.locator("body script:not([src])").count() == 0 and page.locator("body img").count() == 0
    # Editing the text sends it back through the same escaping.
    page.fill("#try-text", page.input_value("#try-text") + " <b>bold</b>")
    expect(page.locator("#try-status")).to_contain_text("Edited text")
    assert page.locator(".nbl-text b").count() == 0
    page.wait_for_timeout(1500)
    assert Canary.hits == []  # nothing reached the loopback listener the message names
    assert all(url.startswith(desk) for url in seen["requests"]), seen["requests"]
    assert not seen["errors"] and not seen["dialogs"]
