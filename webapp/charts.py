"""Server-side SVG charts: one class's size/SSIM frontier.

Everything here is a pure function from plain data (the sweep document's class entry) to a string of
standalone SVG markup: no JavaScript, no external resources, no ``id`` attributes and no ``<style>``
element (so several charts can sit inline on one page without clashing); class names carry an
``fc-`` prefix for the same reason. Sizes scale with the
``viewBox``. Every piece of text is XML-escaped because class names are user input.

Sizes on the x axis are mean kilobytes per image, 1 KB = 1000 bytes.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from html import escape as _html_escape

__all__ = ["frontier_svg", "nice_ticks", "tick_decimals", "setting_label"]

# Own palette. Blue against orange stays distinct under the common colour-vision deficiencies; every
# series also differs by shape (circle / diamond / hollow square / dashed line), so colour is never
# the only cue.
INK = "#1f2428"
MUTED = "#5e6670"
GRID = "#e4e7eb"
AXIS = "#8a939c"
FRONTIER = "#2b6f97"
CHOSEN = "#d2611c"
CURRENT = "#2a2f35"
TARGET = "#6f7780"
NOTE = "#9a3d0c"

FONT = "system-ui, -apple-system, 'Segoe UI', Roboto, 'Helvetica Neue', Arial, sans-serif"

# Characters XML 1.0 forbids even when escaped; user text is stripped of them.
_XML_ILLEGAL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")

_CHAR_W = 6.6  # rough advance width of a 12 px sans-serif character, for label collision checks


# --------------------------------------------------------------------------------------------------
# Nice numbers


def _nice_number(x: float, *, round_it: bool) -> float:
    """Heckbert's "nice number": 1, 2, 5 or 10 times a power of ten, near ``x`` (x > 0)."""
    exponent = math.floor(math.log10(x))
    fraction = x / 10.0**exponent
    if round_it:
        if fraction < 1.5:
            nice = 1.0
        elif fraction < 3.0:
            nice = 2.0
        elif fraction < 7.0:
            nice = 5.0
        else:
            nice = 10.0
    else:
        if fraction <= 1.0:
            nice = 1.0
        elif fraction <= 2.0:
            nice = 2.0
        elif fraction <= 5.0:
            nice = 5.0
        else:
            nice = 10.0
    return nice * 10.0**exponent


def nice_ticks(lo: float, hi: float, *, count: int = 6) -> list[float]:
    """Tick values covering ``[lo, hi]`` at a 1-2-5 step ("loose" labelling).

    Follows P. Heckbert, "Nice numbers for graph labels", Graphics Gems (1990): the range is rounded
    up to a nice number, divided into ``count - 1`` parts, the part rounded to a nice step, and the
    ends widened to multiples of that step. The result always includes both ends of the data.

    Parameters
    ----------
    lo, hi : float
        Finite data range, ``lo <= hi``. Equal values are widened by 5 % of their magnitude (or by 1
        around zero) so a zero range still gets a usable axis.
    count : int, keyword-only
        Desired number of ticks, at least 2. The actual number is close to it, not exact.

    Returns
    -------
    list of float
        Increasing tick values, rounded to the step's decimal places.
    """
    for name, value in (("lo", lo), ("hi", hi)):
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            raise ValueError(f"{name} must be a finite number, got {value!r}")
    if isinstance(count, bool) or not isinstance(count, int) or count < 2:
        raise ValueError(f"count must be an integer >= 2, got {count!r}")
    lo, hi = float(lo), float(hi)
    if lo > hi:
        raise ValueError(f"lo must not exceed hi, got lo={lo!r}, hi={hi!r}")
    if lo == hi:
        pad = abs(lo) * 0.05 if lo != 0.0 else 1.0
        lo, hi = lo - pad, hi + pad
    span = _nice_number(hi - lo, round_it=False)
    step = _nice_number(span / (count - 1), round_it=True)
    decimals = tick_decimals(step)
    # The small epsilon keeps 0.97 / 0.01 = 96.99999999999999 from adding a spare tick.
    first = math.floor(lo / step + 1e-9)
    last = math.ceil(hi / step - 1e-9)
    return [round(k * step, decimals) + 0.0 for k in range(first, last + 1)]


def tick_decimals(step: float) -> int:
    """Decimal places needed to print ticks ``step`` apart (Heckbert's ``nfrac``)."""
    if not (isinstance(step, (int, float)) and math.isfinite(step) and step > 0):
        raise ValueError(f"step must be a finite number > 0, got {step!r}")
    return max(-math.floor(math.log10(step) + 1e-9), 0)


# --------------------------------------------------------------------------------------------------
# Input handling


@dataclass(frozen=True)
class _Point:
    kb: float
    ssim: float
    label: str
    qualifies: bool | None = None  # False: the class fails a floor or coverage here (drawn hollow)


def _finite(value) -> float | None:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def setting_label(d) -> str:
    """``"q62 · k28 · 4:2:0"`` from a dict with quality / cutoff / subsampling (missing parts dropped)."""
    if not isinstance(d, dict):
        return ""
    parts = []
    if d.get("quality") is not None:
        parts.append(f"q{d['quality']}")
    if d.get("cutoff") is not None:
        parts.append(f"k{d['cutoff']}")
    if d.get("subsampling") is not None:
        parts.append(str(d["subsampling"]))
    return " \u00b7 ".join(parts)


def _same_setting(a: dict, b: dict) -> bool:
    keys = ("quality", "cutoff", "subsampling")
    return all(a.get(k) == b.get(k) for k in keys) and any(a.get(k) is not None for k in keys)


def _to_point(d, per_kb: float) -> _Point | None:
    if not isinstance(d, dict):
        return None
    size = _finite(d.get("estimated_bytes"))
    ssim = _finite(d.get("ssim"))
    if size is None or ssim is None or size < 0:
        return None
    q = d.get("qualifies")
    return _Point(size / per_kb, ssim, setting_label(d), q if isinstance(q, bool) else None)


def _clean(text) -> str:
    return _XML_ILLEGAL.sub("", str(text))


def _esc(text) -> str:
    return _html_escape(_clean(text), quote=True)


def _fmt(x: float) -> str:
    s = f"{x:.2f}".rstrip("0").rstrip(".")
    return "0" if s in ("-0", "") else s


def _format_ssim(x: float) -> str:
    s = f"{x:.3f}"
    return s[:-1] if s.endswith("0") else s


def _format_target(x: float) -> str:
    """A target exactly as set, never rounded into another value (0.99999 must not read "1.00")."""
    s = f"{x:.6f}".rstrip("0")
    head, _, tail = s.partition(".")
    return f"{head}.{tail.ljust(2, '0')}"


def _format_kb(kb: float) -> str:
    if kb >= 100:
        return f"{kb:.0f} KB"
    if kb >= 10:
        return f"{kb:.1f} KB"
    return f"{kb:.2f} KB"


# --------------------------------------------------------------------------------------------------
# The chart


def frontier_svg(class_entry: dict, *, width: int = 560, height: int = 300) -> str:
    """Inline SVG of one class's frontier: mean KB per image (x) against SSIM (y).

    Draws the frontier settings as a stepped line with circle markers (the step reads "best SSIM
    reachable within this many KB"), the chosen setting as a labelled diamond, the current default as
    a hollow square labelled "current", and the target SSIM as a dashed horizontal line.

    Parameters
    ----------
    class_entry : dict
        A class entry of the sweep document. Used keys (all but ``frontier`` optional): ``name``,
        ``width``, ``image_count``, ``target_ssim``, ``setting``, ``estimated_bytes``, ``ssim_min``,
        ``current_bytes``, ``current_point``, ``chosen_point`` and ``frontier`` (list of dicts with
        ``quality``, ``cutoff``, ``subsampling``, ``estimated_bytes`` as a class total, ``ssim``).
        Malformed frontier points are skipped; missing ``chosen_point`` / ``current_point`` fall back
        to ``setting`` plus totals. Without a usable ``image_count`` the x axis shows class totals.
    width, height : int, keyword-only
        Size of the ``viewBox`` (and the default rendered size) in CSS pixels.

    Returns
    -------
    str
        A standalone ``<svg>`` element.
    """
    if not isinstance(class_entry, dict):
        raise ValueError(f"class_entry must be a dict, got {type(class_entry).__name__}")
    for name, value in (("width", width), ("height", height)):
        if isinstance(value, bool) or not isinstance(value, int) or not 240 <= value <= 4000:
            raise ValueError(f"{name} must be an integer from 240 to 4000, got {value!r}")

    name = _clean(class_entry.get("name", "") or "unnamed class")
    count = _finite(class_entry.get("image_count"))
    per_image = count is not None and count >= 1
    per_kb = 1000.0 * (count if per_image else 1.0)
    x_title = "Estimated KB per image" if per_image else "Estimated KB (class total)"

    frontier_raw = class_entry.get("frontier")
    frontier_raw = frontier_raw if isinstance(frontier_raw, (list, tuple)) else []
    frontier = sorted(
        (p for p in (_to_point(d, per_kb) for d in frontier_raw) if p is not None),
        key=lambda p: (p.kb, p.ssim),
    )

    setting = class_entry.get("setting")
    setting = setting if isinstance(setting, dict) else None
    chosen = _to_point(class_entry.get("chosen_point"), per_kb)
    if chosen is None and setting is not None:
        # Fall back to the frontier point with the chosen setting, then to the class totals.
        for d in frontier_raw:
            if isinstance(d, dict) and _same_setting(d, setting):
                chosen = _to_point(d, per_kb)
                if chosen is not None:
                    break
        if chosen is None:
            chosen = _to_point(
                {**setting, "estimated_bytes": class_entry.get("estimated_bytes"),
                 "ssim": class_entry.get("ssim_min")},
                per_kb,
            )
    if chosen is not None and not chosen.label and setting is not None:
        chosen = _Point(chosen.kb, chosen.ssim, setting_label(setting))
    target_unmet = setting is None and class_entry.get("chosen_point") is None

    current = _to_point(class_entry.get("current_point"), per_kb)
    current_kb = None
    if current is None:
        current_bytes = _finite(class_entry.get("current_bytes"))
        if current_bytes is not None and current_bytes >= 0:
            current_kb = current_bytes / per_kb  # size known, SSIM not: drawn as a vertical line

    target = _finite(class_entry.get("target_ssim"))

    # ---- domains
    xs = [p.kb for p in frontier]
    ys = [p.ssim for p in frontier]
    for p in (chosen, current):
        if p is not None:
            xs.append(p.kb)
            ys.append(p.ssim)
    if current_kb is not None:
        xs.append(current_kb)
    if target is not None:
        ys.append(target)

    class_bits = [name]
    if _finite(class_entry.get("width")) is not None:
        class_bits.append(f"{_fmt(float(class_entry['width']))} px wide")
    if per_image:
        n = int(count)
        class_bits.append(f"{n} image" + ("" if n == 1 else "s"))

    # ---- header: class name (shortened for display only; title and aria-label keep it whole) and a
    # legend beside it, or on a second row when the name needs the room.
    left, right, top, bottom = 62, 20, 36, 46
    kinds = [k for k, shown in (("frontier", frontier), ("chosen", chosen is not None),
                                ("current", current is not None or current_kb is not None)) if shown]
    beside = int((width - left - right - _legend_width(kinds) - 16) / 7.4)
    full_row = int((width - left - right) / 7.4)
    header = " · ".join(class_bits)
    legend_y = 20
    if len(header) > beside:
        if len(name) <= beside:
            header = name  # drop the details first
        elif kinds:
            legend_y, top = 38, 52
            if len(header) > full_row:
                header = name
    room = beside if legend_y == 20 else full_row
    if len(header) > room:
        header = header[: max(room - 1, 1)] + "\u2026"
    plot_w, plot_h = width - left - right, height - top - bottom

    out: list[str] = []
    summary = [f"Size against SSIM for class {' · '.join(class_bits)}."]
    if chosen is not None:
        summary.append(f"Chosen {chosen.label}: {_format_kb(chosen.kb)}, SSIM {_format_ssim(chosen.ssim)}.")
    elif target_unmet:
        summary.append("No setting tried meets the target.")
    if current is not None:
        summary.append(f"Current default: {_format_kb(current.kb)}, SSIM {_format_ssim(current.ssim)}.")
    elif current_kb is not None:
        summary.append(f"Current default: {_format_kb(current_kb)}.")
    if target is not None:
        summary.append(f"Target SSIM {_format_target(target)}.")
    aria = " ".join(summary)

    out.append(
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" '
        f'width="{width}" height="{height}" style="max-width:100%;height:auto" '
        f'role="img" aria-label="{_esc(aria)}" font-family="{_esc(FONT)}" font-size="12" fill="{INK}">'
    )
    out.append(f"<title>{_esc(f'Frontier for class {name}')}</title>")
    out.append(f"<desc>{_esc(aria)}</desc>")
    out.append(f'<rect x="0" y="0" width="{width}" height="{height}" fill="#ffffff"/>')

    out.append(
        f'<text class="fc-heading" x="{left}" y="20" font-size="13" font-weight="600">{_esc(header)}</text>'
    )
    out.append(_legend(width - right, legend_y, kinds))

    if not xs or not ys:
        out.append(
            f'<rect x="{left}" y="{top}" width="{plot_w}" height="{plot_h}" fill="none" stroke="{GRID}"/>'
        )
        out.append(
            f'<text class="fc-note" x="{left + plot_w / 2:.2f}" y="{top + plot_h / 2:.2f}" '
            f'text-anchor="middle" fill="{MUTED}">No size/SSIM data for this class</text>'
        )
        out.append("</svg>")
        return "\n".join(out)

    x_ticks = _axis_ticks(min(xs), max(xs), count=max(3, min(8, plot_w // 60)), floor_at_zero=True)
    y_ticks = _axis_ticks(min(ys), max(ys), count=max(3, min(7, plot_h // 40)), ssim=True)
    x0, x1 = x_ticks[0], x_ticks[-1]
    y0, y1 = y_ticks[0], y_ticks[-1]

    def sx(v: float) -> float:
        return left + (v - x0) / (x1 - x0) * plot_w

    def sy(v: float) -> float:
        return top + plot_h - (v - y0) / (y1 - y0) * plot_h

    # ---- grid and axes
    xd = tick_decimals(x_ticks[1] - x_ticks[0])
    yd = tick_decimals(y_ticks[1] - y_ticks[0])
    grid = ['<g class="fc-grid" stroke-width="1">']
    for t in y_ticks:
        y = sy(t)
        grid.append(f'<line x1="{left}" x2="{left + plot_w}" y1="{y:.2f}" y2="{y:.2f}" stroke="{GRID}"/>')
    for t in x_ticks:
        x = sx(t)
        grid.append(f'<line x1="{x:.2f}" x2="{x:.2f}" y1="{top}" y2="{top + plot_h}" stroke="{GRID}"/>')
    grid.append("</g>")
    out.extend(grid)

    axes = [f'<g class="fc-axes" fill="{MUTED}">']
    axes.append(
        f'<line x1="{left}" x2="{left + plot_w}" y1="{top + plot_h}" y2="{top + plot_h}" stroke="{AXIS}"/>'
    )
    axes.append(f'<line x1="{left}" x2="{left}" y1="{top}" y2="{top + plot_h}" stroke="{AXIS}"/>')
    for t in x_ticks:
        x = sx(t)
        axes.append(
            f'<line x1="{x:.2f}" x2="{x:.2f}" y1="{top + plot_h}" y2="{top + plot_h + 4}" stroke="{AXIS}"/>'
        )
        axes.append(
            f'<text class="fc-x-tick" x="{x:.2f}" y="{top + plot_h + 17}" text-anchor="middle" '
            f'data-value="{t!r}">{t:.{xd}f}</text>'
        )
    for t in y_ticks:
        y = sy(t)
        axes.append(f'<line x1="{left - 4}" x2="{left}" y1="{y:.2f}" y2="{y:.2f}" stroke="{AXIS}"/>')
        axes.append(
            f'<text class="fc-y-tick" x="{left - 7}" y="{y + 4:.2f}" text-anchor="end" '
            f'data-value="{t!r}">{t:.{yd}f}</text>'
        )
    axes.append(
        f'<text class="fc-x-title" x="{left + plot_w / 2:.2f}" y="{height - 8}" text-anchor="middle" '
        f'fill="{INK}">{_esc(x_title)}</text>'
    )
    cy_mid = top + plot_h / 2
    axes.append(
        f'<text class="fc-y-title" x="14" y="{cy_mid:.2f}" text-anchor="middle" fill="{INK}" '
        f'transform="rotate(-90 14 {cy_mid:.2f})">SSIM</text>'
    )
    axes.append("</g>")
    out.extend(axes)

    # ---- geometry first, so labels can be placed clear of markers, lines and each other
    plot_box = (left, top, left + plot_w, top + plot_h)
    obstacles: list[tuple[tuple[float, float, float, float], float]] = []  # (box, weight)

    def block(box, weight):
        obstacles.append((box, weight))

    pts = [(sx(p.kb), sy(p.ssim)) for p in frontier]
    for (xa, ya), (xb, yb) in zip(pts, pts[1:]):
        block((xa, ya - 1.5, xb, ya + 1.5), 1.0)  # horizontal run of the step
        block((xb - 1.5, min(ya, yb), xb + 1.5, max(ya, yb)), 1.0)  # vertical rise
    for x, y in pts:
        block((x - 4.5, y - 4.5, x + 4.5, y + 4.5), 20.0)
    ty = sy(target) if target is not None else None
    if ty is not None:
        block((left, ty - 1, left + plot_w, ty + 1), 1.0)
    cur_xy = (sx(current.kb), sy(current.ssim)) if current is not None else None
    if cur_xy is not None:
        block((cur_xy[0] - 6, cur_xy[1] - 6, cur_xy[0] + 6, cur_xy[1] + 6), 20.0)
    cur_line_x = sx(current_kb) if current_kb is not None else None
    if cur_line_x is not None:
        block((cur_line_x - 1, top, cur_line_x + 1, top + plot_h), 1.0)
    ch_xy = (sx(chosen.kb), sy(chosen.ssim)) if chosen is not None else None
    if ch_xy is not None:
        block((ch_xy[0] - 8.5, ch_xy[1] - 8.5, ch_xy[0] + 8.5, ch_xy[1] + 8.5), 20.0)

    labels: list[str] = []

    # Target label: along the line, preferring the left end (few KB at high SSIM is rarely reachable).
    if ty is not None:
        text = f"target {_format_target(target)}"
        w = _text_width(text)
        spots = [
            (left + 6, ty - 5, "start"), (left + 6, ty + 14, "start"),
            (left + plot_w - 6, ty + 14, "end"), (left + plot_w - 6, ty - 5, "end"),
        ]
        lx, ly, anchor = _best_spot(spots, w, plot_box, obstacles)
        labels.append(
            f'<text class="fc-target-label" x="{lx:.2f}" y="{ly:.2f}" text-anchor="{anchor}" fill="{MUTED}" '
            f'stroke="#ffffff" stroke-width="3" paint-order="stroke">{_esc(text)}</text>'
        )

    # No setting met the target: say so, preferring the corner a frontier avoids (many KB, low SSIM).
    if target_unmet:
        msg = (
            f"No setting tried reaches SSIM {_format_target(target)}" if target is not None
            else "No setting chosen for this class"
        )
        w = _text_width(msg)
        spots = [
            (left + plot_w - 6, top + plot_h - 8, "end"), (left + 6, top + 16, "start"),
            (left + plot_w - 6, top + plot_h - 24, "end"), (left + 6, top + plot_h - 8, "start"),
        ]
        lx, ly, anchor = _best_spot(spots, w, plot_box, obstacles)
        labels.append(
            f'<text class="fc-note" x="{lx:.2f}" y="{ly:.2f}" text-anchor="{anchor}" '
            f'font-style="italic" fill="{NOTE}" stroke="#ffffff" stroke-width="3" paint-order="stroke">'
            f"{_esc(msg)}</text>"
        )

    if ch_xy is not None:
        text = chosen.label or "chosen"
        lx, ly, anchor = _best_spot(
            _spots_around(*ch_xy, r=8, prefer="above", right_first=ch_xy[0] < left + plot_w * 0.6),
            _text_width(text, bold=True), plot_box, obstacles,
        )
        labels.append(
            f'<text class="fc-chosen-label" x="{lx:.2f}" y="{ly:.2f}" text-anchor="{anchor}" '
            f'font-weight="600" fill="{CHOSEN}" stroke="#ffffff" stroke-width="3" paint-order="stroke">'
            f"{_esc(text)}</text>"
        )

    if cur_xy is not None:
        lx, ly, anchor = _best_spot(
            _spots_around(*cur_xy, r=6, prefer="side", right_first=cur_xy[0] < left + plot_w * 0.6),
            _text_width("current"), plot_box, obstacles,
        )
        labels.append(
            f'<text class="fc-current-label" x="{lx:.2f}" y="{ly:.2f}" text-anchor="{anchor}" '
            f'fill="{CURRENT}" stroke="#ffffff" stroke-width="3" paint-order="stroke">current</text>'
        )
    elif cur_line_x is not None:
        w = _text_width("current")
        spots = [(cur_line_x + 4, top + 12, "start"), (cur_line_x - 4, top + 12, "end"),
                 (cur_line_x + 4, top + plot_h - 6, "start"), (cur_line_x - 4, top + plot_h - 6, "end")]
        lx, ly, anchor = _best_spot(spots, w, plot_box, obstacles)
        labels.append(
            f'<text class="fc-current-label" x="{lx:.2f}" y="{ly:.2f}" text-anchor="{anchor}" '
            f'fill="{CURRENT}" stroke="#ffffff" stroke-width="3" paint-order="stroke">current</text>'
        )

    # ---- draw, back to front
    if ty is not None:
        out.append(
            f'<line class="fc-target-line" x1="{left}" x2="{left + plot_w}" y1="{ty:.2f}" y2="{ty:.2f}" '
            f'stroke="{TARGET}" stroke-width="1.5" stroke-dasharray="6 4" data-ssim="{target!r}"/>'
        )
    if cur_line_x is not None:
        out.append(
            f'<line class="fc-current-line" x1="{cur_line_x:.2f}" x2="{cur_line_x:.2f}" y1="{top}" '
            f'y2="{top + plot_h}" stroke="{CURRENT}" stroke-width="1.5" stroke-dasharray="2 3">'
            f"<title>{_esc(f'current default: {_format_kb(current_kb)}')}</title></line>"
        )
    if len(pts) > 1:
        d = f"M{pts[0][0]:.2f} {pts[0][1]:.2f}" + "".join(f" H{x:.2f} V{y:.2f}" for x, y in pts[1:])
        out.append(
            f'<path class="fc-frontier-line" d="{d}" fill="none" stroke="{FRONTIER}" '
            f'stroke-width="2" stroke-linejoin="round" stroke-opacity="0.75"/>'
        )
    if pts:
        out.append(f'<g class="fc-frontier-points" fill="{FRONTIER}" stroke="#ffffff" stroke-width="1">')
        dot = 3.5 if len(pts) <= 24 else 2.6  # smaller dots keep a dense frontier readable
        for p, (x, y) in zip(frontier, pts):
            tip = f"{p.label}: {_format_kb(p.kb)}, SSIM {_format_ssim(p.ssim)}".lstrip(": ")
            # The frontier is drawn on luma SSIM; a point the decision rejects (chroma or local
            # floor, or too few images) is hollow, so "above the target line" never misleads.
            hollow = p.qualifies is False
            if hollow:
                tip += " (rejected: fails a floor or the coverage)"
            extra = f' fill="#ffffff" stroke="{FRONTIER}" stroke-width="1.5"' if hollow else ""
            out.append(
                f'<circle class="fc-frontier-point{" fc-rejected" if hollow else ""}" cx="{x:.2f}" cy="{y:.2f}" '
                f'r="{dot}"{extra}><title>{_esc(tip)}</title></circle>'
            )
        out.append("</g>")
    if cur_xy is not None:
        x, y = cur_xy
        tip = f"current default {current.label}: {_format_kb(current.kb)}, SSIM {_format_ssim(current.ssim)}"
        out.append(
            f'<rect class="fc-current-point" x="{x - 5:.2f}" y="{y - 5:.2f}" width="10" height="10" '
            f'fill="#ffffff" stroke="{CURRENT}" stroke-width="2"><title>{_esc(tip)}</title></rect>'
        )
    if ch_xy is not None:
        x, y = ch_xy
        r = 7.5
        tip = f"chosen {chosen.label}: {_format_kb(chosen.kb)}, SSIM {_format_ssim(chosen.ssim)}"
        out.append(
            f'<path class="fc-chosen-point" d="M{x:.2f} {y - r:.2f} L{x + r:.2f} {y:.2f} L{x:.2f} {y + r:.2f} '
            f'L{x - r:.2f} {y:.2f} Z" fill="{CHOSEN}" stroke="#ffffff" stroke-width="1.5" '
            f'data-cx="{x:.2f}" data-cy="{y:.2f}"><title>{_esc(tip)}</title></path>'
        )
    out.extend(labels)
    out.append("</svg>")
    return "\n".join(out)


def _axis_ticks(lo: float, hi: float, *, count: int, ssim: bool = False, floor_at_zero: bool = False):
    if lo == hi:
        # Zero range: widen by hand so SSIM does not run past 1 and sizes do not go negative.
        pad = 0.01 if ssim else (abs(lo) * 0.1 or 1.0)
    else:
        # A little air so points on a nice value do not sit on the frame.
        pad = (hi - lo) * 0.03
    top_cap = 1.0 if ssim and hi <= 1.0 else math.inf
    lo, hi = lo - pad, min(hi + pad, max(top_cap, hi))
    if lo == hi:  # every value is exactly 1.0
        lo -= 0.02
    if floor_at_zero and lo < 0 <= lo + pad:
        lo = 0.0
    return nice_ticks(lo, hi, count=count)


def _text_width(text: str, *, bold: bool = False) -> float:
    return len(text) * _CHAR_W * (1.08 if bold else 1.0)


def _spots_around(x, y, *, r, prefer, right_first):
    """Candidate (x, baseline y, anchor) spots for a label next to a marker, best first."""
    side_r, side_l = (x + r + 4, y + 4, "start"), (x - r - 4, y + 4, "end")
    sides = [side_r, side_l] if right_first else [side_l, side_r]
    diag = []
    for dy in (0, 14, 28):
        ne, nw = (x + r * 0.5, y - r - 4 - dy, "start"), (x - r * 0.5, y - r - 4 - dy, "end")
        se, sw = (x + r * 0.5, y + r + 13 + dy, "start"), (x - r * 0.5, y + r + 13 + dy, "end")
        up = [ne, nw] if right_first else [nw, ne]
        down = [se, sw] if right_first else [sw, se]
        diag.append((up, down))
    above = [s for up, _ in diag for s in up]
    below = [s for _, down in diag for s in down]
    if prefer == "above":
        return above[:2] + sides + below[:2] + above[2:] + below[2:]
    return sides + below[:2] + above[:2] + below[2:] + above[2:]


def _best_spot(spots, w, plot_box, obstacles):
    """The first spot that stays in the plot and covers nothing; else the least-covering one.

    The chosen label box joins ``obstacles`` so later labels keep clear of it.
    """
    best = None
    for rank, (lx, ly, anchor) in enumerate(spots):
        x_a = lx - w if anchor == "end" else lx
        box = (x_a - 2, ly - 11, x_a + w + 2, ly + 3)
        outside = (
            max(plot_box[0] - box[0], 0) + max(box[2] - plot_box[2], 0)
            + max(plot_box[1] - box[1], 0) + max(box[3] - plot_box[3], 0)
        )
        cost = outside * 50.0 + sum(_overlap_area(box, o) * wt for o, wt in obstacles)
        if best is None or cost < best[0] - 1e-9:
            best = (cost, rank, lx, ly, anchor, box)
        if cost == 0:
            break
    _, _, lx, ly, anchor, box = best
    obstacles.append((box, 20.0))
    return lx, ly, anchor


def _overlap_area(a, b) -> float:
    return max(min(a[2], b[2]) - max(a[0], b[0]), 0.0) * max(min(a[3], b[3]) - max(a[1], b[1]), 0.0)


_LEGEND_EXTRA = {"frontier": 34, "chosen": 28, "current": 28}


def _legend_width(kinds) -> float:
    return sum(len(k) * 6.0 + _LEGEND_EXTRA[k] for k in kinds)


def _legend(x_right: float, y: float, kinds) -> str:
    """Small legend of the series shown, right-aligned in the header row, built right to left."""
    if not kinds:
        return ""
    parts = ['<g class="fc-legend" font-size="11" fill="' + MUTED + '">']
    x = x_right
    for kind in reversed(kinds):
        text = kind
        tw = len(text) * 6.0
        tx = x - tw
        parts.append(f'<text x="{tx:.2f}" y="{y}">{text}</text>')
        mx = tx - 10
        my = y - 4
        if kind == "frontier":
            parts.append(
                f'<line x1="{mx - 10:.2f}" x2="{mx + 6:.2f}" y1="{my}" y2="{my}" '
                f'stroke="{FRONTIER}" stroke-width="2"/>'
            )
            parts.append(f'<circle cx="{mx - 2:.2f}" cy="{my}" r="3" fill="{FRONTIER}"/>')
            x = mx - 24
        elif kind == "chosen":
            r = 5
            parts.append(
                f'<path d="M{mx:.2f} {my - r} L{mx + r:.2f} {my} L{mx:.2f} {my + r} L{mx - r:.2f} {my} Z" '
                f'fill="{CHOSEN}"/>'
            )
            x = mx - 18
        else:
            parts.append(
                f'<rect x="{mx - 4:.2f}" y="{my - 4}" width="8" height="8" fill="#ffffff" '
                f'stroke="{CURRENT}" stroke-width="1.6"/>'
            )
            x = mx - 18
    parts.append("</g>")
    return "".join(parts)
