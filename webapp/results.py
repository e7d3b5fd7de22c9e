"""Turning a sweep document into what the results table and charts show (sorting, totals, rows)."""

from __future__ import annotations

import logging
import math

from markupsafe import Markup

log = logging.getLogger(__name__)

SORTS = {
    "class": lambda e: (e["name"].lower(), e["width"] or 0),
    "width": lambda e: e["width"] or 0,
    "images": lambda e: e["image_count"],
    "quality": lambda e: (e["setting"] or {}).get("quality"),
    "subsampling": lambda e: (e["setting"] or {}).get("subsampling"),
    "cutoff": lambda e: (e["setting"] or {}).get("cutoff"),
    "mean_kb": lambda e: e.get("mean_bytes"),
    "total_kb": lambda e: e.get("estimated_bytes"),
    "bpp": lambda e: e.get("bpp"),
    "share": lambda e: e.get("share_meeting"),
    "worst": lambda e: e.get("ssim_min"),
    "savings": lambda e: e.get("savings_vs_current"),
    "plain": lambda e: (e.get("plain_fallback") or {}).get("extra_share"),
}
COLUMNS = [  # (sort key, heading, title)
    ("class", "Class", "image class (folder)"),
    ("width", "Width", "delivery width in px; 'as uploaded' keeps each file's own width"),
    ("images", "Images", "images in the class"),
    ("quality", "Quality", "chosen IJG quality factor (1-100): scales the quantization tables"),
    ("cutoff", "Cutoff",
     "zigzag cutoff: how many of the 64 DCT coefficients per 8x8 block are kept (64 = all); "
     "fewer drops the finest detail"),
    ("subsampling", "Chroma", "chroma subsampling: 4:4:4 keeps colour at full resolution, "
     "4:2:0 halves it both ways"),
    ("mean_kb", "Mean KB", "mean estimated size per image at the chosen setting (1 KB = 1000 bytes)"),
    ("total_kb", "Total KB", "estimated size of the whole class at the chosen setting"),
    ("bpp", "bpp", "bits per pixel at the chosen setting"),
    ("share", "Meeting", "share of images that pass every check (SSIM target, chroma floor, visible damage at edges "
     "and in smooth areas, local floor when set)"),
    ("worst", "Worst SSIM", "lowest SSIM in the class at the chosen setting"),
    ("savings", "vs today", "what the chosen setting saves over the whole class against the current default, "
     "and the change in bytes (it costs more where the default fails this class's checks)"),
    ("plain", "Quality number only",
     "the cheapest setting an encoder's quality number gives (standard tables, cutoff 64) that passes the same "
     "checks, and what it costs over the chosen setting"),
]


def plain_text(entry: dict) -> str:
    """The quality-number-only column: its setting and its extra cost over the chosen setting."""
    fb = entry.get("plain_fallback")
    if not entry.get("setting"):
        return "–"
    if fb is None:
        return "none passes" if "plain_fallback" in entry else "not in this document"
    s = fb["setting"]
    text = f"q{s['quality']} {s['subsampling']}"
    if not fb["extra_bytes"]:
        return f"{text} · same"
    return f"{text} · +{fb['extra_share'] * 100:.1f}%"


def plain_title(entry: dict) -> str:
    """The column's tooltip: the fallback's extra bytes over the class."""
    fb = entry.get("plain_fallback")
    if not fb or not entry.get("setting"):
        return ""
    return (f"{fb['extra_bytes'] / 1000:,.1f} KB more over the class than the chosen setting "
            f"({fb['estimated_bytes'] / 1000:,.1f} KB in all)")


def saved_bytes(entry: dict):
    """Bytes the chosen setting saves over the class against the current default (None if unknown)."""
    chosen, current = entry.get("estimated_bytes"), entry.get("current_bytes")
    if chosen is None or current is None:
        return None
    return current - chosen


def check_sort(sort, direction):
    sort = sort if sort in SORTS else "class"
    direction = direction if direction in ("asc", "desc") else "asc"
    return sort, direction


def sorted_rows(document: dict, sort: str, direction: str):
    """(index into document['classes'], entry) pairs in the requested order; missing values last."""
    key = SORTS[sort]
    entries = list(enumerate(document.get("classes", [])))
    present = [(i, e) for i, e in entries if key(e) is not None]
    missing = [(i, e) for i, e in entries if key(e) is None]
    present.sort(key=lambda ie: key(ie[1]), reverse=direction == "desc")
    return present + missing


def totals(document: dict) -> dict:
    """Bytes at the chosen settings against the current default, every class counted
    (``dct.report.totals``: a class with no qualifying setting keeps the default and saves nothing)."""
    from dct.report import totals as document_totals

    out = document_totals(document)
    out["unmet"] = sorted({e["name"] for e in document.get("classes", []) if not e.get("meets_target", True)})
    return out


def images_of(document: dict, entry: dict):
    """(index into document['images'], image) for one class entry (class name and width)."""
    return [
        (i, im) for i, im in enumerate(document.get("images", []))
        if im.get("class") == entry["name"] and im.get("width") == entry.get("width")
    ]


def find_entry(document: dict, class_name: str, width):
    for entry in document.get("classes", []):
        if entry["name"] == class_name and entry.get("width") == width:
            return entry
    return None


def chart(entry: dict, *, width: int = 420, height: int = 260):
    """The frontier chart SVG for a class entry, or None while the chart module is missing."""
    try:
        from webapp.charts import frontier_svg
    except ImportError:
        return None
    try:
        return Markup(frontier_svg(entry, width=width, height=height))
    except Exception:  # a chart problem must not take the results page down with it
        log.exception("frontier chart failed for class %r", entry.get("name"))
        return None


def image_failures(entry: dict, image: dict) -> list[str]:
    """Which of the class's checks an image fails at the class's setting (empty: it passes).

    Mirrors ``dct.budget.accepts``: luma SSIM against the target, Cb and Cr SSIM against the chroma
    floor (colour images only), local SSIM against the local floor unless that floor is 0, and the
    visible-damage checks (``dct.damage``: SSIM next to strong edges, blocking in smooth areas).
    """
    out = []
    target = entry.get("target_ssim")
    if target is not None and image.get("ssim") is not None and image["ssim"] < target:
        out.append(f"SSIM < {target:g}")
    floor = entry.get("chroma_floor")
    chroma = [v for v in (image.get("ssim_cb"), image.get("ssim_cr")) if v is not None]
    if floor is not None and chroma and min(chroma) < floor:
        out.append(f"chroma < {floor:g}")
    local = entry.get("local_floor")
    if local and image.get("ssim_local") is not None and image["ssim_local"] < local:
        out.append(f"local < {local:g}")
    edge = entry.get("edge_floor")
    if edge and image.get("edge_ssim") is not None and image["edge_ssim"] < edge:
        out.append(f"edge SSIM {image['edge_ssim']:.3f} < {edge:g} (halos or blur at sharp edges)")
    limit = entry.get("blocking_limit")
    if limit and image.get("blocking") is not None and image["blocking"] > limit:
        out.append(f"blocking {image['blocking']:.2f} > {limit:g} levels (8×8 blocks in smooth areas)")
    return out


def rejections(curves, params: dict, entry: dict, *, limit: int = 5):
    """Why the settings just cheaper than the chosen one, and the current default, were turned down.

    The checks are the ones the entry records (target, coverage, floors). Returns
    ``{"cheaper": [row, ...], "cheaper_count", "current": row | None, "checks": {...}}`` where a row is
    ``{"setting", "bytes", "mean_bytes", "share", "passes", "fails": {"ssim", "chroma", "local"}}``;
    ``cheaper`` holds up to ``limit`` rejected settings below the chosen one's bytes, most expensive
    first (the nearest misses). ``None`` when the stored curves cannot answer it; this is an
    explanation, so a problem here must never take a page down.
    """
    try:
        return _rejections(curves, params, entry, limit)
    except Exception:
        log.exception("rejection summary failed for class %r", entry.get("name"))
        return None


def _rejections(curves, params, entry, limit):
    if not curves or not curves.get("images"):
        return None
    from dct import budget
    from dct.evaluate import ImageResult
    from dct.pipeline import class_tables
    from dct.tables import Setting

    # The entry records the checks its decision used; reading them (not today's defaults) keeps the
    # explanation true for documents made before a default changed.
    targets = budget.Targets(target_ssim=entry["target_ssim"], coverage=entry["coverage"],
                             chroma_floor=entry.get("chroma_floor"),
                             local_floor=entry.get("local_floor") if entry.get("local_floor") is not None
                             else budget.DEFAULT_LOCAL_FLOOR,
                             # documents from before the visible-damage check: their curves carry
                             # neutral values, so the defaults change nothing for them
                             edge_floor=entry.get("edge_floor", budget.DEFAULT_EDGE_FLOOR),
                             blocking_limit=entry.get("blocking_limit", budget.DEFAULT_BLOCKING_LIMIT))
    results = [ImageResult.from_dict(d) for d in curves["images"]]
    table = class_tables(results, entry["name"], entry.get("width"))
    if not table:
        return None
    keys = sorted(table)
    common = set.intersection(*(set(table[k]) for k in keys))

    def row(setting):
        measures = [table[k][setting] for k in keys]
        fails = {"ssim": 0, "chroma": 0, "local": 0, "damage": 0}
        for m in measures:
            if m.ssim + 1e-12 < targets.target_ssim:
                fails["ssim"] += 1
            if m.ssim_cb is not None and min(m.ssim_cb, m.ssim_cr) + 1e-12 < targets.effective_chroma_floor:
                fails["chroma"] += 1
            if targets.local_floor > 0 and m.ssim_local + 1e-12 < targets.local_floor:
                fails["local"] += 1
            if budget.damage_failures(m, targets):
                fails["damage"] += 1
        summary = budget.summarize(setting, measures, targets)
        return {"setting": setting.as_dict(), "bytes": summary.total_bytes,
                "mean_bytes": summary.total_bytes / len(keys), "share": summary.share_accepting,
                "passes": summary.qualifies, "fails": fails, "images": len(keys)}

    chosen = entry.get("setting")
    limit_bytes = entry.get("estimated_bytes")
    cheaper = []
    for setting in common:
        r = row(setting)
        if r["passes"] or (limit_bytes is not None and r["bytes"] >= limit_bytes):
            continue
        cheaper.append(r)
    if limit_bytes is None:  # nothing qualifies: the closest misses first
        cheaper.sort(key=lambda r: (-r["share"], r["bytes"]))
    else:
        cheaper.sort(key=lambda r: -r["bytes"])
    current = None
    if params.get("current"):
        cur = Setting.from_dict(params["current"])
        if cur in common:
            current = row(cur)
            current["chosen"] = bool(chosen) and Setting.from_dict(chosen) == cur
    return {
        "cheaper": cheaper[:limit], "cheaper_count": len(cheaper), "current": current,
        "checks": {"ssim": targets.target_ssim, "chroma": targets.effective_chroma_floor,
                   "local": targets.local_floor, "edge": targets.edge_floor,
                   "blocking": targets.blocking_limit, "coverage": targets.coverage, "images": len(keys),
                   # as dct.budget counts it: at least ceil(coverage * n) images must pass
                   "need": max(1, math.ceil(targets.coverage * len(keys) - 1e-9))},
    }
