"""JSON API. Errors are ``{"error": message}`` with a 4xx status (see ``views.init_app``)."""

from __future__ import annotations

from flask import Blueprint, current_app, jsonify, request, url_for

from webapp import budgets, snapshots, store, validation
from webapp.samplesets import ingest_upload, receive_upload
from webapp.sweeps import redecide
from webapp.views import json_error
from webapp.worker import get_worker

bp = Blueprint("api", __name__, url_prefix="/api")


def json_body():
    return validation.json_payload(request.get_data(cache=True), max_depth=current_app.config["MAX_JSON_DEPTH"])


def sweep_json(sweep: dict) -> dict:
    return {
        "id": sweep["id"], "sample_set": sweep["set_id"], "status": sweep["status"], "done": sweep["done"],
        "total": sweep["total"], "error": sweep["error"],
        "result": sweep["document"] if sweep["status"] == "done" else None,
    }


@bp.post("/sample-sets")
def create_set():
    files, too_many = receive_upload()
    if not files:
        return json_error("no files: send images as multipart form data in the 'files' field", 400)
    db = store.get_db()
    set_id, images, rejected, _ = ingest_upload(db, files, too_many)
    if not images:
        store.delete_set(db, store.data_dir(), set_id)
        return json_error(f"none of the {len(files)} files could be read as an image", 422, rejected=rejected)
    return jsonify({
        "id": set_id,
        "images": [{"filename": im["filename"], "class": im["class"], "width": im["width"],
                    "height": im["height"]} for im in images],
        "rejected": rejected,
    }), 201


def _set_or_404(set_id):
    db = store.get_db()
    row = store.get_set(db, set_id)
    return db, row


@bp.get("/sample-sets/<set_id>")
def get_set(set_id):
    db, row = _set_or_404(set_id)
    if row is None:
        return json_error(f"no sample set {set_id!r}", 404)
    return jsonify({
        "id": set_id, "name": row["name"], "created": row["created"],
        "classes": store.set_classes(db, set_id),
        "images": [{"filename": im["filename"], "class": im["class_name"], "width": im["width"],
                    "height": im["height"]} for im in store.set_images(db, set_id)],
        "rejected": [{"filename": r["filename"], "error": r["error"]} for r in store.set_rejected(db, set_id)],
        "sweeps": [{"id": s["id"], "status": s["status"]} for s in store.sweeps_for_set(db, set_id)],
    })


@bp.delete("/sample-sets/<set_id>")
def delete_set(set_id):
    db, row = _set_or_404(set_id)
    if row is None:
        return json_error(f"no sample set {set_id!r}", 404)
    for s in store.sweeps_for_set(db, set_id):
        get_worker().cancel(s["id"])
    store.delete_set(db, store.data_dir(), set_id)
    return jsonify({"deleted": set_id})


@bp.post("/sample-sets/<set_id>/sweeps")
def start_sweep(set_id):
    db, row = _set_or_404(set_id)
    if row is None:
        return json_error(f"no sample set {set_id!r}", 404)
    try:
        params = validation.sweep_request(json_body(), store.set_classes(db, set_id))
    except ValueError as exc:
        return json_error(str(exc), 400)
    sweep_id = store.create_sweep(db, set_id, params)
    get_worker().submit(sweep_id)
    return jsonify({"id": sweep_id, "status_url": url_for("api.get_sweep", sweep_id=sweep_id, _external=True)}), 202


def _sweep(sweep_id):
    db = store.get_db()
    return db, store.get_sweep(db, sweep_id)


@bp.get("/sweeps/<sweep_id>")
def get_sweep(sweep_id):
    _, sweep = _sweep(sweep_id)
    if sweep is None:
        return json_error(f"no sweep {sweep_id!r}", 404)
    return jsonify(sweep_json(sweep))


@bp.post("/sweeps/<sweep_id>/cancel")
def cancel_sweep(sweep_id):
    db, sweep = _sweep(sweep_id)
    if sweep is None:
        return json_error(f"no sweep {sweep_id!r}", 404)
    if sweep["status"] in ("done", "failed", "cancelled"):
        return json_error(f"sweep {sweep_id!r} is already {sweep['status']}", 409)
    store.request_cancel(db, sweep_id)
    get_worker().cancel(sweep_id)
    return jsonify(sweep_json(store.get_sweep(db, sweep_id))), 202


@bp.post("/sweeps/<sweep_id>/decide")
def decide(sweep_id):
    """Re-decide a finished sweep with changed targets (no new encoding); returns the new document."""
    db, sweep = _sweep(sweep_id)
    if sweep is None:
        return json_error(f"no sweep {sweep_id!r}", 404)
    if sweep["status"] != "done":
        return json_error(f"sweep {sweep_id!r} is {sweep['status']}; targets can change once it is done", 409)
    try:
        params = validation.target_changes(json_body(), sweep["params"])
    except ValueError as exc:
        return json_error(str(exc), 400)
    document = redecide(sweep, params)
    store.save_decision(db, sweep_id, params, document)
    return jsonify(document)


@bp.post("/sweeps/<sweep_id>/freeze")
def freeze(sweep_id):
    db, sweep = _sweep(sweep_id)
    if sweep is None:
        return json_error(f"no sweep {sweep_id!r}", 404)
    if sweep["status"] != "done":
        return json_error(f"sweep {sweep_id!r} is {sweep['status']}; only a finished sweep can be frozen", 409)
    edit_token, view_token = budgets.freeze(db, sweep)
    return jsonify(budgets.links(edit_token, view_token)), 201


def _budget(token):
    db = store.get_db()
    return db, store.resolve_token(db, token)


@bp.get("/budgets/<token>")
def get_budget(token):
    db, found = _budget(token)
    if found is None:
        return json_error("no budget behind this token", 404)
    role, snapshot, budget = found
    key = budgets.page_key(db, "json", token, role, snapshot, budget)
    data = snapshots.page(key, lambda: _budget_json(db, role, snapshot, budget), csrf_token="\x00unused\x00")
    return current_app.response_class(data, mimetype="application/json")


def _budget_json(db, role, snapshot, budget) -> str:
    body = dict(snapshot["document"])
    body["signoffs"] = store.signoffs_for(db, snapshot["view_token"])
    body["budget"] = {"snapshot": snapshot["seq"], "frozen": snapshot["created"], "access": role}
    if role == "edit":
        body["budget"]["snapshots"] = [
            {"snapshot": s["seq"], "token": s["view_token"], "frozen": s["created"]}
            for s in store.list_snapshots(db, budget["edit_token"])
        ]
    return jsonify(body).get_data(as_text=True)


@bp.post("/budgets/<token>/signoffs")
def add_signoff(token):
    db, found = _budget(token)
    if found is None:
        return json_error("no budget behind this token", 404)
    _, snapshot, _ = found
    try:
        fields = validation.signoff(json_body(), budgets.class_names(snapshot["document"]))
    except ValueError as exc:
        return json_error(str(exc), 400)
    return jsonify(store.add_signoff(db, snapshot["view_token"], **fields)), 201


@bp.post("/budgets/<token>/targets")
def change_targets(token):
    db, found = _budget(token)
    if found is None:
        return json_error("no budget behind this token", 404)
    role, snapshot, budget = found
    if role != "edit":
        return json_error("this is a share token: changing targets needs the edit token", 403)
    try:
        params = validation.target_changes(json_body(), snapshot["params"])
    except ValueError as exc:
        return json_error(str(exc), 400)
    view_token = budgets.refreeze(db, budget, params)
    return jsonify(budgets.links(budget["edit_token"], view_token)), 201
