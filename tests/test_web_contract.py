"""The web side of the budget contract: the per-sweep choice (custom tables or quality number only),
the plain-quality column, exports on the budget page, sign-offs carried over on re-freeze, and the
link from an older snapshot to the newest one."""

from __future__ import annotations

import io
import json
import re
import sqlite3
import time

import pytest
from PIL import Image
from skimage import data as skdata

from dct import contract
from webapp import create_app, store

GRID = {"qualities": [40, 60, 80, 90], "cutoffs": [64, 20], "subsamplings": ["4:2:0"], "coarse_step": 20}
HX = {"HX-Request": "true"}


def png_bytes(pixels) -> bytes:
    buf = io.BytesIO()
    Image.fromarray(pixels).save(buf, "PNG")
    return buf.getvalue()


@pytest.fixture(scope="module")
def sweep(tmp_path_factory):
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path_factory.mktemp("contract")), "SWEEP_WORKERS": 1,
                      "SWEEP_GRID": GRID})
    client = app.test_client()
    files = [("product/a.png", png_bytes(skdata.astronaut()[100:164, 180:260])),
             ("hero/b.png", png_bytes(skdata.chelsea()[20:84, 40:120]))]
    r = client.post("/api/sample-sets", data={"files": [(io.BytesIO(d), n) for n, d in files]},
                    content_type="multipart/form-data")
    set_id = r.get_json()["id"]
    sweep_id = client.post(f"/api/sample-sets/{set_id}/sweeps",
                           json={"target_ssim": 0.9, "coverage": 1.0}).get_json()["id"]
    deadline = time.monotonic() + 120
    while client.get(f"/api/sweeps/{sweep_id}").get_json()["status"] != "done":
        assert time.monotonic() < deadline
        time.sleep(0.05)
    app.config["TEST_SET_ID"] = set_id  # for starting a second sweep of the same set
    yield app, client, sweep_id
    app.extensions["eightfold_worker"].stop()


def result(client, sweep_id):
    return client.get(f"/api/sweeps/{sweep_id}").get_json()["result"]


def test_choice_switches_between_custom_tables_and_quality_number_only(sweep):
    _, client, sweep_id = sweep
    doc = result(client, sweep_id)
    assert doc["choice"] == "custom_tables"
    page = client.get(f"/sweeps/{sweep_id}").get_data(as_text=True)
    assert "Quality number only" in page and 'value="custom_tables" checked' in page
    for c in doc["classes"]:
        fb = c["plain_fallback"]
        s = fb["setting"]
        words = f"q{s['quality']} {s['subsampling']}"
        assert words in page
        assert fb["extra_bytes"] == fb["estimated_bytes"] - c["estimated_bytes"]
    r = client.post(f"/sweeps/{sweep_id}/choice", data={"choice": "plain_quality"}, headers=HX)
    assert r.status_code == 200 and 'id="results-table"' in r.get_data(as_text=True)
    plain = result(client, sweep_id)
    assert plain["choice"] == "plain_quality"
    assert all(c["setting"]["cutoff"] == 64 for c in plain["classes"])
    assert {c["name"]: c["setting"] for c in plain["classes"]} == {c["name"]: c["plain_fallback"]["setting"]
                                                                    for c in doc["classes"]}
    contract.validate_document(plain)
    bad = client.post(f"/sweeps/{sweep_id}/choice", data={"choice": "cheapest"}, headers=HX)
    assert bad.status_code == 400
    assert "choice must be one of custom_tables, plain_quality, got &#39;cheapest&#39;" in bad.get_data(as_text=True)
    # a target change keeps the choice
    client.post(f"/sweeps/{sweep_id}/decide", data={"class": "hero", "target_ssim": "0.91"}, headers=HX)
    assert result(client, sweep_id)["choice"] == "plain_quality"
    client.post(f"/sweeps/{sweep_id}/decide", data={"class": "hero", "target_ssim": "0.9"}, headers=HX)
    client.post(f"/sweeps/{sweep_id}/choice", data={"choice": "custom_tables"}, headers=HX)
    assert result(client, sweep_id) == dict(doc, created=result(client, sweep_id)["created"])


def test_budget_page_exports_follow_the_choice(sweep):
    _, client, sweep_id = sweep
    client.post(f"/sweeps/{sweep_id}/choice", data={"choice": "plain_quality"}, headers=HX)
    try:
        body = client.post(f"/api/sweeps/{sweep_id}/freeze").get_json()
    finally:
        client.post(f"/sweeps/{sweep_id}/choice", data={"choice": "custom_tables"}, headers=HX)
    view, edit = body["token"], body["edit_url"].rsplit("/", 1)[1]
    doc = client.get(f"/budgets/{view}/document.json").get_json()
    assert doc["choice"] == "plain_quality"
    for token in (view, edit):  # the API's budget body (document + sign-offs + snapshot facts) too
        contract.validate_document(client.get(f"/api/budgets/{token}").get_json())
    b = contract.parse_document(doc)
    for token in (view, edit):  # owner and share link alike
        page = client.get(f"/budgets/{token}").get_data(as_text=True)
        assert "settings: quality number only" in page
        assert "<script>" not in page and "onclick" not in page  # CSP: scripts come from static/
        for i, e in enumerate(b.classes):
            assert contract.cjpeg_command(e) in page
            assert f'data-copy="kw-{i}"' in page
            kwargs = re.search(rf'id="kw-{i}"[^>]*>([^<]*)</textarea>', page).group(1).replace("&#34;", '"')
            assert kwargs == json.dumps(contract.pillow_kwargs(e))
            assert e.setting.cutoff == 64
            txt = client.get(f"/budgets/{token}/exports/{i}.txt")
            assert txt.get_data(as_text=True) == contract.cjpeg_tables_text(e)
            assert txt.headers["Content-Disposition"].startswith('attachment; filename="eightfold-qtables-')
            assert client.get(f"/budgets/{token}/exports/{i}.py").get_data(as_text=True) == contract.pillow_snippet(e)
    assert client.get(f"/budgets/{view}/exports/99.txt").status_code == 404


def test_refreeze_carries_over_unchanged_sign_offs_and_links_to_the_newer_snapshot(sweep):
    _, client, sweep_id = sweep
    body = client.post(f"/api/sweeps/{sweep_id}/freeze").get_json()
    view1, edit = body["token"], body["edit_url"].rsplit("/", 1)[1]
    for cls, name in (("product", "Dana"), ("hero", "Ravi")):
        r = client.post(f"/api/budgets/{view1}/signoffs", json={"class": cls, "name": name, "verdict": "approve",
                                                                  "comment": ""})
        assert r.status_code == 201
    first = {s["class"]: s for s in client.get(f"/api/budgets/{view1}").get_json()["signoffs"]}
    # change only hero's target: its setting changes, product's stays
    r = client.post(f"/api/budgets/{edit}/targets", json={"classes": {"hero": {"target_ssim": 0.97}}})
    assert r.status_code == 201
    view2 = r.get_json()["token"]
    new = client.get(f"/api/budgets/{view2}").get_json()
    old = client.get(f"/api/budgets/{view1}").get_json()
    assert [c["setting"] for c in new["classes"] if c["name"] == "product"] == \
           [c["setting"] for c in old["classes"] if c["name"] == "product"]
    assert [c["setting"] for c in new["classes"] if c["name"] == "hero"] != \
           [c["setting"] for c in old["classes"] if c["name"] == "hero"]
    carried = new["signoffs"]
    assert [(s["class"], s["name"], s["created"], s["carried_from"], s["carried_from_seq"]) for s in carried] == \
           [("product", "Dana", first["product"]["created"], view1, 1)]
    page = client.get(f"/budgets/{view2}").get_data(as_text=True)
    assert "carried over from snapshot 1" in page
    hero = page[page.index('id="class-hero"'):]
    assert "waiting for sign-off" in hero[:600]
    # the old share link names the newer one, and only its share link
    old_page = client.get(f"/budgets/{view1}").get_data(as_text=True)
    assert 'id="newer-snapshot"' in old_page and f'href="/budgets/{view2}"' in old_page
    assert edit not in old_page
    assert 'id="newer-snapshot"' not in client.get(f"/budgets/{view2}").get_data(as_text=True)
    # a further re-freeze keeps pointing at where the sign-off was given
    r = client.post(f"/api/budgets/{edit}/targets", json={"classes": {"hero": {"target_ssim": 0.96}}})
    third = client.get(f"/api/budgets/{r.get_json()['token']}").get_json()["signoffs"]
    assert [(s["name"], s["carried_from"]) for s in third] == [("Dana", view1)]


def test_a_version_1_data_directory_gains_carried_from(tmp_path):
    path = tmp_path / "old.sqlite3"
    # the version-1 signoffs table: today's minus its last column
    old_schema = re.sub(r",([^\n]*--[^\n]*)?\n\s*carried_from[^\n]*", "", store.SCHEMA_FILE.read_text())
    assert "carried_from" not in old_schema.split("CREATE TABLE IF NOT EXISTS signoffs")[1]
    conn = sqlite3.connect(path)
    conn.executescript(old_schema)
    conn.execute("PRAGMA user_version = 1")
    conn.commit()
    conn.close()
    conn = store.connect(path)
    store.ensure_schema(conn)
    cols = [r[1] for r in conn.execute("PRAGMA table_info(signoffs)")]
    assert "carried_from" in cols and conn.execute("PRAGMA user_version").fetchone()[0] == 2
    conn.close()


def test_api_choice_on_decide_and_on_start(sweep):
    app, client, sweep_id = sweep
    r = client.post(f"/api/sweeps/{sweep_id}/decide", json={"choice": "plain_quality"})
    assert r.status_code == 200 and r.get_json()["choice"] == "plain_quality"
    assert all(c["setting"]["cutoff"] == 64 for c in r.get_json()["classes"])
    r = client.post(f"/api/sweeps/{sweep_id}/decide", json={"choice": "custom"})
    assert r.status_code == 400
    assert r.get_json() == {"error": "choice must be one of custom_tables, plain_quality, got 'custom'"}
    client.post(f"/api/sweeps/{sweep_id}/decide", json={"choice": "custom_tables"})
    set_id = app.config["TEST_SET_ID"]
    new = client.post(f"/api/sample-sets/{set_id}/sweeps", json={"choice": "plain_quality", "target_ssim": 0.9, "coverage": 1.0}).get_json()["id"]
    deadline = time.monotonic() + 120
    while client.get(f"/api/sweeps/{new}").get_json()["status"] != "done":
        assert time.monotonic() < deadline
        time.sleep(0.05)
    body = client.get(f"/api/sweeps/{new}").get_json()
    doc = body["result"]
    assert doc is not None, body
    assert doc["choice"] == "plain_quality" and all(c["setting"]["cutoff"] == 64 for c in doc["classes"])


def test_eightfold_check_takes_the_web_budget_download(sweep, tmp_path):
    from click.testing import CliRunner

    from dct.cli import main

    _, client, sweep_id = sweep
    view = client.post(f"/api/sweeps/{sweep_id}/freeze").get_json()["token"]
    path = tmp_path / "budget.json"
    path.write_bytes(client.get(f"/budgets/{view}/document.json").get_data())
    (tmp_path / "new" / "product").mkdir(parents=True)
    Image.fromarray(skdata.astronaut()[100:164, 180:260]).save(tmp_path / "new" / "product" / "a.png")
    r = CliRunner().invoke(main, ["check", str(path), str(tmp_path / "new"), "--workers", "1", "--quiet", "--json", "-"])
    report = json.loads(r.output)
    assert r.exit_code == report["exit_code"] in (0, 1)
    [row] = report["images"]
    assert row["class"] == "product" and row["error"] is None and row["actual_bytes"] > 0 and row["ssim"] > 0.5
