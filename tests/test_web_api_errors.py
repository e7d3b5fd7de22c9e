"""Bad input to the JSON API: always a 4xx with an exact ``{"error": message}``, never a 500."""

from __future__ import annotations

import io

import pytest
from PIL import Image
from skimage import data as skdata

from webapp import create_app


@pytest.fixture
def app(tmp_path):
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"), "SWEEP_WORKERS": 1,
                      "SWEEP_AUTORESUME": False})
    yield app
    app.extensions["eightfold_worker"].stop()


@pytest.fixture
def client(app):
    return app.test_client()


@pytest.fixture
def set_id(client):
    buf = io.BytesIO()
    Image.fromarray(skdata.astronaut()[:48, :48]).save(buf, "PNG")
    r = client.post("/api/sample-sets", data={"files": [(io.BytesIO(buf.getvalue()), "product/a.png"),
                                                         (io.BytesIO(buf.getvalue()), "hero/a.png")]},
                    content_type="multipart/form-data")
    return r.get_json()["id"]


BAD_SWEEPS = [
    ({"target_ssim": 1.5}, "target_ssim must be a number greater than 0 and at most 1, got 1.5"),
    ({"target_ssim": "high"}, "target_ssim must be a number greater than 0 and at most 1, got 'high'"),
    ({"target_ssim": True}, "target_ssim must be a number greater than 0 and at most 1, got True"),
    ({"coverage": 0}, "coverage must be a number greater than 0 and at most 1, got 0"),
    ({"coverage": None}, "coverage must be a number greater than 0 and at most 1, got None"),
    ({"speed": 3}, "unknown key 'speed' (allowed: choice, classes, coverage, current, target_ssim)"),
    ({"classes": []}, "classes must be an object keyed by class name, got []"),
    ({"classes": {"shoes": {}}}, "unknown class 'shoes' (this set has: product, hero)"),
    ({"classes": {"product": 0.9}}, "classes['product'] must be an object, got 0.9"),
    ({"classes": {"product": {"target": 0.9}}},
     "unknown key 'target' in classes['product'] (allowed: target_ssim, coverage, width, widths, local_floor, chroma_floor)"),
    ({"classes": {"product": {"width": -5}}},
     "classes['product'].width must be a whole number of pixels from 1 to 8192, or blank for as uploaded, got -5"),
    ({"classes": {"product": {"widths": [640, "wide"]}}},
     "classes['product'].widths must be a whole number of pixels from 1 to 8192, or blank for as uploaded, got 'wide'"),
    ({"classes": {"product": {"width": 640, "widths": [640]}}}, "classes['product'] gives both 'width' and 'widths'; give one"),
    ({"classes": {"hero": {"local_floor": 2}}},
     "classes['hero'].local_floor must be a number from 0 to 1, or blank for the default, got 2"),
    ({"classes": {"hero": {"chroma_floor": 0}}},
     "classes['hero'].chroma_floor must be a number greater than 0 and at most 1, got 0"),
    ({"current": {"quality": 0}}, "current: quality must be an integer in 1..100, got 0"),
    ({"current": {"quality": 80, "cutoff": 65}}, "current: cutoff must be an integer zigzag position in 1..64, got 65"),
    ({"current": {"subsampling": "4:1:1"}}, "current.subsampling must be one of 4:4:4, 4:2:2, 4:2:0, got '4:1:1'"),
    ({"current": {"quality": "eighty"}}, "current.quality must be a whole number, got 'eighty'"),
    ({"current": {"q": 80}}, "unknown key 'q' in current (allowed: quality, cutoff, subsampling)"),
    ([1, 2], "request body must be a JSON object, got [1, 2]"),
]


@pytest.mark.parametrize("payload, message", BAD_SWEEPS)
def test_bad_sweep_requests(client, set_id, payload, message):
    r = client.post(f"/api/sample-sets/{set_id}/sweeps", json=payload)
    assert r.status_code == 400
    assert r.get_json() == {"error": message}


def test_non_json_body_is_a_400(client, set_id):
    r = client.post(f"/api/sample-sets/{set_id}/sweeps", data="target=0.9", content_type="text/plain")
    assert r.status_code == 400
    assert r.get_json() == {"error": "request body must be JSON (Content-Type: application/json)"}


@pytest.mark.parametrize(
    "method, url, status, message",
    [
        ("post", "/api/sample-sets/nope/sweeps", 404, "no sample set 'nope'"),
        ("delete", "/api/sample-sets/nope", 404, "no sample set 'nope'"),
        ("get", "/api/sample-sets/nope", 404, "no sample set 'nope'"),
        ("get", "/api/sweeps/nope", 404, "no sweep 'nope'"),
        ("post", "/api/sweeps/nope/cancel", 404, "no sweep 'nope'"),
        ("post", "/api/sweeps/nope/freeze", 404, "no sweep 'nope'"),
        ("post", "/api/sweeps/nope/decide", 404, "no sweep 'nope'"),
        ("get", "/api/budgets/nope", 404, "no budget behind this token"),
        ("post", "/api/budgets/nope/signoffs", 404, "no budget behind this token"),
        ("post", "/api/budgets/nope/targets", 404, "no budget behind this token"),
    ],
)
def test_unknown_ids(client, method, url, status, message):
    r = getattr(client, method)(url, json={})
    assert r.status_code == status
    assert r.get_json() == {"error": message}


def test_wrong_method_is_json_405(client):
    r = client.get("/api/sample-sets")
    assert r.status_code == 405
    assert r.get_json() == {"error": "The method is not allowed for the requested URL."}


def test_queued_sweep_cannot_be_frozen_or_redecided(client, set_id):
    # Auto-resume is off and no worker runs in this app until submit; stop it so the sweep stays queued.
    client.application.extensions["eightfold_worker"].stop()
    r = client.post(f"/api/sample-sets/{set_id}/sweeps", json={})
    assert r.status_code == 202
    sweep_id = r.get_json()["id"]
    assert r.get_json()["status_url"].endswith(f"/api/sweeps/{sweep_id}")
    status = client.get(f"/api/sweeps/{sweep_id}").get_json()
    assert status["status"] == "queued" and status["result"] is None
    r = client.post(f"/api/sweeps/{sweep_id}/freeze")
    assert r.status_code == 409
    assert r.get_json() == {"error": f"sweep {sweep_id!r} is queued; only a finished sweep can be frozen"}
    r = client.post(f"/api/sweeps/{sweep_id}/decide", json={})
    assert r.status_code == 409
    # cancelling a queued sweep is immediate
    r = client.post(f"/api/sweeps/{sweep_id}/cancel")
    assert r.status_code == 202 and r.get_json()["status"] == "cancelled"
    r = client.post(f"/api/sweeps/{sweep_id}/cancel")
    assert r.status_code == 409
    assert r.get_json() == {"error": f"sweep {sweep_id!r} is already cancelled"}
