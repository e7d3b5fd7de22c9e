"""Sample sets: upload (files or whole folders), the per-file class table, per-class targets, delete."""

from __future__ import annotations

from collections import Counter

from flask import Blueprint, abort, current_app, flash, redirect, render_template, request, url_for

from webapp import decoding, form_check, imaging, ingest, store, uploads, validation
from webapp.views import is_htmx
from webapp.worker import get_worker

bp = Blueprint("samplesets", __name__)


def receive_upload():
    """The request's file parts, streamed to disk (``webapp.uploads``), and the count dropped over the limit.

    A part with neither a name nor bytes is an unused file picker of a plain form post, not a file.
    """
    got = uploads.receive(store.data_dir(), max_files=current_app.config["MAX_FILES_PER_SET"])
    return [p for p in got.parts if p.filename.strip() or p.size], got.too_many


def ingest_upload(db, parts, too_many):
    """Check and store the parts as a set, a few uploads at a time, decoding in the bounded pool."""
    pool = decoding.get_pool()
    with pool.upload_slot():
        return ingest.ingest(db, store.data_dir(), parts, max_files=current_app.config["MAX_FILES_PER_SET"],
                             decode=pool.run, too_many=too_many)


def listed_sets(db) -> list[dict]:
    """Stored sets for the home page, each with its latest sweep (or None) so results are one click away."""
    out = []
    for row in store.list_sets(db):
        sweeps = store.sweeps_for_set(db, row["id"])
        out.append({**dict(row), "latest": dict(sweeps[0]) if sweeps else None})
    return out


@bp.get("/")
def home():
    db = store.get_db()
    return render_template("home.html", sets=listed_sets(db))


@bp.post("/sets")
def upload():
    files, too_many = receive_upload()
    db = store.get_db()
    if not files:
        return render_template("home.html", sets=listed_sets(db),
                               error="No files arrived: choose images or a folder first."), 400
    set_id, images, rejected, _ = ingest_upload(db, files, too_many)
    if not images:
        store.delete_set(db, store.data_dir(), set_id)
        return render_template("home.html", sets=listed_sets(db), rejected=rejected,
                               error="None of the files could be read as an image."), 422
    return redirect(url_for("samplesets.show", set_id=set_id), code=303)


def load_set(set_id):
    db = store.get_db()
    row = store.get_set(db, set_id)
    if row is None:
        abort(404, description=f"no sample set {set_id!r}")
    return db, row


def target_rows(db, set_id, form=None, params=None):
    """Rows of the per-class targets table, filled from a posted form, stored params, or defaults."""
    images = store.set_images(db, set_id)
    counts = Counter(im["class_name"] for im in images)
    posted = form_targets(form) if form is not None else {}
    rows = []
    for name in store.set_classes(db, set_id):
        if name in posted:
            row = posted[name]
        elif params is not None and name in params["classes"]:
            spec = params["classes"][name]
            row = {
                "target_ssim": spec["target_ssim"], "coverage": spec["coverage"],
                "widths": ", ".join("" if w is None else str(w) for w in spec["widths"]).strip(", "),
                "local_floor": spec.get("local_floor") or "", "chroma_floor": spec.get("chroma_floor") or "",
            }
        else:
            row = {"target_ssim": validation.DEFAULT_TARGET_SSIM, "coverage": validation.DEFAULT_COVERAGE,
                   "widths": "", "local_floor": "", "chroma_floor": ""}
        rows.append({"name": name, "count": counts[name], **row})
    return rows


def form_targets(form) -> dict:
    """Raw per-class values from the set page's form (fields cls-N, t-N, c-N, w-N, lf-N, cf-N)."""
    out = {}
    for key in form:
        if key.startswith("cls-"):
            i = key[4:]
            out[form[key]] = {
                "target_ssim": form.get(f"t-{i}", ""), "coverage": form.get(f"c-{i}", ""),
                "widths": form.get(f"w-{i}", ""), "local_floor": form.get(f"lf-{i}", ""),
                "chroma_floor": form.get(f"cf-{i}", ""),
            }
    return out


def form_current(form) -> dict:
    return {
        "quality": form.get("cur_quality", "85").strip(),
        "cutoff": form.get("cur_cutoff", "64").strip(),
        "subsampling": form.get("cur_subsampling", "4:2:0"),
    }


def apply_class_edits(db, set_id, form) -> None:
    edits = {}
    for key in form:
        if key.startswith("class-"):
            try:
                image_id = int(key[6:])
            except ValueError:
                continue
            edits[image_id] = validation.class_name(form[key])
    if edits:
        store.update_image_classes(db, set_id, edits)


def file_sizes(images) -> dict:
    """{image id: bytes of the stored upload}; a missing blob is simply left out."""
    root, out = store.data_dir(), {}
    for im in images:
        try:
            out[im["id"]] = store.blob_path(root, im["sha256"]).stat().st_size
        except OSError:
            pass
    return out


def last_params(db, set_id):
    """The parameters of the set's latest sweep (what the page starts from next time), or None."""
    for sweep in store.sweeps_for_set(db, set_id):
        full = store.get_sweep(db, sweep["id"])
        if full and full.get("params"):
            return full["params"]  # the targets last chosen, table edits included
    return None


def render_set(db, row, *, error=None, status=200, form=None, errors=()):
    set_id = row["id"]
    # Remembered: without a posted form the page starts from the last sweep's targets and default.
    last = last_params(db, set_id) if form is None else None
    if form is not None:
        current = form_current(form)
    else:
        current = dict((last or {}).get("current") or validation.DEFAULT_CURRENT)
    images = store.set_images(db, set_id)
    return render_template(
        "sampleset.html", s=row, images=images, file_bytes=file_sizes(images), rejected=store.set_rejected(db, set_id),
        targets=target_rows(db, set_id, form, params=last), current=current, sweeps=store.sweeps_for_set(db, set_id),
        error=error, errors=list(errors), invalid={e.field for e in errors},
    ), status


@bp.get("/sets/<set_id>")
def show(set_id):
    db, row = load_set(set_id)
    return render_set(db, row)


@bp.post("/sets/<set_id>/classes")
def edit_classes(set_id):
    """A file's class changed: save it and send back the per-class targets table."""
    db, row = load_set(set_id)
    try:
        apply_class_edits(db, set_id, request.form)
    except ValueError as exc:
        if is_htmx():
            return render_template("_partials/class_targets.html", targets=target_rows(db, set_id, request.form),
                                   targets_error=str(exc)), 400
        return render_set(db, row, error=str(exc), status=400, form=request.form)
    if is_htmx():
        return render_template("_partials/class_targets.html", targets=target_rows(db, set_id, request.form))
    return redirect(url_for("samplesets.show", set_id=set_id), code=303)


@bp.post("/sets/<set_id>/sweeps")
def start_sweep(set_id):
    db, row = load_set(set_id)
    # Every bad box at once, in plain words, marked on the box itself (webapp.form_check).
    errors = form_check.check_class_rows(request.form) + form_check.check_current(request.form)
    if errors:
        return render_set(db, row, status=400, form=request.form, errors=errors)
    try:
        apply_class_edits(db, set_id, request.form)
        classes = {}
        for name, raw in form_targets(request.form).items():
            classes[name] = {"target_ssim": raw["target_ssim"], "coverage": raw["coverage"],
                             "widths": raw["widths"], "local_floor": raw["local_floor"],
                             "chroma_floor": raw["chroma_floor"]}
        names = store.set_classes(db, set_id)
        classes = {k: v for k, v in classes.items() if k in names}
        params = validation.sweep_request({"classes": classes, "current": form_current(request.form)}, names)
    except ValueError as exc:
        return render_set(db, row, error=str(exc), status=400, form=request.form)
    sweep_id = store.create_sweep(db, set_id, params)
    get_worker().submit(sweep_id)
    return redirect(url_for("sweeps.show", sweep_id=sweep_id), code=303)


@bp.post("/sets/<set_id>/name")
def rename(set_id):
    db, row = load_set(set_id)
    raw = request.form.get("name", "")
    try:
        name = form_check.set_name(raw)
    except ValueError as exc:
        return render_set(db, row, status=400, errors=[form_check.FieldError("name", str(exc))])
    store.rename_set(db, set_id, name)
    flash(f"Renamed the set to “{name}”.")
    return redirect(url_for("samplesets.show", set_id=set_id), code=303)


@bp.post("/sets/<set_id>/delete")
def delete(set_id):
    db, row = load_set(set_id)
    for sweep in store.sweeps_for_set(db, set_id):
        get_worker().cancel(sweep["id"])
    store.delete_set(db, store.data_dir(), set_id)
    flash(f"Deleted sample set “{row['name']}”, its sweeps, budgets and stored files.")
    return redirect(url_for("samplesets.home"), code=303)


@bp.get("/sets/<set_id>/images/<int:image_id>/thumb.png")
def thumbnail(set_id, image_id):
    db, _ = load_set(set_id)
    image = db.execute("SELECT * FROM images WHERE id = ? AND set_id = ?", (image_id, set_id)).fetchone()
    if image is None:
        abort(404, description=f"no image {image_id!r} in this set")
    try:
        data = decoding.run(imaging.thumbnail_png, store.data_dir(), image["sha256"])
    except FileNotFoundError:
        abort(410, description="this image's stored file is gone (its sample set is being deleted)")
    return imaging.png_response(data)
