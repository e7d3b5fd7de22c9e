"""In Chromium, with an owner password: log in, upload, edit a class (htmx + CSRF header), delete
(the confirm that used to be an inline handler), all without one Content-Security-Policy report."""

from __future__ import annotations

import threading

import pytest

from tests.test_browser import GRID, browser, shot, wait_true, write_shop  # noqa: F401 (browser is a fixture)
from tests.test_web_server import run_until_closed

pytestmark = pytest.mark.browser
PORT = 8119  # loopback only
PASSWORD = "fernridge-owner-pass"


@pytest.fixture
def guarded(tmp_path):
    from waitress import create_server

    from webapp import create_app
    from webapp.server import WAITRESS_LIMITS

    app = create_app({"DATA_DIR": str(tmp_path / "data"), "SWEEP_WORKERS": 1, "SWEEP_GRID": GRID,
                      "OWNER_PASSWORD": PASSWORD})
    srv = create_server(app, host="127.0.0.1", port=PORT, threads=4, **WAITRESS_LIMITS)
    stopping = threading.Event()
    thread = threading.Thread(target=run_until_closed, args=(srv, stopping), daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{PORT}"
    stopping.set()
    srv.close()
    app.extensions["eightfold_worker"].stop()
    thread.join(5)


def test_login_upload_htmx_and_delete_under_the_csp(guarded, browser, tmp_path):  # noqa: F811
    context = browser.new_context(viewport={"width": 1366, "height": 900})
    page = context.new_page()
    console, errors = [], []
    page.on("console", lambda m: console.append(m.text))
    page.on("pageerror", lambda e: errors.append(str(e)))

    page.goto(guarded + "/")
    page.wait_for_url(lambda url: "/login" in url and "next=" in url)
    shot(page, "s1-login")
    page.set_viewport_size({"width": 390, "height": 760})
    shot(page, "s1-login-phone")
    page.set_viewport_size({"width": 1366, "height": 900})
    page.fill("#password", "not it")
    page.click("button[type=submit]")
    assert "That password is not right." in page.text_content(".error")
    page.fill("#password", PASSWORD)
    page.click("button[type=submit]")
    page.wait_for_url(guarded + "/")

    page.set_input_files("#folder-input", str(write_shop(tmp_path)))
    wait_true(page, "document.getElementById('picked').textContent.includes('5 files')")
    page.click("#upload-button")  # upload.js: fetch with the X-CSRFToken header
    page.wait_for_url("**/sets/*")

    # moving a file to another class posts through htmx, which sends the token from <body hx-headers>
    with page.expect_response(lambda r: r.url.endswith("/classes") and r.request.method == "POST") as info:
        field = page.locator("input[name^=class-]").first
        field.fill("lifestyle")
        field.dispatch_event("change")
    assert info.value.status == 200
    assert info.value.request.headers.get("x-csrftoken")
    shot(page, "s2-set-after-class-edit")

    page.once("dialog", lambda d: d.dismiss())  # the confirm from static/common.js: first say no
    page.click("button.danger")
    assert "/sets/" in page.url
    page.once("dialog", lambda d: d.accept())
    page.click("button.danger")
    page.wait_for_url(guarded + "/")
    assert "Deleted sample set" in page.text_content(".notice")

    page.click("button.linkish:has-text('Log out')")
    page.wait_for_url(lambda url: url.endswith("/login"))
    assert not errors, errors
    assert not [m for m in console if "Content Security Policy" in m or "Refused" in m], console
    context.close()
