"""Budget links: freeze, share (view) vs owner (edit) permissions, sign-offs, re-freeze, downloads."""

from __future__ import annotations

import io
import time

import pytest
from PIL import Image
from skimage import data as skdata

from webapp import create_app

GRID = {"qualities": [50, 70, 85, 90], "cutoffs": [64], "subsamplings": ["4:2:0"], "coarse_step": 20}


def png_bytes(pixels) -> bytes:
    buf = io.BytesIO()
    Image.fromarray(pixels).save(buf, "PNG")
    return buf.getvalue()


@pytest.fixture(scope="module")
def sweep(tmp_path_factory):
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path_factory.mktemp("budgets")), "SWEEP_WORKERS": 1,
                      "SWEEP_GRID": GRID})
    client = app.test_client()
    files = [("product/a.png", png_bytes(skdata.astronaut()[100:164, 180:260])),
             ("hero/b.png", png_bytes(skdata.chelsea()[20:84, 40:120]))]
    r = client.post("/api/sample-sets", data={"files": [(io.BytesIO(d), n) for n, d in files]},
                    content_type="multipart/form-data")
    sweep_id = client.post(f"/api/sample-sets/{r.get_json()['id']}/sweeps", json={}).get_json()["id"]
    deadline = time.monotonic() + 120
    while client.get(f"/api/sweeps/{sweep_id}").get_json()["status"] != "done":
        assert time.monotonic() < deadline
        time.sleep(0.05)
    yield app, client, sweep_id
    app.extensions["eightfold_worker"].stop()


@pytest.fixture
def budget(sweep):
    _, client, sweep_id = sweep
    r = client.post(f"/api/sweeps/{sweep_id}/freeze")
    assert r.status_code == 201
    body = r.get_json()
    assert set(body) == {"token", "view_url", "edit_url"}
    edit = body["edit_url"].rsplit("/", 1)[1]
    return client, sweep_id, body["token"], edit, body


def test_tokens_are_long_random_and_distinct(budget):
    _, _, view, edit, body = budget
    # secrets.token_urlsafe(24): 24 random bytes -> 32 URL-safe base64 characters
    assert len(view) == len(edit) == 32 and view != edit
    assert body["view_url"].endswith(f"/budgets/{view}")


def test_frozen_document_equals_the_sweep_document(budget):
    client, sweep_id, view, edit, _ = budget
    doc = client.get(f"/api/sweeps/{sweep_id}").get_json()["result"]
    for token, access in ((view, "view"), (edit, "edit")):
        body = client.get(f"/api/budgets/{token}").get_json()
        assert body["signoffs"] == [] and body["budget"]["access"] == access
        assert {k: v for k, v in body.items() if k not in ("signoffs", "budget")} == doc


def test_snapshot_is_immutable_when_the_sweep_changes(budget):
    client, sweep_id, view, _, _ = budget
    frozen = client.get(f"/api/budgets/{view}").get_json()["classes"]
    client.post(f"/api/sweeps/{sweep_id}/decide", json={"classes": {"product": {"target_ssim": 0.999}}})
    assert client.get(f"/api/budgets/{view}").get_json()["classes"] == frozen
    client.post(f"/api/sweeps/{sweep_id}/decide", json={"classes": {"product": {"target_ssim": 0.95}}})


def test_signoff_with_share_token_and_trail(budget):
    client, _, view, edit, _ = budget
    r = client.post(f"/api/budgets/{view}/signoffs",
                    json={"class": "product", "name": "Dana (design)", "verdict": "needs work", "comment": "soft edges"})
    assert r.status_code == 201
    r = client.post(f"/api/budgets/{edit}/signoffs", json={"class": "product", "name": "Dana (design)", "verdict": "approve"})
    assert r.status_code == 201
    trail = client.get(f"/api/budgets/{view}").get_json()["signoffs"]
    assert [(s["class"], s["name"], s["verdict"], s["comment"]) for s in trail] == [
        ("product", "Dana (design)", "needs work", "soft edges"), ("product", "Dana (design)", "approve", "")]
    assert all(s["created"].endswith("+00:00") for s in trail)  # dated, UTC ISO 8601


@pytest.mark.parametrize(
    "payload, message",
    [
        ({"class": "shoes", "name": "A", "verdict": "approve"},
         "class must be one of this budget's classes (hero, product), got 'shoes'"),
        ({"class": "hero", "name": "  ", "verdict": "approve"}, "name must be 1 to 80 characters, got '  '"),
        ({"class": "hero", "name": "A", "verdict": "yes"}, "verdict must be 'approve' or 'needs work', got 'yes'"),
        ({"class": "hero", "name": "A", "verdict": "approve", "mood": 1},
         "unknown key 'mood' (allowed: class, comment, name, verdict)"),
        ({"class": "hero", "name": "A", "verdict": "approve", "comment": 5},
         "comment must be text of at most 2000 characters, got 5"),
    ],
)
def test_bad_signoffs(budget, payload, message):
    client, _, view, _, _ = budget
    r = client.post(f"/api/budgets/{view}/signoffs", json=payload)
    assert r.status_code == 400 and r.get_json() == {"error": message}


def test_share_token_cannot_change_targets(budget):
    client, _, view, _, _ = budget
    r = client.post(f"/api/budgets/{view}/targets", json={"classes": {"hero": {"target_ssim": 0.9}}})
    assert r.status_code == 403
    assert r.get_json() == {"error": "this is a share token: changing targets needs the edit token"}
    r = client.post(f"/budgets/{view}/targets", data={"cls-0": "hero", "t-0": "0.9", "c-0": "0.9"})
    assert r.status_code == 403


def test_edit_token_refreezes_a_new_snapshot(budget):
    from dct.pipeline import redecide
    from dct.sampleset import ClassSpec
    from dct.tables import Setting

    client, sweep_id, view, edit, _ = budget
    before = client.get(f"/api/budgets/{view}").get_json()
    r = client.post(f"/api/budgets/{edit}/targets", json={"classes": {"hero": {"target_ssim": 0.9, "coverage": 0.5}}})
    assert r.status_code == 201
    new = r.get_json()
    assert new["token"] != view and new["edit_url"].endswith(edit)
    after_old = client.get(f"/api/budgets/{view}").get_json()
    assert after_old == before  # the old snapshot stays
    latest = client.get(f"/api/budgets/{edit}").get_json()
    assert latest["budget"]["snapshot"] == 2 and len(latest["budget"]["snapshots"]) == 2
    fresh = client.get(f"/api/budgets/{new['token']}").get_json()
    # same decision as the pipeline's redecide on the sweep's curves with the new targets
    from webapp import store
    curves = store.get_sweep(store.connect(client.application.config["DATABASE"]), sweep_id)["curves"]
    expected = redecide(curves, {"hero": ClassSpec("hero", 0.9, 0.5), "product": ClassSpec("product", 0.95, 0.9)},
                        current=Setting(85))
    strip = lambda d: {k: v for k, v in d.items() if k not in ("created", "signoffs", "budget")}
    assert strip(fresh) == strip(expected)


@pytest.mark.parametrize(
    "payload, message",
    [
        ({"classes": {"hero": {"width": 100}}}, "widths cannot change without a new sweep; start one from the sample set"),
        ({"classes": {"shoes": {}}}, "unknown class 'shoes' (this set has: product, hero)"),
        ({"target_ssim": 0.9}, "unknown key 'target_ssim' (allowed: choice, classes, current)"),
    ],
)
def test_bad_target_changes(budget, payload, message):
    client, _, _, edit, _ = budget
    r = client.post(f"/api/budgets/{edit}/targets", json=payload)
    assert r.status_code == 400 and r.get_json() == {"error": message}


def test_share_page_is_read_only_and_edit_page_has_links(budget):
    client, _, view, edit, _ = budget
    share = client.get(f"/budgets/{view}").get_data(as_text=True)
    assert "Change targets" not in share and "shared view" in share and "Sign off product" in share
    assert edit not in share  # the owner's token never leaks into the share page
    owner = client.get(f"/budgets/{edit}").get_data(as_text=True)
    assert "Change targets" in owner and f"/budgets/{view}" in owner and f"/budgets/{edit}" in owner


def test_signoff_form_htmx_partial_and_full_page(budget):
    client, _, view, _, _ = budget
    form = {"class": "hero", "name": "Kai", "verdict": "approve", "comment": "crisp"}
    r = client.post(f"/budgets/{view}/signoffs", data=form, headers={"HX-Request": "true"})
    assert r.status_code == 200
    html = r.get_data(as_text=True)
    assert html.lstrip().startswith('<div class="signoff"') and "<strong>Kai</strong>" in html and "crisp" in html
    r = client.post(f"/budgets/{view}/signoffs", data=dict(form, verdict=""), headers={"HX-Request": "true"})
    assert r.status_code == 400
    assert "verdict must be &#39;approve&#39; or &#39;needs work&#39;, got &#39;&#39;" in r.get_data(as_text=True)
    r = client.post(f"/budgets/{view}/signoffs", data=form)
    assert r.status_code == 303 and r.headers["Location"] == f"/budgets/{view}#class-hero"
    page = client.get(f"/budgets/{view}").get_data(as_text=True)
    assert page.count("<strong>Kai</strong>") == 2


def test_page_freeze_and_refreeze(sweep):
    _, client, sweep_id = sweep
    r = client.post(f"/sweeps/{sweep_id}/freeze")
    assert r.status_code == 303
    edit = r.headers["Location"].rsplit("/", 1)[1]
    r = client.post(f"/budgets/{edit}/targets", data={"cls-0": "hero", "t-0": "0.97", "c-0": "0.8"})
    assert r.status_code == 303
    body = client.get(f"/api/budgets/{edit}").get_json()
    hero = [c for c in body["classes"] if c["name"] == "hero"][0]
    assert hero["target_ssim"] == 0.97 and hero["coverage"] == 0.8 and body["budget"]["snapshot"] == 2
    r = client.post(f"/budgets/{edit}/targets", data={"cls-0": "hero", "t-0": "2", "c-0": "0.8"})
    assert r.status_code == 400


def test_downloads_json_and_csv(budget):
    from dct.report import document_to_csv

    client, _, view, _, _ = budget
    doc = {k: v for k, v in client.get(f"/api/budgets/{view}").get_json().items() if k not in ("signoffs", "budget")}
    r = client.get(f"/budgets/{view}/document.json")
    body = r.get_json()
    # the download is the document plus the snapshot's own facts, and a valid budget document
    assert body.pop("budget") == {"snapshot": 1, "frozen": client.get(f"/api/budgets/{view}").get_json()["budget"]["frozen"]}
    assert body == doc and r.headers["Content-Disposition"] == 'attachment; filename="eightfold-budget-1.json"'
    from dct.contract import parse_document

    parse_document(r.get_json())
    r = client.get(f"/budgets/{view}/document.csv")
    assert r.mimetype == "text/csv" and r.get_data(as_text=True) == document_to_csv(doc)


def test_designer_review_through_the_share_link(budget):
    client, _, view, _, _ = budget
    r = client.get(f"/budgets/{view}/review/0")
    assert r.status_code == 200 and "Weakest spots" in r.get_data(as_text=True)
    assert client.get(f"/budgets/{view}/review/0/candidate.jpg").mimetype == "image/jpeg"
    assert client.get("/budgets/not-a-token/review/0").status_code == 404


def test_designer_view_has_thumbnails_of_the_weakest_images_and_plain_labels(budget):
    import re

    client, _, view, _, _ = budget
    html = client.get(f"/budgets/{view}").get_data(as_text=True)
    thumbs = re.findall(rf'<a class="thumb-link" href="/budgets/{view}/review/(\d+)">\s*<img src="/budgets/{view}/review/(\d+)/thumb.png"', html)
    assert thumbs and all(a == b for a, b in thumbs)  # each thumbnail links to its own review
    r = client.get(f"/budgets/{view}/review/{thumbs[0][0]}/thumb.png")
    assert r.status_code == 200 and r.mimetype == "image/png"
    from PIL import Image
    import io as _io

    assert Image.open(_io.BytesIO(r.data)).width <= 96
    # Plain words first, the technical term beside them, and the glossary on the page.
    for words in ("Encoder setting", "Average size", "Images that pass", "Least faithful image", "(worst SSIM)",
                  "What the numbers mean", "Halos and blur at sharp edges"):
        assert words in html
