"""Per-image review: original vs candidate at 1:1 and 2:1, the worst crops, SSIM heat-map, blink.

Reachable from a sweep (owner) and from a budget link (designer), each showing the settings of its
own document. Pixels come from :mod:`webapp.imaging`, never the uploaded file itself.
"""

from __future__ import annotations

import logging
from urllib.parse import quote

from flask import Blueprint, abort, render_template, url_for
from markupsafe import Markup

from webapp import decoding, imaging, results, store

log = logging.getLogger(__name__)
bp = Blueprint("review", __name__)


def _sweep_source(sweep_id):
    db = store.get_db()
    sweep = store.get_sweep(db, sweep_id)
    if sweep is None:
        abort(404, description=f"no sweep {sweep_id!r}")
    if sweep["document"] is None:
        abort(409, description=f"this sweep is {sweep['status']}; review opens once it is done")
    return db, sweep["document"], sweep["set_id"]


def _budget_source(token):
    db = store.get_db()
    found = store.resolve_token(db, token)
    if found is None:
        abort(404, description="no budget behind this link")
    _, snapshot, budget = found
    sweep = store.get_sweep(db, budget["sweep_id"])
    return db, snapshot["document"], sweep["set_id"]


def _image(db, document, set_id, n):
    images = document.get("images", [])
    if not 0 <= n < len(images):
        abort(404, description=f"no image {n!r} in this document (it has {len(images)})")
    image = images[n]
    row = db.execute(
        "SELECT * FROM images WHERE set_id = ? AND filename = ?", (set_id, image["path"])
    ).fetchone()
    if row is None:
        abort(410, description=f"the stored file for {image['path']!r} is gone (its sample set was changed)")
    entry = results.find_entry(document, image["class"], image.get("width"))
    setting = (entry or {}).get("setting")
    fallback = setting is None
    if fallback:
        setting = document.get("current") or {"quality": 85, "cutoff": 64, "subsampling": "4:2:0"}
    return image, row, entry, setting, fallback


def crop_size(shape) -> int:
    """Side of the worst-spot windows: 96 px, smaller on small images so three distinct spots fit."""
    return int(min(96, max(16, min(shape[0], shape[1]) // 2)))


def heat_legend(low: float, high: float = 1.0):
    """The heat-map colour key (SVG markup), or None: a missing key must not take the page down."""
    try:
        from webapp.heatmap import ssim_legend_svg

        return Markup(ssim_legend_svg(low, high=high, width=260))
    except Exception:
        log.exception("heat-map key failed")
        return None


def _page(db, document, set_id, n, url, back_url, back_label):
    image, row, entry, setting, fallback = _image(db, document, set_id, n)
    root = store.data_dir()
    width = image.get("width")
    # decoding and rendering run in the bounded pool (webapp.decoding), not on this request thread
    shape = decoding.run(lambda: imaging.pixels(root, row["sha256"], width).shape)
    crops = decoding.run(lambda: imaging.worst_crops(root, row["sha256"], width, setting, size=crop_size(shape)))
    # The pager and "image i of n" stay within the class (and width) under review.
    images = document.get("images", [])
    siblings = [i for i, im in enumerate(images) if im["class"] == image["class"] and im.get("width") == width]
    pos = siblings.index(n)
    fails = results.image_failures(entry, image) if entry else []
    high, low = imaging.heat_scale(imaging.ssim_map(root, row["sha256"], width, setting),
                                   (entry or {}).get("target_ssim"))
    failed = {key: any(f.startswith(word) for f in fails)
              for key, word in (("ssim", "SSIM"), ("chroma", "chroma"), ("local", "local"), ("edge", "edge"),
                                ("blocking", "blocking"))}
    # Where a visible-damage check fails: its worst window, shown first among the spots.
    damage_spots = []
    for check in ("edge", "blocking"):
        if failed[check]:
            try:
                spot = imaging.damage_spot(root, row["sha256"], width, setting, check, size=crop_size(shape))
            except Exception:
                log.exception("damage spot for %r failed", image.get("path"))
                spot = None
            if spot:
                damage_spots.append(spot)
    try:  # the file shown in the candidate pane (cached on disk; the pane requests the same bytes)
        real_bytes = len(decoding.run(imaging.candidate_jpeg, root, row["sha256"], width, setting))
    except Exception:
        log.exception("candidate JPEG for %r failed", image.get("path"))
        real_bytes = None
    return render_template(
        "review.html", image=image, entry=entry, setting=setting, fallback=fallback, n=n, count=len(images),
        px_height=shape[0], px_width=shape[1], crops=damage_spots + crops, damage_spots=damage_spots,
        fails_text="; ".join(fails), failed=failed, pos=pos, count_in_class=len(siblings),
        real_bytes=real_bytes, legend=heat_legend(low, high), heat_low=low, heat_high=high, back_url=back_url, back_label=back_label,
        prev_url=url(siblings[pos - 1]) if pos > 0 else None,
        next_url=url(siblings[pos + 1]) if pos + 1 < len(siblings) else None,
        asset=lambda kind: url(n, kind),
    )


def _asset(db, document, set_id, n, kind):
    image, row, entry, setting, _ = _image(db, document, set_id, n)
    root, width, sha = store.data_dir(), image.get("width"), row["sha256"]
    if kind == "original.png":
        return imaging.png_response(decoding.run(imaging.original_png, root, sha, width))
    if kind == "candidate.jpg":
        return imaging.jpeg_response(decoding.run(imaging.candidate_jpeg, root, sha, width, setting))
    if kind == "thumb.png":  # the budget page's thumbnails, reachable through the share link
        return imaging.png_response(decoding.run(imaging.thumbnail_png, root, sha))
    target = (entry or {}).get("target_ssim")
    return imaging.png_response(decoding.run(lambda: imaging.heatmap_png(root, sha, width, setting, target_ssim=target)))


ASSETS = "<any('original.png', 'candidate.jpg', 'heat.png', 'thumb.png'):kind>"


@bp.get("/sweeps/<sweep_id>/review/<int:n>")
def sweep_review(sweep_id, n):
    db, document, set_id = _sweep_source(sweep_id)

    def url(i, kind=None):
        if kind:
            return url_for("review.sweep_asset", sweep_id=sweep_id, n=i, kind=kind)
        return url_for("review.sweep_review", sweep_id=sweep_id, n=i)

    return _page(db, document, set_id, n, url, url_for("sweeps.show", sweep_id=sweep_id), "Back to the results")


@bp.get(f"/sweeps/<sweep_id>/review/<int:n>/{ASSETS}")
def sweep_asset(sweep_id, n, kind):
    db, document, set_id = _sweep_source(sweep_id)
    return _asset(db, document, set_id, n, kind)


@bp.get("/budgets/<token>/review/<int:n>")
def budget_review(token, n):
    db, document, set_id = _budget_source(token)

    def url(i, kind=None):
        if kind:
            return url_for("review.budget_asset", token=token, n=i, kind=kind)
        return url_for("review.budget_review", token=token, n=i)

    images = document.get("images", [])
    anchor = f"#class-{quote(images[n]['class'])}" if 0 <= n < len(images) else ""
    return _page(db, document, set_id, n, url, url_for("budgets.show", token=token) + anchor,
                 "Back to the budget and sign-off")


@bp.get(f"/budgets/<token>/review/<int:n>/{ASSETS}")
def budget_asset(token, n, kind):
    db, document, set_id = _budget_source(token)
    return _asset(db, document, set_id, n, kind)
