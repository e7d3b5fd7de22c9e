"""What the pages explain: number formats, why a setting was chosen (rejected cheaper settings, the
current default), per-image failed checks, the review page's back links, marks and heat key, the
budget overview and its live status badges, file sizes on the set page.

One small finished sweep (module fixture) with two classes; the grid is small so it takes seconds.
"""

from __future__ import annotations

import io
import math
import re
import time

import numpy as np
import pytest
from PIL import Image
from skimage import data as skdata

from webapp import create_app, imaging, results, store, views

GRID = {"qualities": [30, 50, 70, 85, 90], "cutoffs": [64, 28], "subsamplings": ["4:4:4", "4:2:0"],
        "coarse_step": 20}


def png_bytes(pixels) -> bytes:
    buf = io.BytesIO()
    Image.fromarray(pixels).save(buf, "PNG")
    return buf.getvalue()


FILES = [  # crops of scikit-image's bundled sample images
    ("product/astronaut.png", png_bytes(skdata.astronaut()[100:164, 180:260])),
    ("product/coffee.png", png_bytes(skdata.coffee()[50:114, 60:140])),
    ("product/chelsea.png", png_bytes(skdata.chelsea()[20:84, 40:120])),
    ("hero/rocket.png", png_bytes(skdata.rocket()[100:164, 100:180])),
    ("hero/text.png", png_bytes(skdata.text()[0:64, 0:96])),
]


@pytest.fixture(scope="module")
def swept(tmp_path_factory):
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path_factory.mktemp("explain")), "SWEEP_WORKERS": 1,
                      "SWEEP_GRID": GRID})
    client = app.test_client()
    r = client.post("/api/sample-sets", data={"files": [(io.BytesIO(d), n) for n, d in FILES]},
                    content_type="multipart/form-data")
    set_id = r.get_json()["id"]
    body = {"classes": {"product": {"target_ssim": 0.97, "coverage": 0.6}, "hero": {"target_ssim": 0.95}},
            "current": {"quality": 85, "cutoff": 64, "subsampling": "4:2:0"}}
    sweep_id = client.post(f"/api/sample-sets/{set_id}/sweeps", json=body).get_json()["id"]
    deadline = time.monotonic() + 300
    while client.get(f"/api/sweeps/{sweep_id}").get_json()["status"] != "done":
        assert time.monotonic() < deadline
        time.sleep(0.05)
    yield app, client, set_id, sweep_id
    app.extensions["eightfold_worker"].stop()


def stored(app, sweep_id):
    with app.app_context():
        return store.get_sweep(store.get_db(), sweep_id)


# --- number formats ---

def test_kb_is_1000_bytes_with_one_decimal():
    # SI prefix: kilo = 1000 (BIPM, The International System of Units, 9th ed., table 7)
    assert views.kb(1234) == "1.2" and views.kb(1_009_800) == "1,009.8" and views.kb(None) == "–"
    assert views.kb_signed(-92_500) == "\u221292.5" and views.kb_signed(106_800) == "+106.8"
    assert views.kb_signed(40) == "0.0"  # rounds to nothing: no sign
    assert views.pct(-0.111, 1) == "\u221211.1%" and views.pct(0.9) == "90%"
    assert views.ssim(0.95) == "0.9500"


def test_setting_label_reads_like_the_chart_labels():
    from webapp.charts import setting_label as chart_label

    s = {"quality": 62, "cutoff": 28, "subsampling": "4:2:0"}
    assert views.setting_label(s) == chart_label(s) == "q62 \u00b7 k28 \u00b7 4:2:0"
    words = views.setting_words(s)
    assert "quality factor 62" in words and "first 28 of 64 zigzag coefficients" in words and "4:2:0" in words
    assert "all 64 DCT coefficients" in views.setting_words({"quality": 85, "cutoff": 64, "subsampling": "4:4:4"})


# --- which checks an image fails ---

def test_image_failures_hand_worked():
    entry = {"target_ssim": 0.95, "chroma_floor": 0.9, "local_floor": 0.8}
    image = {"ssim": 0.949, "ssim_cb": 0.95, "ssim_cr": 0.89, "ssim_local": 0.85}
    assert results.image_failures(entry, image) == ["SSIM < 0.95", "chroma < 0.9"]
    assert results.image_failures(dict(entry, local_floor=0.0), dict(image, ssim_local=0.1)) == \
        ["SSIM < 0.95", "chroma < 0.9"]  # a floor of 0 turns the local check off
    gray = {"ssim": 0.96, "ssim_cb": None, "ssim_cr": None, "ssim_local": 0.7}
    assert results.image_failures(entry, gray) == ["local < 0.8"]


def test_image_failures_agree_with_the_documents_meets_flag(swept):
    app, _, _, sweep_id = swept
    doc = stored(app, sweep_id)["document"]
    for entry in doc["classes"]:
        for _, im in results.images_of(doc, entry):
            assert (results.image_failures(entry, im) == []) == bool(im["meets"]), im["path"]


# --- why not cheaper ---

def raw_share(curves, entry, setting):
    """Share of a class's images passing at `setting`, counted straight from the stored curve dicts."""
    passing = total = 0
    for image in curves["images"]:
        if image["class"] != entry["name"] or image["error"]:
            continue
        for curve in image["curves"]:
            if curve["width"] != entry["width"]:
                continue
            p = next(p for p in curve["points"]
                     if (p["quality"], p["cutoff"], p["subsampling"]) ==
                     (setting["quality"], setting["cutoff"], setting["subsampling"]))
            ok = p["ssim"] >= entry["target_ssim"] and p["ssim_local"] >= entry["local_floor"]
            if p["ssim_cb"] is not None:
                ok = ok and min(p["ssim_cb"], p["ssim_cr"]) >= entry["chroma_floor"]
            passing += ok
            total += 1
    return passing / total


def test_rejected_settings_are_cheaper_and_really_fail(swept):
    app, _, _, sweep_id = swept
    sweep = stored(app, sweep_id)
    curves, doc = sweep["curves"], sweep["document"]
    listed = 0
    for entry in doc["classes"]:
        why = results.rejections(curves, sweep["params"], entry)
        assert why is not None
        n = entry["image_count"]
        assert why["checks"]["need"] == math.ceil(entry["coverage"] * n - 1e-9)
        assert why["checks"]["local"] == entry["local_floor"] and why["checks"]["chroma"] == entry["chroma_floor"]
        if entry["setting"]:  # the nearest cheaper misses first
            byte_list = [r["bytes"] for r in why["cheaper"]]
            assert byte_list == sorted(byte_list, reverse=True)
        else:  # nothing qualifies: the closest misses first
            shares = [r["share"] for r in why["cheaper"]]
            assert shares == sorted(shares, reverse=True)
        listed += len(why["cheaper"])
        for r in why["cheaper"]:
            if entry["setting"]:
                assert r["bytes"] < entry["estimated_bytes"]
            share = raw_share(curves, entry, r["setting"])
            assert r["share"] == pytest.approx(share) and share < entry["coverage"]
            assert not r["passes"]
        cur = why["current"]
        assert cur["setting"] == doc["current"]
        assert cur["share"] == pytest.approx(raw_share(curves, entry, doc["current"]))
        assert cur["bytes"] == entry["current_bytes"]
    assert listed > 0


def test_nothing_qualifies_lists_the_closest_misses(swept):
    app, _, _, sweep_id = swept
    sweep = stored(app, sweep_id)
    entry = dict(next(e for e in sweep["document"]["classes"] if e["name"] == "hero"),
                 target_ssim=0.9999, setting=None, estimated_bytes=None)
    why = results.rejections(sweep["curves"], sweep["params"], entry)
    shares = [r["share"] for r in why["cheaper"]]
    assert shares == sorted(shares, reverse=True) and all(not r["passes"] for r in why["cheaper"])


def test_rejections_never_raise():
    assert results.rejections(None, {}, {"name": "x"}) is None
    assert results.rejections({"images": [{"broken": True}]}, {}, {"name": "x", "target_ssim": 0.9,
                                                                     "coverage": 0.9}) is None


def test_expanded_class_explains_the_rule_and_failures(swept):
    app, client, _, sweep_id = swept
    doc = stored(app, sweep_id)["document"]
    i = next(i for i, e in enumerate(doc["classes"]) if e["name"] == "product")
    html = client.get(f"/sweeps/{sweep_id}/classes/{i}/images").get_data(as_text=True)
    assert "An image <strong>passes</strong> when its SSIM ≥ 0.97" in html
    assert "(here 2 of 3 images)" in html  # ceil(0.6 * 3) = 2
    assert "Current default" in html and "q85 · k64 · 4:2:0" in html
    if doc["classes"][i]["setting"] is None:
        assert "No setting qualifies; the closest misses" in html
    else:
        assert ("Cheaper settings that were rejected" in html) or ("cheapest one evaluated" in html)


def test_results_table_shows_saved_kb_and_glossary(swept):
    app, client, _, sweep_id = swept
    doc = stored(app, sweep_id)["document"]
    html = client.get(f"/sweeps/{sweep_id}").get_data(as_text=True)
    assert any(e["setting"] for e in doc["classes"])
    for e in doc["classes"]:
        if e["setting"]:
            saved = e["current_bytes"] - e["estimated_bytes"]
            assert views.saving(saved, e["savings_vs_current"]) in html
            assert ("saves " if saved > 0 else "costs ") in views.saving(saved, e["savings_vs_current"])
    assert "What the numbers mean" in html and "(local floor)" in html and "(cutoff, k)" in html
    assert "Halos and blur at sharp edges" in html and "(edge SSIM)" in html


# --- review page ---

def test_review_page_back_link_marks_heat_key_and_real_size(swept):
    app, client, _, sweep_id = swept
    doc = stored(app, sweep_id)["document"]
    n = next(i for i, im in enumerate(doc["images"]) if im["class"] == "hero")
    html = client.get(f"/sweeps/{sweep_id}/review/{n}").get_data(as_text=True)
    assert f'id="back" href="/sweeps/{sweep_id}"' in html
    assert html.count('class="spot-mark"') == 2 * html.count('class="crop-pair"') == 6  # marked in both panes
    assert 'id="heat-key"' in html and "<svg" in html.split('id="heat-key"', 1)[1].split("</div>", 1)[0]
    jpeg = client.get(f"/sweeps/{sweep_id}/review/{n}/candidate.jpg").data
    assert f"{views.kb(len(jpeg))} KB</dd>" in html
    for key in ("data-zoom=\"fit\"", "data-zoom=\"1\"", "data-zoom=\"2\"", 'data-action="spot"', 'data-action="marks"'):
        assert key in html


def test_heat_scale_follows_the_image_so_texture_is_not_all_red():
    from webapp.heatmap import heat_rgba

    rng = np.random.default_rng(0)
    texture = np.clip(rng.normal(0.8, 0.05, (64, 64)), -1, 1)  # smoothed grain: SSIM ~0.8 everywhere
    high, low = imaging.heat_scale(texture, 0.95)
    assert high == round(float(np.median(texture)), 2) and low <= high - 0.1
    alpha = heat_rgba(texture, low=low, high=high)[..., 3]
    assert (alpha > 0).mean() <= 0.55  # at most about half the picture is coloured
    # A text page: paper is intact (SSIM 1), the glyphs' neighbourhood is damaged.
    page = np.ones((64, 64))
    page[20:30, 10:50] = 0.6
    assert imaging.heat_scale(page, 0.95) == (0.95, 0.6)
    assert imaging.heat_scale(page, None)[0] == 0.95


def test_heat_png_tolerates_float_rounding_above_one():
    from webapp.heatmap import ssim_heatmap_png

    # SSIM is bounded by 1 (Wang et al. 2004, its "boundedness" property; from memory); a float32 map
    # of flat areas may overshoot by rounding
    over = np.array([[0.2, 1.0002], [0.95, 1.0]], dtype=np.float32)
    assert imaging.heat_png_from_map(over, low=0.9) == ssim_heatmap_png(np.clip(over, -1, 1), low=0.9,
                                                                         max_alpha=imaging.HEAT_MAX_ALPHA)
    with pytest.raises(ValueError):
        ssim_heatmap_png(over, low=0.9)  # what the clip protects the page from


def test_heat_png_uses_the_class_target(swept):
    from webapp.heatmap import ssim_heatmap_png

    app, client, _, sweep_id = swept
    doc = stored(app, sweep_id)["document"]
    n, im = next((i, im) for i, im in enumerate(doc["images"]) if im["class"] == "product")
    entry = results.find_entry(doc, "product", im["width"])
    sha = store.connect(app.config["DATABASE"]).execute(
        "SELECT sha256 FROM images WHERE filename = ?", (im["path"],)).fetchone()[0]
    setting = entry["setting"] or doc["current"]  # an undecided class is reviewed at the current default
    ssim_map = imaging.ssim_map(app.config["DATA_DIR"], sha, im["width"], setting)
    heat = client.get(f"/sweeps/{sweep_id}/review/{n}/heat.png").data
    high, low = imaging.heat_scale(ssim_map, 0.97)
    assert high <= 0.97
    assert heat == ssim_heatmap_png(ssim_map, low=low, high=high, max_alpha=imaging.HEAT_MAX_ALPHA)
    html = client.get(f"/sweeps/{sweep_id}/review/{n}").get_data(as_text=True)
    key = html.split('id="heat-key"', 1)[1].split("</div>", 1)[0]
    # The key shows the same scale as the overlay, and its words match its colours.
    assert f"clear at SSIM {high:.2f} or higher" in key and f"darkest at SSIM {low:.2f} or lower" in key
    assert f"full brick red at {low:.2f} or below" in key and "Darker = lower" not in key


def test_budget_review_goes_back_to_the_class_card(swept):
    _, client, _, sweep_id = swept
    view = client.post(f"/api/sweeps/{sweep_id}/freeze").get_json()["token"]
    html = client.get(f"/budgets/{view}/review/0").get_data(as_text=True)
    assert re.search(rf'id="back" href="/budgets/{view}#class-\w+"', html)
    assert f"/sweeps/{sweep_id}" not in html  # a share link never leads to the owner's sweep


# --- budget page ---

def test_budget_overview_and_live_status_badges(swept):
    _, client, _, sweep_id = swept
    body = client.post(f"/api/sweeps/{sweep_id}/freeze").get_json()
    view, edit = body["token"], body["edit_url"].rsplit("/", 1)[1]
    share = client.get(f"/budgets/{view}").get_data(as_text=True)
    assert share.count("waiting for sign-off") == 4  # 2 classes x (overview + heading)
    assert f"/sweeps/{sweep_id}" not in share and edit not in share
    owner = client.get(f"/budgets/{edit}").get_data(as_text=True)
    assert f'href="/sweeps/{sweep_id}"' in owner and 'data-copy="share-url"' in owner
    r = client.post(f"/budgets/{view}/signoffs", headers={"HX-Request": "true"},
                    data={"class": "hero", "name": "Ana", "verdict": "approve", "comment": ""})
    html = r.get_data(as_text=True)
    index = [e["name"] for e in client.get(f"/api/sweeps/{sweep_id}").get_json()["result"]["classes"]].index("hero")
    badge = re.search(r'<span class="status status-of-(\d+) status-done"[^>]*hx-swap-oob="outerHTML:\.status-of-\1"'
                      r'>approved</span>', html)
    assert badge and int(badge.group(1)) == index
    r = client.post(f"/budgets/{view}/signoffs", headers={"HX-Request": "true"},
                    data={"class": "hero", "name": "Bo", "verdict": "needs work", "comment": "banding"})
    assert re.search(r'status-failed"[^>]*title="Ana: approve; Bo: needs work"[^>]*>needs work</span>',
                     r.get_data(as_text=True))


# --- sample set and home pages ---

def test_set_page_shows_file_sizes_and_floor_defaults(swept):
    from dct.budget import DEFAULT_LOCAL_FLOOR

    _, client, set_id, _ = swept
    html = client.get(f"/sets/{set_id}").get_data(as_text=True)
    for _, data in FILES:
        assert f'<td class="num">{views.kb(len(data))}</td>' in html
    assert f'placeholder="{DEFAULT_LOCAL_FLOOR:.2f}"' in html and 'placeholder="= target"' in html


def test_home_links_the_latest_sweep(swept):
    _, client, _, sweep_id = swept
    html = client.get("/").get_data(as_text=True)
    assert f'<a href="/sweeps/{sweep_id}">results</a>' in html
