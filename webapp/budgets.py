"""Budgets: frozen snapshots under unguessable tokens, the share view, sign-offs, owner re-freeze.

A budget has one edit token (the owner's link) and one view token per snapshot (the share link).
Freezing again makes a new snapshot with a new view token; old snapshots and their sign-offs stay.
Sign-offs of classes whose settings and targets did not change are carried over to the new snapshot
(marked so, with their original date); an older snapshot's page links to the newest one.

The page also shows, per class, how to apply the budget: Pillow's ``Image.save`` arguments and the
cjpeg tables file and command (``dct.contract``, the same exports as ``eightfold export``).
"""

from __future__ import annotations

import json
import logging

from flask import Blueprint, Response, abort, redirect, render_template, request, url_for

from webapp import results, snapshots, store, validation
from webapp.sweeps import document_download, load_sweep, redecide
from webapp.views import is_htmx

bp = Blueprint("budgets", __name__)
log = logging.getLogger(__name__)


def freeze(db, sweep: dict) -> tuple[str, str]:
    """(edit_token, view_token) of a new budget holding the sweep's current decision."""
    edit_token = store.create_budget(db, sweep["id"])
    view_token = store.add_snapshot(db, edit_token, sweep["params"], sweep["document"])
    return edit_token, view_token


def refreeze(db, budget: dict, params: dict) -> str:
    """A new snapshot of the same budget with changed targets, re-decided from the sweep's curves.

    Sign-offs of the classes whose settings and targets are unchanged come along from the latest snapshot.
    """
    sweep = store.get_sweep(db, budget["sweep_id"])
    document = redecide(sweep, params)
    found = store.resolve_token(db, budget["edit_token"])
    view_token = store.add_snapshot(db, budget["edit_token"], params, document)
    if found is not None:
        previous = found[1]
        store.carry_signoffs(db, previous["view_token"], view_token, unchanged_classes(previous["document"], document))
    return view_token


def _decided(document: dict, name: str):
    """What a sign-off on a class approves: per width, the setting and the targets it was held to."""
    keys = ("target_ssim", "coverage", "chroma_floor", "local_floor")
    return sorted(((e.get("width") or 0, e.get("setting") and tuple(sorted(e["setting"].items())),
                    tuple(e.get(k) for k in keys)) for e in document.get("classes", []) if e["name"] == name),
                  key=repr)


def unchanged_classes(old: dict, new: dict) -> list[str]:
    """Classes of ``new`` whose settings and targets are the same in ``old`` (at every width)."""
    before = set(class_names(old))
    return [n for n in class_names(new) if n in before and _decided(old, n) == _decided(new, n)]


def links(edit_token: str, view_token: str) -> dict:
    return {
        "token": view_token,
        "view_url": url_for("budgets.show", token=view_token, _external=True),
        "edit_url": url_for("budgets.show", token=edit_token, _external=True),
    }


def resolve(token):
    db = store.get_db()
    found = store.resolve_token(db, token)
    if found is None:
        abort(404, description="no budget behind this link")
    return (db, *found)


def class_names(document: dict) -> list[str]:
    names = []
    for entry in document.get("classes", []):
        if entry["name"] not in names:
            names.append(entry["name"])
    return names


def verdicts(signoffs: list[dict]) -> dict:
    """Per class: the latest verdict of each person, and whether everyone who spoke approves."""
    out: dict = {}
    for s in signoffs:
        out.setdefault(s["class"], {})[s["name"]] = s["verdict"]
    return {
        cls: {"people": people, "approved": all(v == "approve" for v in people.values())}
        for cls, people in out.items()
    }


def worst_images(document: dict, entry: dict, count: int = 3):
    """The ``count`` lowest-SSIM images of a class entry, for the designer to look at first."""
    rows = results.images_of(document, entry)
    rows.sort(key=lambda nim: nim[1].get("ssim") if nim[1].get("ssim") is not None else 2.0)
    return rows[:count]


def page_context(db, role, snapshot, budget, *, error=None, error_class=None, form=None):
    document, view = snapshot["document"], snapshot["view_token"]
    trail = store.signoffs_for(db, view)
    curves = []  # the sweep's stored curves, parsed only when a snapshot's reasons are not cached yet

    def why_of(entry):
        def make():
            if not curves:
                curves.append((store.get_sweep(db, budget["sweep_id"]) or {}).get("curves"))
            return results.rejections(curves[0], snapshot["params"], entry)

        return snapshots.derived(view, "why", snapshots.entry_key(entry), make)

    def chart(entry, **size):
        return snapshots.derived(view, "chart", (snapshots.entry_key(entry), tuple(sorted(size.items()))),
                                 lambda: results.chart(entry, **size))

    ctx = {
        "role": role, "snapshot": snapshot, "budget": budget, "doc": document, "params": snapshot["params"],
        "classes": snapshots.derived(view, "classes", None, lambda: class_names(document)),
        "trail": trail, "verdicts": verdicts(trail),
        "totals": snapshots.derived(view, "totals", None, lambda: results.totals(document)), "chart": chart,
        "error": error, "error_class": error_class, "form": form or {}, "token": request.view_args["token"],
        "worst_of": lambda entry: snapshots.derived(view, "worst", snapshots.entry_key(entry),
                                                    lambda: worst_images(document, entry)),
        "saved_bytes": results.saved_bytes, "failures": results.image_failures, "why_of": why_of,
    }
    ctx["exports"], ctx["export_notes"] = exports(document)
    ctx["choice"] = snapshot["params"].get("choice", validation.CHOICES[0])
    ctx["choice_words"] = validation.CHOICE_WORDS
    newer = store.newer_snapshot(db, snapshot)
    # a share link leads only to the newer share link; the owner's link always shows the latest
    ctx["newer"] = newer if role == "view" else None
    if role == "edit":
        ctx["snapshots"] = store.list_snapshots(db, budget["edit_token"])
        ctx["share_url"] = url_for("budgets.show", token=snapshot["view_token"], _external=True)
        ctx["edit_url"] = url_for("budgets.show", token=budget["edit_token"], _external=True)
    return ctx


def exports(document: dict):
    """Per class name: [{label, setting, index, kwargs, snippet, tables, command}] and loading notes."""
    from dct import contract

    try:
        b = contract.parse_document(document)
    except contract.BudgetError as exc:  # an explanation must not take the page down
        log.warning("budget document cannot be exported: %s", exc)
        return {}, [f"exports unavailable: {exc}"]
    out: dict = {}
    for index, e in enumerate(b.classes):
        out.setdefault(e.name, []).append({
            "index": index, "label": e.label, "setting": e.setting.label(), "width": e.width,
            "kwargs": json.dumps(contract.pillow_kwargs(e)),
            "snippet": contract.pillow_snippet(e),
            "tables": contract.cjpeg_tables_text(e),
            "command": contract.cjpeg_command(e),
        })
    return out, list(b.notes)


@bp.get("/budgets/<token>/exports/<int:index>.<any(txt, py):kind>")
def export_file(token, index, kind):
    """One class entry's cjpeg tables file (txt) or Pillow snippet (py), as a download."""
    from dct import contract

    _, _, snapshot, _ = resolve(token)
    try:
        entries = contract.parse_document(snapshot["document"]).classes
    except contract.BudgetError as exc:
        abort(409, description=f"this budget cannot be exported: {exc}")
    if not 0 <= index < len(entries):
        abort(404, description=f"no class entry {index!r} with a setting in this budget")
    e = entries[index]
    body = contract.cjpeg_tables_text(e) if kind == "txt" else contract.pillow_snippet(e)
    resp = Response(body, mimetype="text/plain")
    stem = "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in e.name)
    width = "" if e.width is None else f"-{e.width}"
    name = f"eightfold-qtables-{stem}{width}.txt" if kind == "txt" else f"eightfold-save-{stem}{width}.py"
    resp.headers["Content-Disposition"] = f'attachment; filename="{name}"'
    return resp


@bp.post("/sweeps/<sweep_id>/freeze")
def freeze_page(sweep_id):
    db, sweep = load_sweep(sweep_id)
    if sweep["status"] != "done":
        abort(409, description=f"this sweep is {sweep['status']}; only a finished sweep can be frozen")
    edit_token, _ = freeze(db, sweep)
    return redirect(url_for("budgets.show", token=edit_token), code=303)


def page_key(db, kind, token, role, snapshot, budget):
    """What a budget link's response depends on (see ``webapp.snapshots.page``)."""
    from webapp.security import login_enabled, session_ok

    return (kind, token, snapshot["view_token"], request.host_url, login_enabled() and session_ok(),
            store.budget_version(db, role, snapshot["view_token"], budget["edit_token"]))


@bp.get("/budgets/<token>")
def show(token):
    from flask import session
    from flask_wtf.csrf import generate_csrf

    db, role, snapshot, budget = resolve(token)
    render = lambda: render_template("budget.html", **page_context(db, role, snapshot, budget))  # noqa: E731
    if session.get("_flashes"):
        return render()  # a pending message is shown (and used up) once: not a page to keep
    return snapshots.page(page_key(db, "page", token, role, snapshot, budget), render, generate_csrf())


@bp.post("/budgets/<token>/signoffs")
def signoff(token):
    db, role, snapshot, budget = resolve(token)
    document = snapshot["document"]
    payload = {k: request.form.get(k, "") for k in ("class", "name", "verdict", "comment")}
    try:
        fields = validation.signoff(payload, class_names(document))
    except ValueError as exc:
        ctx = page_context(db, role, snapshot, budget, error=str(exc), error_class=payload["class"], form=payload)
        if is_htmx() and payload["class"] in ctx["classes"]:
            return render_template("_partials/signoff_block.html", cls=payload["class"], **ctx), 400
        return render_template("budget.html", **ctx), 400
    store.add_signoff(db, snapshot["view_token"], **fields)
    if is_htmx():
        ctx = page_context(db, role, snapshot, budget)
        # oob: the class's status badges (heading and overview) follow the new verdict
        return render_template("_partials/signoff_block.html", cls=fields["class_name"], oob=True, **ctx)
    return redirect(url_for("budgets.show", token=token) + f"#class-{fields['class_name']}", code=303)


def targets_from_form(form, params: dict) -> dict:
    classes = {}
    for key in form:
        if key.startswith("cls-"):
            i = key[4:]
            classes[form[key]] = {"target_ssim": form.get(f"t-{i}", ""), "coverage": form.get(f"c-{i}", "")}
    payload = {"classes": classes}
    if "choice" in form:
        payload["choice"] = form["choice"]
    return validation.target_changes(payload, params)


@bp.post("/budgets/<token>/targets")
def targets(token):
    db, role, snapshot, budget = resolve(token)
    if role != "edit":
        abort(403, description="this is a share link: changing targets needs the owner's edit link")
    try:
        params = targets_from_form(request.form, snapshot["params"])
    except ValueError as exc:
        return render_template("budget.html", **page_context(db, role, snapshot, budget, error=str(exc))), 400
    refreeze(db, budget, params)
    return redirect(url_for("budgets.show", token=token), code=303)


@bp.get("/budgets/<token>/document.<any(json, csv):kind>")
def download(token, kind):
    _, _, snapshot, _ = resolve(token)
    document = snapshot["document"]
    if kind == "json":  # the snapshot's own facts travel with it (the budget document's "budget" key)
        document = dict(document, budget={"snapshot": snapshot["seq"], "frozen": snapshot["created"]})
    return document_download(document, f"eightfold-budget-{snapshot['seq']}", kind)
