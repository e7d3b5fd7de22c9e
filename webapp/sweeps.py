"""Sweeps: live progress, results table (sort, expand, re-decide at once), cancel, document downloads."""

from __future__ import annotations

import json
import logging
import time

from flask import Blueprint, Response, abort, redirect, render_template, request, url_for

from webapp import form_check, results, store, validation
from webapp.views import is_htmx
from webapp.worker import get_worker

bp = Blueprint("sweeps", __name__)
log = logging.getLogger(__name__)


def load_sweep(sweep_id):
    db = store.get_db()
    sweep = store.get_sweep(db, sweep_id)
    if sweep is None:
        abort(404, description=f"no sweep {sweep_id!r}")
    return db, sweep


def progress_info(db, sweep: dict) -> dict:
    done, total = sweep["done"], sweep["total"]
    info = {"done": done, "total": total, "percent": int(100 * done / total) if total else 0,
            "elapsed": None, "left": None, "ahead": 0}
    if sweep["status"] == "running" and sweep["started"]:
        elapsed = max(0.0, time.time() - sweep["started"])
        info["elapsed"] = elapsed
        # Passes reused from the result cache finished instantly; the rate comes from the others.
        computed = done - get_worker().reused(sweep["id"])
        if computed > 0 and total > done:
            info["left"] = elapsed / computed * (total - done)
    if sweep["status"] == "queued":
        info["ahead"] = db.execute(
            "SELECT COUNT(*) FROM sweeps WHERE status IN ('queued', 'running') AND created < ?", (sweep["created"],)
        ).fetchone()[0]
    return info


def duration(seconds) -> str:
    if seconds is None:
        return "estimating…"
    seconds = int(round(seconds))
    if seconds < 60:
        return f"{seconds} s"
    minutes, s = divmod(seconds, 60)
    if minutes < 60:
        return f"{minutes} min {s:02d} s"
    hours, m = divmod(minutes, 60)
    return f"{hours} h {m:02d} min"


def results_context(sweep: dict, *, sort=None, direction=None, error=None, error_class=None, typed=None) -> dict:
    sort, direction = results.check_sort(sort, direction)
    doc = sweep["document"] or {}
    return {
        "sweep": sweep, "doc": doc, "params": sweep["params"], "sort": sort, "dir": direction,
        "rows": results.sorted_rows(doc, sort, direction), "totals": results.totals(doc),
        "columns": results.COLUMNS, "error": error, "error_class": error_class, "chart": results.chart,
        "saved_bytes": results.saved_bytes,
        # A refused value stays in its box (marked), instead of silently turning back into the old one.
        "typed": typed or {},
        "plain_text": results.plain_text, "plain_title": results.plain_title,
        "choice": sweep["params"].get("choice", validation.CHOICES[0]), "choice_words": validation.CHOICE_WORDS,
    }


def page_context(db, sweep):
    s = store.get_set(db, sweep["set_id"])
    return {"s": s, "progress": progress_info(db, sweep), "duration": duration}


@bp.get("/sweeps/<sweep_id>")
def show(sweep_id):
    db, sweep = load_sweep(sweep_id)
    ctx = results_context(sweep, sort=request.args.get("sort"), direction=request.args.get("dir"))
    return render_template("sweep.html", **ctx, **page_context(db, sweep))


@bp.get("/sweeps/<sweep_id>/live")
def live(sweep_id):
    """The self-replacing progress fragment; once the sweep ends it becomes the results."""
    db, sweep = load_sweep(sweep_id)
    ctx = results_context(sweep)
    return render_template("_partials/live.html", **ctx, **page_context(db, sweep))


@bp.post("/sweeps/<sweep_id>/cancel")
def cancel(sweep_id):
    db, sweep = load_sweep(sweep_id)
    store.request_cancel(db, sweep_id)
    get_worker().cancel(sweep_id)
    if is_htmx():
        sweep = store.get_sweep(db, sweep_id)
        return render_template("_partials/live.html", **results_context(sweep), **page_context(db, sweep))
    return redirect(url_for("sweeps.show", sweep_id=sweep_id), code=303)


@bp.get("/sweeps/<sweep_id>/table")
def table(sweep_id):
    db, sweep = load_sweep(sweep_id)
    ctx = results_context(sweep, sort=request.args.get("sort"), direction=request.args.get("dir"))
    if is_htmx():
        return render_template("_partials/results_table.html", **ctx)
    return redirect(url_for("sweeps.show", sweep_id=sweep_id, sort=ctx["sort"], dir=ctx["dir"]))


def redecide(sweep: dict, params: dict) -> dict:
    """A new document from the stored curves: no encoding, only the decision."""
    from dct.pipeline import redecide as pipeline_redecide

    return pipeline_redecide(sweep["curves"], validation.class_specs(params),
                             current=validation.current_setting(params), plain_only=validation.plain_only(params))


@bp.post("/sweeps/<sweep_id>/decide")
def decide(sweep_id):
    """A class's target or coverage changed in the table: re-decide and send back the table."""
    db, sweep = load_sweep(sweep_id)
    sort, direction = request.form.get("sort"), request.form.get("dir")
    if sweep["status"] != "done":
        return _decide_error(sweep, f"this sweep is {sweep['status']}; targets can change once it is done",
                             None, sort, direction, 409)
    name = request.form.get("class", "")
    change = {}
    for key in ("target_ssim", "coverage"):
        if key in request.form:
            change[key] = request.form[key]
    errors = form_check.check_table_change(request.form)
    if errors:
        message = " ".join(e.message for e in errors) + " Nothing was changed."
        typed = {name: {e.field: request.form.get(e.field, "") for e in errors}}
        return _decide_error(sweep, message, name, sort, direction, 400, typed=typed)
    try:
        params = validation.target_changes({"classes": {name: change}}, sweep["params"])
    except ValueError as exc:
        return _decide_error(sweep, str(exc), name, sort, direction, 400)
    # Keep the targets the sweep ran with, so a change in the table can always be undone.
    params["swept"] = sweep["params"].get("swept") or {"classes": sweep["params"]["classes"],
                                                       "current": sweep["params"]["current"]}
    return _save_and_show(db, sweep, params, sort, direction)


@bp.post("/sweeps/<sweep_id>/restore-targets")
def restore_targets(sweep_id):
    """Back to the targets the sweep ran with (undoing every change made in the results table)."""
    db, sweep = load_sweep(sweep_id)
    sort, direction = request.form.get("sort"), request.form.get("dir")
    swept = sweep["params"].get("swept")
    if sweep["status"] != "done" or not swept:
        return _decide_error(sweep, "nothing to restore: the targets are the ones the sweep ran with", None, sort,
                             direction, 409)
    params = {"classes": swept["classes"], "current": swept["current"], "swept": swept}
    return _save_and_show(db, sweep, params, sort, direction)


def _save_and_show(db, sweep, params, sort, direction):
    sweep_id = sweep["id"]
    document = redecide(sweep, params)
    store.save_decision(db, sweep_id, params, document)
    sweep = store.get_sweep(db, sweep_id)
    ctx = results_context(sweep, sort=sort, direction=direction)
    if is_htmx():
        # The table is the target; the charts follow the new decision as an out-of-band swap.
        return render_template("_partials/results_table.html", **ctx) + render_template(
            "_partials/charts.html", **ctx, oob=True)
    return redirect(url_for("sweeps.show", sweep_id=sweep_id, sort=ctx["sort"], dir=ctx["dir"]), code=303)


@bp.post("/sweeps/<sweep_id>/choice")
def choose(sweep_id):
    """Custom tables or quality number only: re-decide every class among those settings."""
    db, sweep = load_sweep(sweep_id)
    sort, direction = request.form.get("sort"), request.form.get("dir")
    if sweep["status"] != "done":
        return _decide_error(sweep, f"this sweep is {sweep['status']}; the choice can change once it is done",
                             None, sort, direction, 409)
    try:
        params = validation.target_changes({"choice": request.form.get("choice", "")}, sweep["params"])
    except ValueError as exc:
        return _decide_error(sweep, str(exc), None, sort, direction, 400)
    document = redecide(sweep, params)
    store.save_decision(db, sweep_id, params, document)
    sweep = store.get_sweep(db, sweep_id)
    ctx = results_context(sweep, sort=sort, direction=direction)
    if is_htmx():
        return render_template("_partials/results_table.html", **ctx) + render_template(
            "_partials/charts.html", **ctx, oob=True)
    return redirect(url_for("sweeps.show", sweep_id=sweep_id, sort=ctx["sort"], dir=ctx["dir"]), code=303)


def _decide_error(sweep, message, name, sort, direction, status, typed=None):
    ctx = results_context(sweep, sort=sort, direction=direction, error=message, error_class=name, typed=typed)
    if is_htmx():
        return render_template("_partials/results_table.html", **ctx), status
    db = store.get_db()
    return render_template("sweep.html", **ctx, **page_context(db, sweep)), status


@bp.get("/sweeps/<sweep_id>/classes/<int:index>/images")
def class_images(sweep_id, index):
    """Per-image rows of one class entry (the table's expand button)."""
    db, sweep = load_sweep(sweep_id)
    doc = sweep["document"] or {}
    classes = doc.get("classes", [])
    if not 0 <= index < len(classes):
        abort(404, description=f"no class entry {index!r} in this sweep")
    entry = classes[index]
    return render_template("_partials/class_images.html", e=entry, images=results.images_of(doc, entry),
                           why=results.rejections(sweep["curves"], sweep["params"], entry),
                           failures=results.image_failures,
                           review_url=lambda n: url_for("review.sweep_review", sweep_id=sweep_id, n=n))


def document_download(document: dict, stem: str, kind: str) -> Response:
    if kind == "json":
        from dct.contract import BudgetError, validate_document

        try:  # what we hand out should be a valid budget document (dct/budget.schema.json)
            validate_document(document)
        except BudgetError:
            log.exception("document for %s breaks the budget schema", stem)
        body, mimetype = json.dumps(document, indent=2), "application/json"
    else:
        from dct.report import document_to_csv

        body, mimetype = document_to_csv(document), "text/csv"
    resp = Response(body, mimetype=mimetype)
    resp.headers["Content-Disposition"] = f'attachment; filename="{stem}.{kind}"'
    return resp


@bp.get("/sweeps/<sweep_id>/document.<any(json, csv):kind>")
def download(sweep_id, kind):
    db, sweep = load_sweep(sweep_id)
    if sweep["document"] is None:
        abort(409, description=f"this sweep is {sweep['status']}; its document exists once it is done")
    return document_download(sweep["document"], f"eightfold-sweep-{sweep_id}", kind)
