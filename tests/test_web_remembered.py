"""What the app remembers and lets people undo: sort order in the URL, the last targets and current
default on the set page, set names, the sweep's own targets after edits in the results table; and
a cancelled sweep that says so at once."""

from __future__ import annotations

import io
import time

import pytest
from PIL import Image
from skimage import data as skdata

from webapp import create_app, store

GRID = {"qualities": [40, 70, 90], "cutoffs": [64, 28], "subsamplings": ["4:4:4", "4:2:0"], "coarse_step": 20}


def png(pixels) -> bytes:
    buf = io.BytesIO()
    Image.fromarray(pixels).save(buf, "PNG")
    return buf.getvalue()


FILES = [("product/astronaut.png", png(skdata.astronaut()[100:164, 180:260])),
         ("hero/rocket.png", png(skdata.rocket()[100:164, 100:180]))]


@pytest.fixture(scope="module")
def swept(tmp_path_factory):
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path_factory.mktemp("remember")), "SWEEP_WORKERS": 1,
                      "SWEEP_GRID": GRID, "SWEEP_AUTORESUME": False})
    client = app.test_client()
    set_id = client.post("/api/sample-sets", data={"files": [(io.BytesIO(d), n) for n, d in FILES]},
                         content_type="multipart/form-data").get_json()["id"]
    body = {"classes": {"product": {"target_ssim": 0.97}}, "current": {"quality": 75, "cutoff": 64, "subsampling": "4:4:4"}}
    sweep_id = client.post(f"/api/sample-sets/{set_id}/sweeps", json=body).get_json()["id"]
    deadline = time.monotonic() + 300
    while client.get(f"/api/sweeps/{sweep_id}").get_json()["status"] != "done":
        assert time.monotonic() < deadline
        time.sleep(0.05)
    yield app, client, set_id, sweep_id
    app.extensions["eightfold_worker"].stop()


def test_sort_order_goes_into_the_url_so_a_reload_keeps_it(swept):
    _, client, _, sweep_id = swept
    html = client.get(f"/sweeps/{sweep_id}/table?sort=total_kb&dir=desc", headers={"HX-Request": "true"}).get_data(as_text=True)
    assert f'hx-push-url="/sweeps/{sweep_id}?sort=total_kb&amp;dir=asc"' in html  # the header's next state
    page = client.get(f"/sweeps/{sweep_id}?sort=total_kb&dir=desc").get_data(as_text=True)
    assert 'aria-sort="descending"' in page and 'id="sort-state" name="sort" value="total_kb"' in page


def test_set_page_starts_from_the_last_targets_and_current_default(swept):
    _, client, set_id, _ = swept
    html = client.get(f"/sets/{set_id}").get_data(as_text=True)
    import re

    i = re.search(r'name="cls-(\d+)" value="product"', html).group(1)
    assert f'name="t-{i}" value="0.97"' in html
    assert 'name="cur_quality" id="f-cur_quality" type="number" min="1" max="100" value="75"' in html
    assert '<option selected>4:4:4</option>' in html


def test_sets_can_be_named(swept):
    app, client, set_id, _ = swept
    r = client.post(f"/sets/{set_id}/name", data={"name": "  Autumn catalogue  "})
    assert r.status_code == 303
    html = client.get(f"/sets/{set_id}").get_data(as_text=True)
    assert "<h1>Autumn catalogue</h1>" in html and "Renamed the set to “Autumn catalogue”." in html
    r = client.post(f"/sets/{set_id}/name", data={"name": "   "})
    assert r.status_code == 400
    html = r.get_data(as_text=True)
    assert "Name: type a name for the set" in html and 'id="f-name" name="name"' in html
    assert 'class="invalid" aria-invalid="true" aria-describedby="err-name"' in html


def test_target_edits_in_the_table_can_be_undone(swept):
    app, client, _, sweep_id = swept
    with app.app_context():
        before = store.get_sweep(store.get_db(), sweep_id)
    r = client.post(f"/sweeps/{sweep_id}/decide", data={"class": "hero", "target_ssim": "0.99"},
                    headers={"HX-Request": "true"})
    html = r.get_data(as_text=True)
    assert "Targets changed since the sweep ran" in html and "target 0.95 → 0.99" in html
    assert 'id="restore-targets"' in html
    r = client.post(f"/sweeps/{sweep_id}/restore-targets", data={}, headers={"HX-Request": "true"})
    html = r.get_data(as_text=True)
    assert r.status_code == 200 and "Targets changed since the sweep ran" not in html
    with app.app_context():
        after = store.get_sweep(store.get_db(), sweep_id)
    assert after["params"]["classes"] == before["params"]["classes"]
    strip = lambda doc: [{k: v for k, v in c.items()} for c in doc["classes"]]
    assert strip(after["document"]) == strip(before["document"])  # the same decision as the sweep's own


def test_refused_table_value_stays_in_its_box(swept):
    _, client, _, sweep_id = swept
    r = client.post(f"/sweeps/{sweep_id}/decide", data={"class": "hero", "target_ssim": "1.5"},
                    headers={"HX-Request": "true"})
    assert r.status_code == 400
    html = r.get_data(as_text=True)
    assert 'class="t-input invalid" name="target_ssim" value="1.5"' in html
    assert 'aria-invalid="true" aria-describedby="table-error"' in html
    assert html.count("Target SSIM for “hero”: enter a number above 0 and at most 1") == 1


def test_cancel_says_cancelling_at_once(swept):
    app, client, set_id, sweep_id = swept
    with app.app_context():
        db = store.get_db()
        other = store.create_sweep(db, set_id, store.get_sweep(db, sweep_id)["params"])
        with db:  # as the worker leaves it while a pass is in progress
            db.execute("UPDATE sweeps SET status = 'running', done = 1, total = 3 WHERE id = ?", (other,))
    html = client.post(f"/sweeps/{other}/cancel", headers={"HX-Request": "true"}).get_data(as_text=True)
    assert "Cancelling…" in html and "Sweeping" not in html and "Cancel sweep</button>" not in html
    assert "1 finished passes are kept" in html or "Stopping after the image pass in progress" in html
