"""No lost files, bounded decoding, upload validation, private files and the result cache on delete."""

from __future__ import annotations

import io
import json
import os
import stat
import threading
import time

import numpy as np
import pytest
from PIL import Image
from skimage import data as skdata

from webapp import create_app, ingest, store


@pytest.fixture
def app(tmp_path):
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"), "SWEEP_WORKERS": 1,
                      "SWEEP_AUTORESUME": False})
    yield app
    app.extensions["eightfold_worker"].stop()


@pytest.fixture
def client(app):
    return app.test_client()


def png(pixels) -> bytes:
    buf = io.BytesIO()
    Image.fromarray(pixels).save(buf, "PNG")
    return buf.getvalue()


X = png(skdata.astronaut()[100:164, 180:260])
Y = png(skdata.coffee()[50:114, 60:140])


def upload(client, files):
    return client.post("/api/sample-sets", data={"files": [(io.BytesIO(d), n) for n, d in files]},
                       content_type="multipart/form-data")


# --- 5. the delete/upload race ------------------------------------------------------------------------


def test_delete_during_an_upload_keeps_the_shared_blob(app, client, monkeypatch):
    """Set P holds X; an upload of Q (X and Y) is mid-way when P is deleted: X must survive for Q."""
    p = upload(client, [("p/x.png", X)]).get_json()["id"]
    sha_x = __import__("hashlib").sha256(X).hexdigest()
    in_upload, delete_done = threading.Event(), threading.Event()
    real_create = store.create_sample_set

    def slow_create(conn, **kwargs):  # the upload has claimed and placed its blobs; now the delete runs
        in_upload.set()
        assert delete_done.wait(30)
        return real_create(conn, **kwargs)

    monkeypatch.setattr(store, "create_sample_set", slow_create)
    result = {}

    def upload_q():
        with app.test_client() as c:
            result["r"] = upload(c, [("q/x.png", X), ("q/y.png", Y)])

    t = threading.Thread(target=upload_q)
    t.start()
    assert in_upload.wait(30)
    with app.test_client() as c:
        assert c.delete(f"/api/sample-sets/{p}", json={}).status_code == 200
    delete_done.set()
    t.join(30)
    r = result["r"]
    assert r.status_code == 201, r.get_data(as_text=True)
    assert store.blob_path(app.config["DATA_DIR"], sha_x).exists()
    q = r.get_json()["id"]
    with app.app_context():
        ids = [im["id"] for im in store.set_images(store.get_db(), q)]
    for image_id in ids:
        assert client.get(f"/sets/{q}/images/{image_id}/thumb.png").status_code == 200


def test_delete_then_upload_puts_the_blob_back(app, client):
    p = upload(client, [("p/x.png", X)]).get_json()["id"]
    sha_x = __import__("hashlib").sha256(X).hexdigest()
    assert client.delete(f"/api/sample-sets/{p}", json={}).status_code == 200
    assert not store.blob_path(app.config["DATA_DIR"], sha_x).exists()
    assert upload(client, [("q/x.png", X)]).status_code == 201
    assert store.blob_path(app.config["DATA_DIR"], sha_x).exists()


def test_many_threads_uploading_and_deleting_never_lose_a_used_blob(app):
    """Threads keep uploading sets that share X while others delete them; every surviving set has its files."""
    root = app.config["DATA_DIR"]
    errors, kept = [], []

    def worker(n):
        try:
            with app.app_context():
                db = store.get_db()
                for i in range(4):
                    set_id, *_ = ingest.ingest(db, root, [(f"c{n}/x.png", X), (f"c{n}/i{i}.png", Y)])
                    if i % 2:
                        store.delete_set(db, root, set_id)
                    else:
                        kept.append(set_id)
                store.close_db()
        except Exception as exc:  # surfaced below
            errors.append(exc)

    threads = [threading.Thread(target=worker, args=(n,)) for n in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(120)
    assert not errors
    with app.app_context():
        db = store.get_db()
        for set_id in kept:
            for im in store.set_images(db, set_id):
                assert store.blob_path(root, im["sha256"]).exists(), (set_id, im["filename"])
        assert db.execute("SELECT COUNT(*) FROM blob_claims").fetchone()[0] == 0


# --- 6. bounded decoding ------------------------------------------------------------------------------------


def test_concurrent_uploads_decode_at_most_the_pool_size_at_once(app):
    pool = app.extensions["eightfold_decode_pool"]
    files = [(f"c/{i}.png", png(np.full((64, 64, 3), i * 20, np.uint8))) for i in range(4)]
    codes = []

    def send():
        with app.test_client() as c:
            codes.append(upload(c, files).status_code)

    threads = [threading.Thread(target=send) for _ in range(3)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(120)
    assert codes == [201, 201, 201]
    assert 1 <= pool.peak <= app.config["DECODE_WORKERS"]


def test_a_full_pool_answers_503_with_retry_after(tmp_path):
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "d"), "SWEEP_AUTORESUME": False,
                      "UPLOAD_SLOTS": 1, "UPLOAD_WAIT_S": 0.2})
    try:
        pool = app.extensions["eightfold_decode_pool"]
        with pool.upload_slot():  # another upload holds the only slot
            r = upload(app.test_client(), [("c/x.png", X)])  # waits 0.2 s for it, then gives up
            assert r.status_code == 503 and r.headers["Retry-After"] == "30"
            assert "checking other uploads" in r.get_json()["error"]
            # one more may wait; the one after that is refused at once instead of holding a thread
            entered = threading.Event()

            def wait_in_line():
                try:
                    with pool.upload_slot(wait_s=2.0):
                        pass
                except Exception:
                    pass
                entered.set()

            waiting = threading.Thread(target=wait_in_line)
            waiting.start()
            time.sleep(0.1)
            from webapp.decoding import Busy

            t0 = time.monotonic()
            with pytest.raises(Busy):
                with pool.upload_slot(wait_s=5.0):
                    pass
            assert time.monotonic() - t0 < 1.0
        waiting.join(5)
        assert entered.is_set()
    finally:
        app.extensions["eightfold_worker"].stop()


def test_uploads_are_spooled_to_disk_not_held_whole(app, client, monkeypatch):
    from webapp import uploads

    reads = []
    real = uploads._spool_target

    def spy(root):
        path, sink = real(root)
        reads.append(path)
        return path, sink

    monkeypatch.setattr(uploads, "_spool_target", spy)
    assert upload(client, [("c/x.png", X)]).status_code == 201
    assert len(reads) == 1 and reads[0].parent.name == "tmp"
    assert not reads[0].exists()  # moved into the blob store (a hard link), then removed


# --- 9. upload validation ---------------------------------------------------------------------------------


def raw_multipart(parts: list[tuple[bytes, bytes]]) -> bytes:
    out = b""
    for disposition_name, data in parts:
        out += (b"--XBOUNDARY\r\nContent-Disposition: form-data; name=\"files\"; filename=\"" + disposition_name
                + b"\"\r\nContent-Type: application/octet-stream\r\n\r\n" + data + b"\r\n")
    return out + b"--XBOUNDARY--\r\n"


def test_a_non_utf8_name_is_read_leniently_and_the_rest_kept(client):
    body = raw_multipart([(b"shop/caf\xe9.png", X), (b"shop/ok.png", Y)])
    r = client.post("/api/sample-sets", data=body, content_type="multipart/form-data; boundary=XBOUNDARY")
    assert r.status_code == 201, r.get_data(as_text=True)
    # b"\xe9" is "é" in Latin-1 (ISO/IEC 8859-1)
    assert [i["filename"] for i in r.get_json()["images"]] == ["shop/café.png", "shop/ok.png"]


def test_a_part_without_a_name_is_listed_as_rejected(client):
    body = raw_multipart([(b"", X), (b"shop/ok.png", Y)])
    r = client.post("/api/sample-sets", data=body, content_type="multipart/form-data; boundary=XBOUNDARY")
    assert r.status_code == 201
    assert r.get_json()["rejected"] == [{"filename": "unnamed-1", "error": "the part has no file name"}]


def test_too_many_files_get_their_own_message(tmp_path):
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "d"), "SWEEP_AUTORESUME": False,
                      "MAX_FILES_PER_SET": 3})
    try:
        client = app.test_client()
        tiny = png(np.zeros((16, 16, 3), np.uint8))
        r = upload(client, [(f"c/{i}.png", tiny) for i in range(5)])
        assert r.status_code == 201
        assert r.get_json()["rejected"] == [{"filename": "2 more files", "error": "more than 3 files in one sample set"}]
        r = upload(client, [(f"c/{i}.png", tiny) for i in range(40)])  # past the parser's bound too
        assert r.status_code == 413
        assert r.get_json()["error"] == "too many files in one upload: a sample set holds at most 3"
    finally:
        app.extensions["eightfold_worker"].stop()


@pytest.mark.parametrize("shape,reason", [
    ((1, 1, 3), "too small to measure: 1x1 pixels; SSIM's window needs at least 11x11"),
    ((10, 2000, 3), "too small to measure: 2000x10 pixels; SSIM's window needs at least 11x11"),
    ((12, 600, 3), "aspect ratio too extreme: 600x12 pixels; at most 40:1"),
])
def test_images_a_sweep_cannot_use_are_rejected_at_upload(client, shape, reason):
    r = upload(client, [("c/bad.png", png(np.zeros(shape, np.uint8))), ("c/ok.png", X)])
    assert r.status_code == 201
    [rejected] = r.get_json()["rejected"]
    assert rejected["filename"] == "c/bad.png" and rejected["error"].startswith(reason)


def test_a_class_name_over_the_limit_is_rejected_at_upload(client):
    long_class = "k" * 81
    r = upload(client, [(f"{long_class}/a.png", X), ("ok/b.png", Y)])
    assert r.status_code == 201
    [rejected] = r.get_json()["rejected"]
    assert rejected["filename"] == f"{long_class}/a.png"
    assert "class must be at most 80 characters" in rejected["error"]


@pytest.mark.parametrize("body,message", [
    (b"[" * 100000 + b"]" * 100000, "request body is nested too deeply"),
    (b'{"classes": {"a": {"b": ' + b"[" * 40 + b"1" + b"]" * 40 + b"}}}",
     "request body is nested too deeply (at most 32 levels)"),
    (b'{"x": "' + b"a" * 1_000_001 + b'"}', "request body too large for JSON"),
])
def test_nested_or_oversized_json_is_a_400(client, body, message):
    set_id = upload(client, [("c/x.png", X)]).get_json()["id"]
    r = client.post(f"/api/sample-sets/{set_id}/sweeps", data=body, content_type="application/json")
    assert r.status_code == 400
    assert r.get_json()["error"].startswith(message)


# --- 10. private files, and the result cache on delete ----------------------------------------------------


def test_data_dir_and_files_are_private(app, client):
    assert upload(client, [("c/x.png", X)]).status_code == 201
    root = app.config["DATA_DIR"]
    assert stat.S_IMODE(os.stat(root).st_mode) == 0o700
    files = [os.path.join(d, f) for d, _, fs in os.walk(root) for f in fs]
    assert any(f.endswith(".bin") for f in files) and any(f.endswith(".sqlite3") for f in files)
    for f in files:
        assert stat.S_IMODE(os.stat(f).st_mode) & 0o077 == 0, f


def test_deleting_a_set_drops_its_rows_from_the_result_cache(app):
    root, database = app.config["DATA_DIR"], app.config["DATABASE"]
    with app.app_context():
        db = store.get_db()
        kept, *_ = ingest.ingest(db, root, [("a/keep.png", X)])
        gone, *_ = ingest.ingest(db, root, [("a/secret-launch-plan.png", Y)])
        for set_id, name in ((kept, "a/keep.png"), (gone, "a/secret-launch-plan.png")):
            cache = store.SqliteResultCache(database, set_id=set_id)
            cache.put(f"fp-{set_id}", {"key": name, "curves": []})
            cache.close()
        store.delete_set(db, root, gone)
        rows = [r[0] for r in db.execute("SELECT result FROM result_cache")]
    assert len(rows) == 1 and "keep.png" in rows[0]
    assert not any("secret-launch-plan" in r for r in rows)


def test_a_version_1_store_is_upgraded_in_place(tmp_path):
    import sqlite3

    data = tmp_path / "old"
    data.mkdir()
    conn = sqlite3.connect(data / "eightfold.sqlite3")
    conn.execute("CREATE TABLE result_cache (fingerprint TEXT PRIMARY KEY, result TEXT NOT NULL, created TEXT NOT NULL)")
    conn.execute("INSERT INTO result_cache VALUES ('fp', '{}', 'then')")
    conn.execute("PRAGMA user_version = 1")
    conn.commit()
    conn.close()
    app = create_app({"TESTING": True, "DATA_DIR": str(data), "SWEEP_AUTORESUME": False})
    try:
        conn = sqlite3.connect(data / "eightfold.sqlite3")
        assert conn.execute("PRAGMA user_version").fetchone()[0] == 2
        assert [r[1] for r in conn.execute("PRAGMA table_info(result_cache)")][-1] == "set_id"
        assert conn.execute("SELECT COUNT(*) FROM result_cache").fetchone()[0] == 1
        conn.close()
    finally:
        app.extensions["eightfold_worker"].stop()
