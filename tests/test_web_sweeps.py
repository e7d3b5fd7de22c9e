"""Background sweeps through the web layer: progress, results, re-decide, sort, expand, review, resume.

One finished sweep (module fixture) serves most tests; the grid is small so it takes well under a
second with ``SWEEP_WORKERS=1`` (in-process runner).
"""

from __future__ import annotations

import io
import time
from pathlib import Path

import numpy as np
import pytest
from PIL import Image
from skimage import data as skdata

from webapp import create_app, store
from webapp.server import load_demo

GRID = {"qualities": [50, 60, 70, 80, 85, 90], "cutoffs": [64, 28], "subsamplings": ["4:4:4", "4:2:0"],
        "coarse_step": 20}


def png_bytes(pixels) -> bytes:
    buf = io.BytesIO()
    Image.fromarray(pixels).save(buf, "PNG")
    return buf.getvalue()


def gps_jpeg(pixels) -> bytes:
    exif = Image.Exif()
    exif[0x010F] = "Fernridge test camera"
    gps = exif.get_ifd(0x8825)
    gps[1], gps[2], gps[3], gps[4] = "N", (47.0, 36.0, 12.5), "E", (8.0, 31.0, 3.25)
    buf = io.BytesIO()
    Image.fromarray(pixels).save(buf, "JPEG", quality=95, exif=exif.tobytes())
    return buf.getvalue()


FILES = [  # crops of scikit-image's bundled sample images
    ("product/astronaut.jpg", gps_jpeg(skdata.astronaut()[100:164, 180:260])),
    ("product/coffee.png", png_bytes(skdata.coffee()[50:114, 60:140])),
    ("hero/chelsea.png", png_bytes(skdata.chelsea()[20:84, 40:120])),
    ("hero/rocket.png", png_bytes(skdata.rocket()[100:164, 100:180])),
    ("hero/broken.jpg", b"\xff\xd8\xff\xe0 not really a jpeg"),
]
REQUEST = {"target_ssim": 0.95, "coverage": 0.9, "classes": {"hero": {"target_ssim": 0.96, "widths": [None, 48]}},
           "current": {"quality": 85, "cutoff": 64, "subsampling": "4:2:0"}}


def make_app(data_dir, **extra):
    return create_app({"TESTING": True, "DATA_DIR": str(data_dir), "SWEEP_WORKERS": 1, "SWEEP_GRID": GRID, **extra})


def upload(client, files=FILES):
    r = client.post("/api/sample-sets", data={"files": [(io.BytesIO(d), n) for n, d in files]},
                    content_type="multipart/form-data")
    assert r.status_code == 201, r.get_data(as_text=True)
    return r.get_json()["id"]


def wait_done(client, sweep_id, timeout=120):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        body = client.get(f"/api/sweeps/{sweep_id}").get_json()
        if body["status"] not in ("queued", "running"):
            return body
        time.sleep(0.05)
    raise AssertionError(f"sweep {sweep_id} did not finish in {timeout} s")


@pytest.fixture(scope="module")
def swept(tmp_path_factory):
    app = make_app(tmp_path_factory.mktemp("sweeps"))
    client = app.test_client()
    set_id = upload(client)
    r = client.post(f"/api/sample-sets/{set_id}/sweeps", json=REQUEST)
    assert r.status_code == 202
    body = wait_done(client, r.get_json()["id"])
    assert body["status"] == "done", body
    yield app, client, set_id, r.get_json()["id"], body
    app.extensions["eightfold_worker"].stop()


def direct_sweep(classes_request=REQUEST):
    """The same sweep by calling the pipeline directly on the uploaded bytes (no web layer)."""
    from dct.grid import Grid
    from dct.pipeline import run_sweep
    from dct.runner import make_runner
    from dct.sampleset import ClassSpec, ImageJob, Rejection
    from dct.tables import Setting

    classes = {
        "product": ClassSpec("product", target_ssim=0.95, coverage=0.9),
        "hero": ClassSpec("hero", target_ssim=0.96, coverage=0.9, widths=(None, 48)),
    }
    jobs = [ImageJob(key=n, class_name=n.split("/")[0], source=d, widths=classes[n.split("/")[0]].widths,
                     background=(255, 255, 255)) for n, d in FILES[:4]]
    grid = Grid(**{k: tuple(v) if isinstance(v, list) else v for k, v in GRID.items()})
    with make_runner(workers=1) as runner:
        return run_sweep(jobs, classes, current=Setting(85, 64, "4:2:0"), grid=grid, runner=runner,
                         rejected=[Rejection("hero/broken.jpg", _decoder_reason(FILES[4][1]))])


def _decoder_reason(data):
    from dct.io import ImageRejected, decode_image

    with pytest.raises(ImageRejected) as exc:
        decode_image(data)
    return str(exc.value)


def without_created(doc):
    return {k: v for k, v in doc.items() if k != "created"}


def test_status_shape_and_progress_counts(swept):
    _, _, _, _, body = swept
    assert set(body) >= {"status", "done", "total", "result"}
    assert body["done"] == body["total"] > 0
    assert body["result"]["schema_version"] == 2


def test_same_numbers_as_calling_the_pipeline(swept):
    _, _, _, _, body = swept
    outcome = direct_sweep()
    assert without_created(body["result"]) == without_created(outcome.document)


def test_upload_rejects_are_listed_in_the_document(swept):
    _, _, _, _, body = swept
    assert {"path": "hero/broken.jpg", "error": _decoder_reason(FILES[4][1])} in body["result"]["rejected"]


def test_finished_image_passes_are_cached_in_sqlite(swept):
    app, client, set_id, _, body = swept
    conn = store.connect(app.config["DATABASE"])
    before = conn.execute("SELECT COUNT(*) FROM result_cache").fetchone()[0]
    assert before == body["total"]  # one entry per finished image pass
    again = client.post(f"/api/sample-sets/{set_id}/sweeps", json=REQUEST).get_json()["id"]
    second = wait_done(client, again)
    assert conn.execute("SELECT COUNT(*) FROM result_cache").fetchone()[0] == before  # all reused
    assert without_created(second["result"]) == without_created(body["result"])


def test_sweep_page_and_live_fragment_show_results(swept):
    _, client, _, sweep_id, body = swept
    page = client.get(f"/sweeps/{sweep_id}").get_data(as_text=True)
    assert "<html" in page and 'id="results-table"' in page and "Freeze budget" in page
    fragment = client.get(f"/sweeps/{sweep_id}/live", headers={"HX-Request": "true"}).get_data(as_text=True)
    assert "<html" not in fragment and 'id="results-table"' in fragment
    assert 'hx-trigger="load delay:1s"' not in fragment  # finished: polling stops
    for entry in body["result"]["classes"]:
        assert f"<th scope=\"row\">{entry['name']}</th>" in page
    assert "<svg" in page  # frontier charts


def test_queued_sweep_polls_and_can_be_cancelled(tmp_path):
    app = make_app(tmp_path / "q", SWEEP_AUTORESUME=False)
    client = app.test_client()
    set_id = upload(client, FILES[:1])
    app.extensions["eightfold_worker"].stop()  # nothing consumes the queue: the sweep stays queued
    sweep_id = client.post(f"/api/sample-sets/{set_id}/sweeps", json={}).get_json()["id"]
    fragment = client.get(f"/sweeps/{sweep_id}/live", headers={"HX-Request": "true"}).get_data(as_text=True)
    assert 'hx-trigger="load delay:1s"' in fragment and 'hx-swap="outerHTML"' in fragment
    assert "Waiting to start" in fragment and "Cancel sweep" in fragment
    r = client.post(f"/sweeps/{sweep_id}/cancel", headers={"HX-Request": "true"})
    assert "Cancelled" in r.get_data(as_text=True)
    assert client.get(f"/api/sweeps/{sweep_id}").get_json()["status"] == "cancelled"


def test_running_sweep_cancels(tmp_path):
    # The full default grid on a few images takes seconds in-process: long enough to cancel mid-way.
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "c"), "SWEEP_WORKERS": 1})
    client = app.test_client()
    set_id = upload(client, FILES[:4])
    sweep_id = client.post(f"/api/sample-sets/{set_id}/sweeps", json={}).get_json()["id"]
    deadline = time.monotonic() + 60
    while client.get(f"/api/sweeps/{sweep_id}").get_json()["done"] < 1 and time.monotonic() < deadline:
        time.sleep(0.02)
    r = client.post(f"/api/sweeps/{sweep_id}/cancel")
    assert r.status_code == 202
    body = wait_done(client, sweep_id)
    assert body["status"] == "cancelled" and body["result"] is None
    app.extensions["eightfold_worker"].stop()


def test_interrupted_sweep_resumes_on_restart(tmp_path):
    first = make_app(tmp_path / "r", SWEEP_AUTORESUME=False)
    client = first.test_client()
    set_id = upload(client, FILES[:2])
    first.extensions["eightfold_worker"].stop()
    sweep_id = client.post(f"/api/sample-sets/{set_id}/sweeps", json={}).get_json()["id"]
    conn = store.connect(first.config["DATABASE"])
    with conn:  # as a crash leaves it: marked running, never finished
        conn.execute("UPDATE sweeps SET status = 'running' WHERE id = ?", (sweep_id,))
    second = make_app(tmp_path / "r")
    body = wait_done(second.test_client(), sweep_id)
    assert body["status"] == "done" and body["done"] == body["total"] > 0
    second.extensions["eightfold_worker"].stop()


def test_redecide_via_htmx_matches_pipeline_redecide(swept):
    from dct.pipeline import redecide
    from dct.sampleset import ClassSpec
    from dct.tables import Setting

    app, client, _, sweep_id, _ = swept
    r = client.post(f"/sweeps/{sweep_id}/decide", data={"class": "product", "target_ssim": "0.99", "coverage": "0.5"},
                    headers={"HX-Request": "true"})
    assert r.status_code == 200
    html = r.get_data(as_text=True)
    assert html.lstrip().startswith('<div id="results-table">') and "<html" not in html
    conn = store.connect(app.config["DATABASE"])
    sweep = store.get_sweep(conn, sweep_id)
    expected = redecide(sweep["curves"], {
        "product": ClassSpec("product", target_ssim=0.99, coverage=0.5),
        "hero": ClassSpec("hero", target_ssim=0.96, coverage=0.9, widths=(None, 48)),
    }, current=Setting(85))
    assert without_created(sweep["document"]) == without_created(expected)
    product = [e for e in expected["classes"] if e["name"] == "product"][0]
    assert f'value="0.99"' in html
    # The charts follow the new decision too, swapped out of band (their target line moved).
    charts = html[html.index('<div class="charts" id="results-charts" hx-swap-oob="true">'):]
    assert "target 0.99" in charts
    if product["setting"]:
        assert f'<td class="num q">{product["setting"]["quality"]}</td>' in html
    # the API reads the same state
    assert client.get(f"/api/sweeps/{sweep_id}").get_json()["result"]["classes"] == sweep["document"]["classes"]
    # and back to the original targets, so other tests see the first decision
    client.post(f"/api/sweeps/{sweep_id}/decide", json={"classes": {"product": {"target_ssim": 0.95, "coverage": 0.9}}})


@pytest.mark.parametrize(
    "form, message",
    [
        ({"class": "product", "target_ssim": "1.2"},
         "Target SSIM for “product”: enter a number above 0 and at most 1, such as 0.95 (you typed “1.2”). "
         "Nothing was changed."),
        ({"class": "nope", "coverage": "0.5"}, "unknown class &#39;nope&#39; (this set has: product, hero)"),
    ],
)
def test_redecide_bad_input_is_400_fragment_with_message(swept, form, message):
    _, client, _, sweep_id, _ = swept
    r = client.post(f"/sweeps/{sweep_id}/decide", data=form, headers={"HX-Request": "true"})
    assert r.status_code == 400
    html = r.get_data(as_text=True)
    assert message in html and "<html" not in html


def test_sort_by_column_server_side(swept):
    _, client, _, sweep_id, body = swept
    r = client.get(f"/sweeps/{sweep_id}/table?sort=total_kb&dir=desc", headers={"HX-Request": "true"})
    html = r.get_data(as_text=True)
    order = sorted(range(len(body["result"]["classes"])),
                   key=lambda i: body["result"]["classes"][i]["estimated_bytes"], reverse=True)
    positions = [html.index(f'id="row-{i}"') for i in order]
    assert positions == sorted(positions)
    assert 'aria-sort="descending"' in html
    # without htmx the same request lands on the full page, sorted
    r = client.get(f"/sweeps/{sweep_id}/table?sort=bogus")
    assert r.status_code == 302 and "sort=class" in r.headers["Location"]


def test_expand_class_into_image_rows(swept):
    _, client, _, sweep_id, body = swept
    doc = body["result"]
    for index, entry in enumerate(doc["classes"]):
        html = client.get(f"/sweeps/{sweep_id}/classes/{index}/images").get_data(as_text=True)
        mine = [im for im in doc["images"] if im["class"] == entry["name"] and im["width"] == entry["width"]]
        assert html.count("<code>") == len(mine) == entry["image_count"]
    assert client.get(f"/sweeps/{sweep_id}/classes/99/images").status_code == 404


def test_review_serves_clean_original_and_real_candidate(swept):
    from dct.io import decode_image
    from dct.tables import quant_tables

    app, client, _, sweep_id, body = swept
    doc = body["result"]
    n = next(i for i, im in enumerate(doc["images"]) if im["path"] == "product/astronaut.jpg")
    page = client.get(f"/sweeps/{sweep_id}/review/{n}")
    assert page.status_code == 200
    html = page.get_data(as_text=True)
    assert "Weakest spots" in html and 'data-action="blink"' in html and "review.js" in html
    assert html.count('class="crop-pair"') == 3
    # each crop's score is the mean of the simulated SSIM map over its window (reference: numpy)
    from dct.simulate import simulate
    from webapp.review import crop_size
    from webapp import imaging

    setting0 = [e for e in doc["classes"] if e["name"] == "product"][0]["setting"]
    pixels = decode_image(FILES[0][1]).pixels
    ssim_map = simulate(pixels, setting0["quality"], setting0["subsampling"], setting0["cutoff"]).ssim_map
    sha = store.connect(app.config["DATABASE"]).execute(
        "SELECT sha256 FROM images WHERE filename = 'product/astronaut.jpg'").fetchone()[0]
    crops = imaging.worst_crops(app.config["DATA_DIR"], sha, None, setting0, size=crop_size(pixels.shape))
    assert len(crops) == 3
    for c in crops:
        window = ssim_map[c["top"]:c["top"] + c["height"], c["left"]:c["left"] + c["width"]]
        assert c["ssim"] == pytest.approx(float(window.mean()), abs=1e-5)
        assert f"window SSIM {c['ssim']:.4f}" in html

    original = client.get(f"/sweeps/{sweep_id}/review/{n}/original.png")
    assert original.mimetype == "image/png"
    served = Image.open(io.BytesIO(original.data))
    assert "exif" not in served.info and len(served.getexif()) == 0 and b"Fernridge" not in original.data
    # the PNG holds exactly the decoded pixels (reference: the decoder itself)
    assert np.array_equal(np.asarray(served), decode_image(FILES[0][1]).pixels)

    candidate = client.get(f"/sweeps/{sweep_id}/review/{n}/candidate.jpg")
    assert candidate.mimetype == "image/jpeg"
    jpeg = Image.open(io.BytesIO(candidate.data))
    assert jpeg.format == "JPEG" and "exif" not in jpeg.info and b"Fernridge" not in candidate.data
    setting = [e for e in doc["classes"] if e["name"] == "product"][0]["setting"]
    luma, chroma = quant_tables(setting["quality"], setting["cutoff"])
    # Pillow reports the file's DQT tables in natural order (reference: libjpeg via Pillow)
    assert list(jpeg.quantization[0]) == luma.ravel().tolist()
    assert list(jpeg.quantization[1]) == chroma.ravel().tolist()

    heat = client.get(f"/sweeps/{sweep_id}/review/{n}/heat.png")
    assert heat.mimetype == "image/png" and Image.open(io.BytesIO(heat.data)).size == served.size
    # rendered bytes are cached on disk beside the blob
    renders = list((Path(app.config["DATA_DIR"]) / "renders").rglob("*.jpg"))
    assert any(p.read_bytes() == candidate.data for p in renders)


def test_review_of_a_resized_width_uses_that_width(swept):
    _, client, _, sweep_id, body = swept
    doc = body["result"]
    n = next(i for i, im in enumerate(doc["images"]) if im["width"] == 48)
    png = Image.open(io.BytesIO(client.get(f"/sweeps/{sweep_id}/review/{n}/original.png").data))
    assert png.size[0] == 48


def test_review_bad_index_is_404(swept):
    _, client, _, sweep_id, _ = swept
    assert client.get(f"/sweeps/{sweep_id}/review/999").status_code == 404


def test_downloads_match_document(swept):
    from dct.report import document_to_csv

    _, client, _, sweep_id, _ = swept
    doc = client.get(f"/api/sweeps/{sweep_id}").get_json()["result"]
    r = client.get(f"/sweeps/{sweep_id}/document.json")
    assert r.get_json() == doc and "attachment" in r.headers["Content-Disposition"]
    r = client.get(f"/sweeps/{sweep_id}/document.csv")
    assert r.get_data(as_text=True) == document_to_csv(doc)


def test_page_form_starts_a_sweep_and_rejects_bad_targets(swept):
    _, client, set_id, _, _ = swept
    form = {"cls-0": "product", "t-0": "0.97", "c-0": "0.9", "w-0": "", "cls-1": "hero", "t-1": "1.5", "c-1": "0.9",
            "w-1": "", "cur_quality": "85", "cur_cutoff": "64", "cur_subsampling": "4:2:0"}
    form.update({"c-0": "90%", "cur_quality": "0"})
    r = client.post(f"/sets/{set_id}/sweeps", data=form)
    assert r.status_code == 400
    html = r.get_data(as_text=True)
    # Every bad box at once, in plain words, listed once, each box marked and keeping what was typed.
    assert "3 boxes need fixing before the sweep can start" in html
    messages = ["Target SSIM for “hero”: enter a number above 0 and at most 1, such as 0.95 (you typed “1.5”).",
                "Coverage for “product”: enter a share above 0 and at most 1, such as 0.9 for 90 % (you typed “90%”).",
                "Quality: enter a whole number from 1 to 100 (you typed “0”)."]
    for m in messages:
        assert html.count(m) == 1
    assert "classes[" not in html and "got &#39;" not in html
    for field, value in (("t-1", "1.5"), ("c-0", "90%"), ("cur_quality", "0")):
        assert f'name="{field}" value="{value}" id="f-{field}" class="invalid" aria-invalid="true"' in html or \
            f'name="{field}" id="f-{field}" class="invalid" aria-invalid="true" aria-describedby="err-{field}" type="number" min="1" max="100" value="{value}"' in html
    assert 'name="t-0" value="0.97" id="f-t-0" inputmode' in html  # a good box is not marked
    form.update({"c-0": "0.9", "cur_quality": "85"})
    form["t-1"] = "0.96"
    form["w-1"] = "48, "
    r = client.post(f"/sets/{set_id}/sweeps", data=form)
    assert r.status_code == 303 and r.headers["Location"].startswith("/sweeps/")
    body = wait_done(client, r.headers["Location"].rsplit("/", 1)[1])
    hero = [e for e in body["result"]["classes"] if e["name"] == "hero"]
    assert [e["width"] for e in hero] == [48] and hero[0]["target_ssim"] == 0.96


def test_demo_loader_is_idempotent(tmp_path):
    folder = tmp_path / "demo"
    for name, data in FILES[:3]:
        (folder / name).parent.mkdir(parents=True, exist_ok=True)
        (folder / name).write_bytes(data)
    (folder / "classes.toml").write_text("# not an image: skipped by the demo loader\n")
    app = make_app(tmp_path / "data")
    first = load_demo(app, folder)
    second = load_demo(app, folder)
    assert first == second
    client = app.test_client()
    body = wait_done(client, first)
    assert body["status"] == "done"
    assert {e["name"] for e in body["result"]["classes"]} == {"product", "hero"}
    app.extensions["eightfold_worker"].stop()


def test_totals_count_classes_without_a_setting_at_the_current_default(swept):
    from webapp.results import totals

    _, client, _, sweep_id, _ = swept
    doc = client.post(f"/api/sweeps/{sweep_id}/decide",
                      json={"classes": {"product": {"target_ssim": 0.9999}}}).get_json()
    try:
        product = [e for e in doc["classes"] if e["name"] == "product"]
        hero = [e for e in doc["classes"] if e["name"] == "hero"]
        assert all(e["setting"] is None for e in product)
        t = totals(doc)
        assert t["undecided"] == ["product"]
        # The undecided class keeps today's default: counted on both sides, it saves nothing, so the
        # headline cannot look bigger than the set's real saving.
        assert t["chosen_bytes"] == sum(e["estimated_bytes"] for e in hero) + sum(e["current_bytes"] for e in product)
        assert t["current_bytes"] == sum(e["current_bytes"] for e in hero + product)
        page = client.get(f"/sweeps/{sweep_id}").get_data(as_text=True)
        assert "No setting reaches the target for: product; counted at the current default, so it saves nothing." in page
    finally:
        client.post(f"/api/sweeps/{sweep_id}/decide", json={"classes": {"product": {"target_ssim": 0.95}}})


def test_serve_demo_prints_the_live_page_and_starts_waitress(tmp_path, monkeypatch, capsys):
    import waitress

    import webapp.server as server

    folder = tmp_path / "demo"
    for name, data in FILES[:2]:
        (folder / name).parent.mkdir(parents=True, exist_ok=True)
        (folder / name).write_bytes(data)
    monkeypatch.setattr(server, "DEMO_DIR", folder)
    calls = []

    class FakeServer:  # stands in for waitress's bound server: records, never listens
        def __init__(self, app, **kw):
            calls.append((app, kw))

        def run(self):
            calls.append("run")

        def close(self):
            calls.append("close")

    monkeypatch.setattr(waitress, "create_server", FakeServer)
    server.serve(port=8123, data_dir=tmp_path / "data", demo=True)
    (app, kw), *rest = calls
    from webapp.server import WAITRESS_LIMITS

    assert kw == {"host": "127.0.0.1", "port": 8123, "threads": 12,
                  "max_request_body_size": app.config["MAX_CONTENT_LENGTH"], **WAITRESS_LIMITS}
    assert rest == ["run", "close"]
    err = capsys.readouterr().err
    sweep_id = err.split("/sweeps/")[1].split()[0]
    assert f"http://localhost:8123/sweeps/{sweep_id}" in err
    assert app.config["DATA_DIR"] == str(tmp_path / "data")
    assert app.test_client().get(f"/api/sweeps/{sweep_id}").status_code == 200
    app.extensions["eightfold_worker"].stop()  # cancels the (full-grid) demo sweep


def test_time_left_leaves_out_passes_reused_from_the_cache(tmp_path):
    # 10 of 20 passes done in 10 s, 6 of them straight from the cache: the 4 computed ones set the
    # rate (2.5 s each), so the 10 left take 25 s, not the 10 s a plain done/elapsed rate would say.
    from webapp.sweeps import progress_info
    from webapp.worker import get_worker

    app = make_app(tmp_path / "eta", SWEEP_AUTORESUME=False)
    with app.app_context():
        db = store.get_db()
        sweep = {"id": "s1", "status": "running", "started": time.time() - 10, "done": 10, "total": 20}
        assert progress_info(db, sweep)["left"] == pytest.approx(10, rel=0.05)
        get_worker()._reused["s1"] = 6
        assert progress_info(db, sweep)["left"] == pytest.approx(25, rel=0.05)
        get_worker()._reused["s1"] = 10  # nothing computed yet: no estimate rather than a wrong one
        assert progress_info(db, sweep)["left"] is None
