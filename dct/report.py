"""The result document (JSON, schema_version 2), its CSV form and the terminal table.

Document keys (stable; scripts, the web API and exports depend on them; the JSON Schema is
``dct/budget.schema.json``, and ``dct.contract`` loads and validates documents)::

    schema_version, generator, created, current{quality,cutoff,subsampling}, grid{...},
    choice ("custom_tables" | "plain_quality"),
    classes: [{name, width, image_count, target_ssim, coverage, chroma_floor, local_floor,
               edge_floor, blocking_limit,
               setting{quality,cutoff,subsampling} | null, quant_tables{luma,chroma} | null,
               meets_target, coverage_met, share_meeting, estimated_bytes, mean_bytes, bpp,
               ssim_min, ssim_at_coverage, current_bytes, savings_vs_current, chosen_point,
               current_point, frontier[{quality,cutoff,subsampling,estimated_bytes,ssim,qualifies}],
               plain_fallback{setting, quant_tables, estimated_bytes, extra_bytes, extra_share,
                              ssim_min, share_meeting} | null, message}],
    images: [{path, class, width, pixel_width, pixel_height, setting, estimated_bytes, ssim,
              ssim_cb, ssim_cr, ssim_local, edge_ssim, blocking, damage_fails, meets}],
    rejected: [{path, error}]

``estimated_bytes`` of a class is the total over its images; ``ssim`` of a frontier point is the
luma SSIM that a ``coverage`` share of the class reaches; ``savings_vs_current`` is the fraction
of the current default's bytes saved (0.31 = 31 % fewer bytes). Quantization tables are 8x8 lists
in natural row-major order, exactly what an encoder's table option takes.

``choice`` says which settings the decisions chose among: any grid setting ("custom_tables"), or
cutoff 64 only ("plain_quality": what an encoder's quality number gives). ``plain_fallback`` is the
cheapest cutoff-64 setting that meets the class's checks, with what it costs over ``setting``
(``extra_bytes``, and ``extra_share`` = 0.12 for 12 % more); null when none in the grid does.

Version 2 added ``choice`` and ``plain_fallback``; ``dct.contract.load_document`` still reads
version 1 documents (they chose among custom tables and name no fallback).
"""

from __future__ import annotations

import csv
import io
from datetime import datetime, timezone

from . import __version__, budget
from .tables import Setting

SCHEMA_VERSION = 2
CHOICES = ("custom_tables", "plain_quality")


def _point(summary: budget.SettingSummary | None) -> dict | None:
    if summary is None:
        return None
    d = summary.setting.as_dict()
    d.update(estimated_bytes=summary.total_bytes, ssim=round(summary.ssim_at_coverage, 6), qualifies=summary.qualifies)
    return d


def _tables(setting: Setting) -> dict:
    luma, chroma = setting.tables()
    return {"luma": luma.tolist(), "chroma": chroma.tolist()}


def _fallback(decision: budget.Decision) -> dict | None:
    p = decision.plain
    if p is None or decision.summary is None:
        return None
    return {
        "setting": p.setting.as_dict(),
        "quant_tables": _tables(p.setting),
        "estimated_bytes": p.total_bytes,
        "extra_bytes": decision.plain_extra_bytes,
        "extra_share": None if decision.plain_extra_share is None else round(decision.plain_extra_share, 6),
        "ssim_min": round(p.ssim_min, 6),
        "share_meeting": round(p.share_accepting, 6),
    }


def class_entry(spec, width, decision: budget.Decision, pixels: int) -> dict:
    targets = budget.targets_for(spec)
    targets_local = targets.local_floor
    chroma_floor = targets.effective_chroma_floor
    s = decision.summary
    entry = {
        "name": spec.name,
        "width": width,
        "image_count": decision.image_count,
        "target_ssim": spec.target_ssim,
        "coverage": spec.coverage,
        "chroma_floor": chroma_floor,
        "local_floor": targets_local,
        "edge_floor": targets.edge_floor,
        "blocking_limit": targets.blocking_limit,
        "setting": decision.setting.as_dict() if decision.setting else None,
        "quant_tables": _tables(decision.setting) if decision.setting else None,
        "meets_target": s is not None,
        "coverage_met": s is not None,
        "share_meeting": round(s.share_accepting, 6) if s else (round(decision.best_share.share_accepting, 6) if decision.best_share else 0.0),
        "estimated_bytes": s.total_bytes if s else None,
        "mean_bytes": round(s.total_bytes / decision.image_count, 1) if s else None,
        "bpp": round(8.0 * s.total_bytes / pixels, 4) if s and pixels else None,
        "ssim_min": round(s.ssim_min, 6) if s else None,
        "ssim_at_coverage": round(s.ssim_at_coverage, 6) if s else None,
        "current_bytes": decision.current.total_bytes if decision.current else None,
        "savings_vs_current": round(decision.savings_vs_current, 6) if decision.savings_vs_current is not None else None,
        "chosen_point": _point(s),
        "current_point": _point(decision.current),
        "frontier": [_point(f) for f in decision.frontier],
        "plain_fallback": _fallback(decision),
        "message": None,
    }
    if s is None:
        best = decision.best_share
        closest = f"; closest: {best.setting.label()} with {best.share_accepting:.0%} of images" if best else ""
        among = " cutoff-64 (quality number only)" if decision.plain_only else ""
        entry["message"] = (
            f"no{among} setting in the grid reaches SSIM {spec.target_ssim} (chroma floor {chroma_floor}, "
            f"local floor {targets_local}, edge floor {targets.edge_floor}, blocking limit "
            f"{targets.blocking_limit}) for {spec.coverage:.0%} of images{closest}"
        )
    return entry


def build_document(*, decisions, results, rejected, current: Setting, grid: dict | None,
                   plain_only: bool = False) -> dict:
    """Assemble the document from per-class decisions and per-image results."""
    by_key = {r.key: r for r in results}
    classes, images = [], []
    for spec, width, decision in decisions:
        keys = sorted(decision.per_image) or sorted(
            r.key for r in results if r.class_name == spec.name and r.error is None
        )
        shown = decision.setting or (decision.best_share.setting if decision.best_share else None)
        targets = budget.targets_for(spec)
        pixels = 0
        for key in keys:
            curve = next(c for c in by_key[key].curves if c.width == width)
            pixels += curve.pixel_width * curve.pixel_height
            point = next((p for p in curve.points if p.setting == shown), None)
            if point is None:
                continue
            m = budget.Measure.of(point)
            images.append(
                {
                    "path": key,
                    "class": spec.name,
                    "width": width,
                    "pixel_width": curve.pixel_width,
                    "pixel_height": curve.pixel_height,
                    "setting": shown.as_dict(),
                    "estimated_bytes": point.estimated_bytes,
                    "ssim": round(point.ssim, 6),
                    "ssim_cb": None if point.ssim_cb is None else round(point.ssim_cb, 6),
                    "ssim_cr": None if point.ssim_cr is None else round(point.ssim_cr, 6),
                    "ssim_local": round(point.ssim_local, 6),
                    "edge_ssim": round(point.edge_ssim, 6),
                    "blocking": round(point.blocking, 4),
                    "damage_fails": budget.damage_failures(m, targets),
                    "meets": budget.accepts(m, targets),
                }
            )
        classes.append(class_entry(spec, width, decision, pixels))
    return {
        "schema_version": SCHEMA_VERSION,
        "generator": f"eightfold {__version__}",
        "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "current": current.as_dict(),
        "grid": grid,
        "choice": CHOICES[1] if plain_only else CHOICES[0],
        "classes": classes,
        "images": images,
        "rejected": sorted(rejected, key=lambda r: r["path"]),
    }


CSV_COLUMNS = [
    "name", "width", "image_count", "quality", "cutoff", "subsampling", "estimated_bytes", "mean_bytes",
    "bpp", "meets_target", "coverage_met", "share_meeting", "ssim_min", "ssim_at_coverage", "current_bytes",
    "savings_vs_current", "target_ssim", "coverage", "chroma_floor", "local_floor", "quant_table_luma",
    "quant_table_chroma", "plain_quality", "plain_subsampling", "plain_estimated_bytes", "plain_extra_bytes",
    "plain_extra_share", "message",
]  # fmt: skip


def document_to_csv(doc: dict) -> str:
    """One row per class (and width); tables as 64 space-separated values in row-major order."""
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=CSV_COLUMNS, lineterminator="\n")
    writer.writeheader()
    for c in doc["classes"]:
        row = {k: c.get(k) for k in CSV_COLUMNS if k in c}
        setting = c.get("setting") or {}
        row.update(quality=setting.get("quality"), cutoff=setting.get("cutoff"), subsampling=setting.get("subsampling"))
        fb = c.get("plain_fallback") or {}
        row.update(plain_quality=(fb.get("setting") or {}).get("quality"),
                   plain_subsampling=(fb.get("setting") or {}).get("subsampling"),
                   plain_estimated_bytes=fb.get("estimated_bytes"), plain_extra_bytes=fb.get("extra_bytes"),
                   plain_extra_share=fb.get("extra_share"))
        tables = c.get("quant_tables") or {}
        for name in ("luma", "chroma"):
            t = tables.get(name)
            row[f"quant_table_{name}"] = " ".join(str(v) for r in t for v in r) if t else ""
        writer.writerow({k: ("" if v is None else v) for k, v in row.items()})
    return buf.getvalue()


def _kb(n) -> str:
    return "-" if n is None else f"{n / 1000:,.1f}"


MINUS = "\u2212"


def describe_saving(saved_bytes, savings, *, digits: int = 0) -> str:
    """A saving in words that cannot be misread: "saves 258.7 KB (−34 %)" / "costs 63.3 KB more (+209 %)".

    ``saved_bytes`` is current minus chosen bytes; ``savings`` the fraction of the current bytes
    saved (``savings_vs_current``). The percentage is the change in bytes, so it is negative when
    the file gets smaller.
    """
    if saved_bytes is None:
        return "-"
    change = "" if savings is None else f" ({_signed_pct(-savings, digits)})"
    if saved_bytes == 0:
        return f"same size{change}"
    n = abs(saved_bytes)
    amount = f"{n:,} bytes" if n < 50 else f"{_kb(n)} KB"  # never "0.0 KB" for a real difference
    return f"saves {amount}{change}" if saved_bytes > 0 else f"costs {amount} more{change}"


def _signed_pct(fraction: float, digits: int) -> str:
    text = f"{abs(fraction) * 100:.{digits}f}"
    if float(text) == 0:
        return f"{text} %"
    return ("+" if fraction > 0 else MINUS) + text + " %"


def totals(doc: dict) -> dict:
    """The whole set against the current default, every class counted.

    A class with no qualifying setting keeps the current default, so it is counted at its current
    bytes on both sides: it saves nothing, and leaving it out would make the saving look bigger
    than it is. Returns ``{"chosen_bytes", "current_bytes", "saved_bytes", "savings", "images",
    "undecided"}`` (``savings`` None when the current bytes are unknown).
    """
    chosen = current = images = 0
    known = True
    undecided = []
    for c in doc.get("classes", []):
        images += c.get("image_count") or 0
        if c.get("current_bytes") is None:
            known = False
            continue
        current += c["current_bytes"]
        if c.get("setting"):
            chosen += c["estimated_bytes"]
        else:
            chosen += c["current_bytes"]
            undecided.append(c["name"])
    return {
        "chosen_bytes": chosen,
        "current_bytes": current,
        "saved_bytes": current - chosen,
        "savings": (1 - chosen / current) if known and current else None,
        "images": images,
        "undecided": sorted(set(undecided)),
    }


def describe_estimate_error(bytes_error: float) -> str:
    """``(estimated - actual) / actual`` in words: "estimate 0.14 % under the real file"."""
    if round(abs(bytes_error) * 100, 2) == 0:
        return "estimate matches the real file"
    side = "under" if bytes_error < 0 else "over"
    return f"estimate {abs(bytes_error) * 100:.2f} % {side} the real file"


def _fallback_text(fb: dict | None) -> str:
    """The plain-quality column: its setting and what it costs over the chosen setting."""
    if not fb:
        return "none meets the checks"
    setting = f"q{fb['setting']['quality']} {fb['setting']['subsampling']}"
    if not fb["extra_bytes"]:
        return f"{setting} (same)"
    return f"{setting}, {describe_saving(-fb['extra_bytes'], -fb['extra_share'], digits=1)}"


def format_table(doc: dict) -> str:
    """A readable terminal table of the class decisions."""
    head = ["class", "width", "imgs", "setting", "mean KB", "total KB", "bpp", "meeting", "worst SSIM", "vs current default",
            "quality number only"]
    rows = []
    for c in doc["classes"]:
        s = c["setting"]
        fb = c.get("plain_fallback")
        rows.append(
            [
                c["name"],
                "as is" if c["width"] is None else str(c["width"]),
                str(c["image_count"]),
                "NONE" if s is None else f"q{s['quality']} k{s['cutoff']} {s['subsampling']}",
                _kb(c["mean_bytes"]),
                _kb(c["estimated_bytes"]),
                "-" if c["bpp"] is None else f"{c['bpp']:.2f}",
                f"{c['share_meeting']:.0%}",
                "-" if c["ssim_min"] is None else f"{c['ssim_min']:.4f}",
                "-" if c["savings_vs_current"] is None else describe_saving(
                    c["current_bytes"] - c["estimated_bytes"], c["savings_vs_current"]),
                _fallback_text(fb) if s else "-",
            ]
        )
    widths = [max(len(r[i]) for r in rows + [head]) for i in range(len(head))]
    line = lambda r: "  ".join(v.ljust(w) if i in (0, 3, 10) else v.rjust(w) for i, (v, w) in enumerate(zip(r, widths))).rstrip()
    out = [line(head), line(["-" * w for w in widths])] + [line(r) for r in rows]
    t = totals(doc)
    if t["savings"] is not None and doc["classes"]:
        cur = doc.get("current") or {}
        label = f" (q{cur['quality']} k{cur['cutoff']} {cur['subsampling']})" if cur else ""
        kept = ""
        if t["undecided"]:
            kept = (f"; {', '.join(t['undecided'])} keep{'s' if len(t['undecided']) == 1 else ''} the current "
                    f"default (no qualifying setting), counted at {'its' if len(t['undecided']) == 1 else 'their'} current size")
        out.append(f"total: {_kb(t['chosen_bytes'])} KB for {t['images']} image(s) against {_kb(t['current_bytes'])} KB "
                   f"at the current default{label}: {describe_saving(t['saved_bytes'], t['savings'], digits=1)}{kept}")
    if doc.get("choice") == "plain_quality":
        out.append("settings chosen among cutoff 64 only (quality number only, --plain-quality)")
    for c in doc["classes"]:
        if c["message"]:
            out.append(f"! {c['name']}: {c['message']}")
        if c.get("verified"):
            v = c["verified"]
            out.append(
                f"  verified {c['name']}: actual {_kb(v['actual_bytes'])} KB vs estimated {_kb(c['estimated_bytes'])} KB "
                f"({describe_estimate_error(v['bytes_error'])}), actual share meeting {v['actual_share_meeting']:.0%}, "
                f"actual worst SSIM {v['actual_ssim_min']:.4f}"
            )
    if doc["rejected"]:
        out.append(f"rejected {len(doc['rejected'])} file(s):")
        out += [f"  {r['path']}: {r['error']}" for r in doc["rejected"]]
    return "\n".join(out)
