"""Phone width (390 px) in headless Chromium (Debian's): nothing scrolls the page sideways, the
results table's deciding columns are on screen, and at Fit the review marks leave the pixels free.
Screenshots go to test-artifacts/screenshots/.
"""

from __future__ import annotations

import io
import os
import threading
import time
from pathlib import Path

import pytest
from PIL import Image
from skimage import data as skdata

pytestmark = pytest.mark.browser

CHROMIUM = "/usr/bin/chromium"
SHOTS = Path(__file__).resolve().parent.parent / "test-artifacts" / "screenshots"
GRID = {"qualities": [40, 60, 85], "cutoffs": [64, 28], "subsamplings": ["4:4:4", "4:2:0"], "coarse_step": 20}
PHONE = {"width": 390, "height": 844}


def png(pixels) -> bytes:
    buf = io.BytesIO()
    Image.fromarray(pixels).save(buf, "PNG")
    return buf.getvalue()


FILES = [
    ("product-photos-of-the-autumn-range/astronaut.png", png(skdata.astronaut()[60:188, 140:300])),
    ("product-photos-of-the-autumn-range/coffee.png", png(skdata.coffee()[40:168, 100:260])),
    ("hero/rocket.png", png(skdata.rocket()[60:188, 80:240])),
]


@pytest.fixture(scope="module")
def served(tmp_path_factory):
    from waitress import create_server

    from webapp import create_app, store

    app = create_app({"DATA_DIR": str(tmp_path_factory.mktemp("phone")), "SWEEP_WORKERS": 1, "SWEEP_GRID": GRID,
                      "SWEEP_AUTORESUME": False})
    client = app.test_client()
    set_id = client.post("/api/sample-sets", data={"files": [(io.BytesIO(d), n) for n, d in FILES]},
                         content_type="multipart/form-data").get_json()["id"]
    done = client.post(f"/api/sample-sets/{set_id}/sweeps", json={}).get_json()["id"]
    deadline = time.monotonic() + 300
    while client.get(f"/api/sweeps/{done}").get_json()["status"] != "done":
        assert time.monotonic() < deadline
        time.sleep(0.1)
    with app.app_context():  # a sweep left queued (never submitted): its page shows the live panel
        db = store.get_db()
        queued = store.create_sweep(db, set_id, store.get_sweep(db, done)["params"])
    srv = create_server(app, host="127.0.0.1", port=0, threads=4)
    thread = threading.Thread(target=srv.run, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{srv.effective_port}", done, queued
    srv.close()
    app.extensions["eightfold_worker"].stop()
    thread.join(5)


@pytest.fixture(scope="module")
def browser():
    if not Path(CHROMIUM).exists():
        message = "Debian chromium is not installed (scripts/test.sh installs it)"
        if os.environ.get("CI"):
            pytest.fail(message)
        pytest.skip(message)
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, headless=True, args=["--no-sandbox", "--disable-gpu"])
        yield b
        b.close()


def shot(page, name):
    SHOTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(SHOTS / f"{name}.png"), full_page=True)


def page_overflow(page) -> int:
    return page.evaluate("document.documentElement.scrollWidth - document.documentElement.clientWidth")


def test_results_at_phone_width_show_the_deciding_columns(served, browser):
    base, done, _ = served
    page = browser.new_page(viewport=PHONE)
    page.goto(f"{base}/sweeps/{done}")
    page.wait_for_selector("table.results")
    shot(page, "phone-results")
    assert page_overflow(page) <= 0
    for key in ("quality", "cutoff", "subsampling", "mean_kb"):
        box = page.locator(f"table.results thead th.col-{key}").bounding_box()
        assert box is not None and box["x"] >= 0 and box["x"] + box["width"] <= PHONE["width"], key
    page.close()


def test_progress_page_at_phone_width_does_not_scroll_sideways(served, browser):
    base, _, queued = served
    page = browser.new_page(viewport=PHONE)
    page.goto(f"{base}/sweeps/{queued}")
    page.wait_for_selector("table.checks")
    shot(page, "phone-progress")
    assert page_overflow(page) <= 0
    page.close()


def test_marks_at_fit_leave_the_pixels_free(served, browser):
    base, done, _ = served
    page = browser.new_page(viewport={"width": 1366, "height": 900})
    page.goto(f"{base}/sweeps/{done}/review/0")
    mark = page.locator("#pane-candidate .spot-mark").first
    mark.wait_for(state="attached")
    style = lambda: mark.evaluate("m => [getComputedStyle(m).borderTopWidth, getComputedStyle(m).boxShadow]")
    assert style() == ["0px", "none"]  # corners only at Fit
    shot(page, "review-fit-marks")
    page.click('button[data-zoom="2"]')
    assert style()[0] == "2px"  # the full outline where a window is large enough to see round
    page.close()


def test_budget_page_thumbnails_desktop_and_phone(served, browser):
    import json
    import urllib.request

    base, done, _ = served
    req = urllib.request.Request(f"{base}/api/sweeps/{done}/freeze", data=b"{}", method="POST",
                                 headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(req) as r:
        view = json.loads(r.read())["token"]
    for name, viewport in (("budget-desktop", {"width": 1366, "height": 900}), ("budget-phone", PHONE)):
        page = browser.new_page(viewport=viewport)
        page.goto(f"{base}/budgets/{view}")
        thumb = page.locator("a.thumb-link img").first
        thumb.wait_for()
        page.wait_for_function("img => img.complete && img.naturalWidth > 0", arg=thumb.element_handle())
        shot(page, name)
        assert page_overflow(page) <= 0, name
        page.close()
