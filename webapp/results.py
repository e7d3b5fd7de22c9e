"""Turning a sweep document into what the results table and charts show (sorting, totals, rows)."""

from __future__ import annotations

import logging

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
}
COLUMNS = [  # (sort key, heading, title)
    ("class", "Class", "image class (folder)"),
    ("width", "Width", "delivery width"),
    ("images", "Images", "images in the class"),
    ("quality", "Quality", "chosen IJG quality factor"),
    ("subsampling", "Chroma", "chosen chroma subsampling"),
    ("cutoff", "Cutoff", "zigzag cutoff: coefficients kept per block"),
    ("mean_kb", "Mean KB", "mean estimated size per image"),
    ("total_kb", "Total KB", "estimated size of the whole class"),
    ("bpp", "bpp", "bits per pixel"),
    ("share", "Meeting", "share of images meeting the SSIM target"),
    ("worst", "Worst SSIM", "lowest SSIM in the class at the chosen setting"),
    ("savings", "Saved", "bytes saved against the current default"),
]


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
    """Bytes at the chosen settings against the current default, over the classes that have a setting.

    A class with no qualifying setting is left out of both sides (and listed), so it cannot make the
    saving look bigger than it is.
    """
    entries = document.get("classes", [])
    decided = [e for e in entries if e.get("setting")]
    chosen = sum(e.get("estimated_bytes") or 0 for e in decided)
    current = sum(e.get("current_bytes") or 0 for e in decided)
    return {
        "chosen_bytes": chosen,
        "current_bytes": current,
        "savings": (1 - chosen / current) if current else None,
        "images": sum(e.get("image_count") or 0 for e in decided),
        "unmet": sorted({e["name"] for e in entries if not e.get("meets_target", True)}),
        "undecided": sorted({e["name"] for e in entries if not e.get("setting")}),
    }


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
