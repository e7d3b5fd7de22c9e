"""The review page: which check an image fails and where, the pager within its class, marks at Fit."""

from __future__ import annotations

import io
import time

import numpy as np
import pytest
from PIL import Image, ImageDraw, ImageFont

from webapp import create_app, store

GRID = {"qualities": [20, 40, 85], "cutoffs": [64, 20], "subsamplings": ["4:4:4"], "coarse_step": 20}


def png_bytes(pixels) -> bytes:
    buf = io.BytesIO()
    Image.fromarray(pixels).save(buf, "PNG")
    return buf.getvalue()


def text_page() -> np.ndarray:
    im = Image.new("RGB", (192, 96), (255, 255, 255))
    ImageDraw.Draw(im).text((10, 24), "Fern 42", fill=(20, 20, 20), font=ImageFont.load_default(size=30))
    return np.asarray(im)


def grain() -> np.ndarray:
    rng = np.random.default_rng(3)
    return np.clip(128 + rng.normal(0, 12, (96, 192, 1)), 0, 255).repeat(3, axis=2).astype(np.uint8)


FILES = [
    ("screens/a-text.png", png_bytes(text_page())),
    ("screens/b-grain.png", png_bytes(grain())),
    ("photos/grain.png", png_bytes(grain()[:, ::-1].copy())),
]


@pytest.fixture(scope="module")
def swept(tmp_path_factory):
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path_factory.mktemp("review")), "SWEEP_WORKERS": 1,
                      "SWEEP_GRID": GRID})
    client = app.test_client()
    r = client.post("/api/sample-sets", data={"files": [(io.BytesIO(d), n) for n, d in FILES]},
                    content_type="multipart/form-data")
    set_id = r.get_json()["id"]
    # Coverage 0.5 with a low target: the grain alone decides, so the text image fails at the
    # chosen (cheapest) setting, on the visible-damage check.
    body = {"classes": {"screens": {"target_ssim": 0.3, "coverage": 0.5}, "photos": {"target_ssim": 0.3}},
            "current": {"quality": 85, "cutoff": 64, "subsampling": "4:4:4"}}
    sweep_id = client.post(f"/api/sample-sets/{set_id}/sweeps", json=body).get_json()["id"]
    deadline = time.monotonic() + 300
    while client.get(f"/api/sweeps/{sweep_id}").get_json()["status"] != "done":
        assert time.monotonic() < deadline
        time.sleep(0.05)
    with app.app_context():
        doc = store.get_sweep(store.get_db(), sweep_id)["document"]
    yield app, client, sweep_id, doc
    app.extensions["eightfold_worker"].stop()


def test_review_says_which_check_fails_and_where(swept):
    _, client, sweep_id, doc = swept
    n, image = next((i, im) for i, im in enumerate(doc["images"]) if im["path"].endswith("a-text.png"))
    assert image["damage_fails"] == ["edge"] and not image["meets"]
    html = client.get(f"/sweeps/{sweep_id}/review/{n}").get_data(as_text=True)
    assert "✗ Fails: edge SSIM" in html and "halos or blur at sharp edges" in html
    assert "Halos or blur at sharp edges: worst around x" in html
    assert html.count('class="spot-mark damage"') == 2  # in both panes
    # The spot is where the text is (rows 24..60 of the page).
    where = html.split("worst around x", 1)[1].split("px", 1)[0]
    top, bottom = (int(v) for v in where.split("y", 1)[1].strip().split("–"))
    assert top < 60 and bottom > 24


def test_pager_stays_within_the_class(swept):
    _, client, sweep_id, doc = swept
    screens = [i for i, im in enumerate(doc["images"]) if im["class"] == "screens"]
    photos = [i for i, im in enumerate(doc["images"]) if im["class"] == "photos"]
    assert len(screens) == 2 and len(photos) == 1
    html = client.get(f"/sweeps/{sweep_id}/review/{screens[0]}").get_data(as_text=True)
    assert "image 1 of 2 in this class" in html
    assert f'href="/sweeps/{sweep_id}/review/{screens[1]}" rel="next"' in html and 'rel="prev"' not in html
    html = client.get(f"/sweeps/{sweep_id}/review/{photos[0]}").get_data(as_text=True)
    assert "image 1 of 1 in this class" in html and 'rel="next"' not in html and 'rel="prev"' not in html
