"""Upload, the store (SQLite + content-addressed blobs), class editing, deletion, metadata care."""

from __future__ import annotations

import hashlib
import io
import sqlite3

import numpy as np
import pytest
from PIL import Image
from skimage import data as skdata

from webapp import create_app, store


@pytest.fixture
def app(tmp_path):
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"), "SWEEP_WORKERS": 1})
    yield app
    app.extensions["eightfold_worker"].stop()


@pytest.fixture
def client(app):
    return app.test_client()


def png_bytes(pixels) -> bytes:
    buf = io.BytesIO()
    Image.fromarray(pixels).save(buf, "PNG")
    return buf.getvalue()


def jpeg_with_gps(pixels) -> bytes:
    """A JPEG carrying EXIF with a GPS IFD (tag 0x8825), made with Pillow's own EXIF writer."""
    exif = Image.Exif()
    exif[0x010F] = "Fernridge test camera"  # Make
    gps = exif.get_ifd(0x8825)
    gps[1] = "N"
    gps[2] = (47.0, 36.0, 12.5)
    gps[3] = "E"
    gps[4] = (8.0, 31.0, 3.25)
    buf = io.BytesIO()
    Image.fromarray(pixels).save(buf, "JPEG", quality=90, exif=exif.tobytes())
    return buf.getvalue()


ASTRO = skdata.astronaut()[100:164, 180:260]  # 64 x 80 crop of scikit-image's sample
COFFEE = skdata.coffee()[50:98, 60:124]  # 48 x 64


def upload(client, files):
    return client.post(
        "/api/sample-sets",
        data={"files": [(io.BytesIO(data), name) for name, data in files]},
        content_type="multipart/form-data",
    )


def test_api_upload_takes_class_from_folder_and_reports_rejects(client):
    from dct.io import ImageRejected, decode_image

    junk = b"this is not an image at all"
    with pytest.raises(ImageRejected) as decoder:
        decode_image(junk)
    r = upload(client, [("product/astro.png", png_bytes(ASTRO)), ("coffee.png", png_bytes(COFFEE)),
                        ("hero/notes.jpg", junk)])
    assert r.status_code == 201
    body = r.get_json()
    assert set(body) == {"id", "images", "rejected"}
    # Sizes as Pillow reads them (width x height of the uploaded arrays).
    assert body["images"] == [
        {"filename": "product/astro.png", "class": "product", "width": 80, "height": 64},
        {"filename": "coffee.png", "class": "unclassified", "width": 64, "height": 48},
    ]
    # The reason is the decoder's own message for that file.
    assert body["rejected"] == [{"filename": "hero/notes.jpg", "error": str(decoder.value)}]


def test_class_is_the_part_before_the_first_slash(client):
    r = upload(client, [("lifestyle/summer/tent.png", png_bytes(ASTRO)), ("\\banner\\wide.png", png_bytes(COFFEE))])
    images = r.get_json()["images"]
    assert [(i["filename"], i["class"]) for i in images] == [
        ("lifestyle/summer/tent.png", "lifestyle"), ("banner/wide.png", "banner")]


@pytest.mark.parametrize(
    "files, status, message",
    [
        ([], 400, "no files: send images as multipart form data in the 'files' field"),
        ([("a.jpg", b"junk"), ("b.png", b"")], 422, "none of the 2 files could be read as an image"),
    ],
)
def test_api_upload_errors(client, files, status, message):
    r = upload(client, files)
    assert r.status_code == status
    assert r.get_json()["error"] == message


def test_duplicate_and_empty_files_are_rejected_not_fatal(client):
    r = upload(client, [("p/a.png", png_bytes(ASTRO)), ("p/a.png", png_bytes(COFFEE)), ("p/e.png", b"")])
    body = r.get_json()
    assert [i["filename"] for i in body["images"]] == ["p/a.png"]
    assert body["rejected"] == [
        {"filename": "p/a.png", "error": "duplicate file name in this upload"},
        {"filename": "p/e.png", "error": "empty file"},
    ]


def test_blobs_are_content_addressed_by_sha256(app, client):
    data = png_bytes(ASTRO)
    upload(client, [("product/a.png", data)])
    sha = hashlib.sha256(data).hexdigest()  # reference: hashlib over the uploaded bytes
    path = store.blob_path(app.config["DATA_DIR"], sha)
    assert path.parent.name == sha[:2] and path.name == f"{sha}.bin"
    assert path.read_bytes() == data


def test_database_is_wal_and_versioned(app):
    conn = sqlite3.connect(app.config["DATABASE"])
    try:
        assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert conn.execute("PRAGMA user_version").fetchone()[0] == store.SCHEMA_VERSION == 2
    finally:
        conn.close()


def test_sets_survive_a_restart(tmp_path):
    config = {"TESTING": True, "DATA_DIR": str(tmp_path / "d")}
    first = create_app(config)
    set_id = upload(first.test_client(), [("product/a.png", png_bytes(ASTRO))]).get_json()["id"]
    first.extensions["eightfold_worker"].stop()
    second = create_app(config)
    r = second.test_client().get(f"/api/sample-sets/{set_id}")
    assert r.status_code == 200
    assert r.get_json()["images"][0]["filename"] == "product/a.png"
    second.extensions["eightfold_worker"].stop()


def test_delete_removes_rows_and_unshared_blobs(app, client):
    shared, own = png_bytes(ASTRO), png_bytes(COFFEE)
    first = upload(client, [("p/a.png", shared), ("p/b.png", own)]).get_json()["id"]
    second = upload(client, [("q/a.png", shared)]).get_json()["id"]
    root = app.config["DATA_DIR"]
    shared_path = store.blob_path(root, hashlib.sha256(shared).hexdigest())
    own_path = store.blob_path(root, hashlib.sha256(own).hexdigest())
    # a derived render of the own blob must go with it
    page = client.get(f"/sets/{first}").get_data(as_text=True)
    assert "thumb.png" in page
    image_id = store.connect(app.config["DATABASE"]).execute(
        "SELECT id FROM images WHERE set_id = ? AND filename = 'p/b.png'", (first,)).fetchone()[0]
    assert client.get(f"/sets/{first}/images/{image_id}/thumb.png").status_code == 200
    renders = list((own_path.parent.parent.parent / "renders").rglob(f"{own_path.stem}-*"))
    assert renders

    r = client.delete(f"/api/sample-sets/{first}")
    assert r.status_code == 200 and r.get_json() == {"deleted": first}
    assert client.get(f"/api/sample-sets/{first}").status_code == 404
    assert not own_path.exists() and not any(p.exists() for p in renders)
    assert shared_path.exists()  # still used by the second set
    client.delete(f"/api/sample-sets/{second}")
    assert not shared_path.exists()
    r = client.delete(f"/api/sample-sets/{first}")
    assert r.status_code == 404 and r.get_json() == {"error": f"no sample set {first!r}"}


def test_page_delete_redirects_home_with_notice(client):
    set_id = upload(client, [("p/a.png", png_bytes(ASTRO))]).get_json()["id"]
    r = client.post(f"/sets/{set_id}/delete")
    assert r.status_code == 303 and r.headers["Location"] == "/"
    home = client.get("/").get_data(as_text=True)
    assert "Deleted sample set" in home
    assert client.get(f"/sets/{set_id}").status_code == 404


def test_served_thumbnail_has_no_exif_even_when_upload_had_gps(app, client):
    upload_bytes = jpeg_with_gps(ASTRO)
    assert Image.open(io.BytesIO(upload_bytes)).getexif().get_ifd(0x8825)  # the upload really carries GPS
    set_id = upload(client, [("p/gps.jpg", upload_bytes)]).get_json()["id"]
    image_id = store.connect(app.config["DATABASE"]).execute(
        "SELECT id FROM images WHERE set_id = ?", (set_id,)).fetchone()[0]
    r = client.get(f"/sets/{set_id}/images/{image_id}/thumb.png")
    assert r.mimetype == "image/png"
    served = Image.open(io.BytesIO(r.data))
    assert "exif" not in served.info and len(served.getexif()) == 0
    assert b"eXIf" not in r.data and b"Fernridge test camera" not in r.data


def test_upload_page_post_redirects_to_set_page(client):
    r = client.post("/sets", data={"files": [(io.BytesIO(png_bytes(ASTRO)), "product/a.png"),
                                             (io.BytesIO(b"junk"), "product/bad.jpg")]},
                    content_type="multipart/form-data")
    assert r.status_code == 303
    page = client.get(r.headers["Location"]).get_data(as_text=True)
    assert "product/a.png" in page and "product/bad.jpg" in page
    assert 'name="cls-0" value="product"' in page


@pytest.mark.parametrize(
    "files, status, message",
    [
        ([], 400, "No files arrived: choose images or a folder first."),
        ([("x.jpg", b"junk")], 422, "None of the files could be read as an image."),
    ],
)
def test_upload_page_errors(client, files, status, message):
    r = client.post("/sets", data={"files": [(io.BytesIO(d), n) for n, d in files]},
                    content_type="multipart/form-data")
    assert r.status_code == status
    assert message in r.get_data(as_text=True)


def test_home_lists_sets_and_has_folder_and_file_inputs(client):
    upload(client, [("product/a.png", png_bytes(ASTRO))])
    page = client.get("/").get_data(as_text=True)
    assert "1 image in product" in page
    assert "webkitdirectory" in page and 'type="file" name="files" multiple' in page
    assert "htmx-2.0.11.min.js" in page and "//unpkg" not in page and "cdn" not in page.lower()


def test_editing_a_class_returns_the_targets_fragment_for_htmx(app, client):
    set_id = upload(client, [("product/a.png", png_bytes(ASTRO)), ("product/b.png", png_bytes(COFFEE))]).get_json()["id"]
    conn = store.connect(app.config["DATABASE"])
    ids = [r[0] for r in conn.execute("SELECT id FROM images WHERE set_id = ? ORDER BY position", (set_id,))]
    form = {f"class-{ids[0]}": "product", f"class-{ids[1]}": "hero", "cls-0": "product", "t-0": "0.97", "c-0": "0.8"}
    r = client.post(f"/sets/{set_id}/classes", data=form, headers={"HX-Request": "true"})
    assert r.status_code == 200
    html = r.get_data(as_text=True)
    assert html.lstrip().startswith('<div id="class-targets">') and "<html" not in html
    # the posted target for "product" is kept, the new class "hero" gets the defaults
    assert 'name="t-0" value="0.97"' in html and 'value="hero"' in html and 'name="t-1" value="0.95"' in html
    assert client.get(f"/api/sample-sets/{set_id}").get_json()["classes"] == ["product", "hero"]
    # without htmx: back to the page
    r = client.post(f"/sets/{set_id}/classes", data=form)
    assert r.status_code == 303 and r.headers["Location"] == f"/sets/{set_id}"


@pytest.mark.parametrize(
    "value, message",
    [
        ("", "class must be a non-empty name, got ''"),
        ("a/b", "class must be at most 80 characters without '/' or control characters, got 'a/b'"),
    ],
)
def test_bad_class_name_is_a_400_with_message(app, client, value, message):
    set_id = upload(client, [("product/a.png", png_bytes(ASTRO))]).get_json()["id"]
    image_id = store.connect(app.config["DATABASE"]).execute(
        "SELECT id FROM images WHERE set_id = ?", (set_id,)).fetchone()[0]
    r = client.post(f"/sets/{set_id}/classes", data={f"class-{image_id}": value}, headers={"HX-Request": "true"})
    assert r.status_code == 400
    assert message.replace("'", "&#39;") in r.get_data(as_text=True)


def test_unknown_pages_are_404(client):
    assert client.get("/sets/nope").status_code == 404
    r = client.get("/api/sweeps/nope")
    assert r.status_code == 404 and r.get_json() == {"error": "no sweep 'nope'"}
    r = client.get("/api/no-such-route")
    assert r.status_code == 404 and "error" in r.get_json()


def test_too_large_upload_is_a_413_json_error(tmp_path):
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "d"), "MAX_CONTENT_LENGTH": 1024 * 1024})
    r = upload(app.test_client(), [("a.png", bytes(2 * 1024 * 1024))])
    assert r.status_code == 413
    assert r.get_json() == {"error": "upload too large: the limit is 1 MB per request"}


def test_secret_key_is_random_per_data_dir_and_survives_restart(tmp_path):
    from webapp import create_app

    a = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "a"), "SWEEP_AUTORESUME": False})
    again = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "a"), "SWEEP_AUTORESUME": False})
    b = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "b"), "SWEEP_AUTORESUME": False})
    assert len(a.config["SECRET_KEY"]) == 64 and a.config["SECRET_KEY"] != "dev"
    assert a.config["SECRET_KEY"] == again.config["SECRET_KEY"] != b.config["SECRET_KEY"]
    assert (tmp_path / "a" / "secret_key").stat().st_mode & 0o077 == 0
