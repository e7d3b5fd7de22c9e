"""SSIM heat-map overlays (PNG) and their colour key (SVG).

An SSIM map (1 = no visible change) becomes an RGBA overlay that is transparent at or above a chosen
SSIM (``high``, 1 by default; the review page picks it per image so that smoothed texture is not
coloured all over) and turns opaque and warm towards ``low``. The colour ramp is our own: four anchor colours
in CIELAB with lightness falling steadily from a pale straw to a brick red, interpolated in Lab, so
"darker" always reads as "worse" - also in greyscale and for the common colour-vision deficiencies,
which keep lightness order.
"""

from __future__ import annotations

import io
import math

import numpy as np
from PIL import Image

__all__ = ["heat_rgba", "ramp_rgb", "ssim_heatmap_png", "ssim_legend_svg", "lab_to_srgb"]

# (t, L*, a*, b*) anchors; t = 0 is "no damage", t = 1 is "at or below `low`". L* falls linearly in t.
_ANCHORS = np.array(
    [
        [0.00, 95.0, -3.0, 30.0],  # pale straw
        [0.35, 80.0, 10.0, 62.0],  # amber
        [0.70, 63.0, 40.0, 52.0],  # orange-red
        [1.00, 46.0, 58.0, 36.0],  # brick red
    ]
)

# CIE D65 reference white (2 degree observer) and the sRGB (IEC 61966-2-1) XYZ -> linear RGB matrix.
_WHITE_D65 = np.array([0.95047, 1.0, 1.08883])
_XYZ_TO_SRGB = np.array(
    [
        [3.2404542, -1.5371385, -0.4985314],
        [-0.9692660, 1.8760108, 0.0415560],
        [0.0556434, -0.2040259, 1.0572252],
    ]
)

_LUT_SIZE = 256
DEFAULT_MAX_ALPHA = 224  # fully opaque would hide the photo the reviewer is judging
_ALPHA_EXPONENT = 0.75  # < 1 lifts mild damage (SSIM ~0.9) above the threshold of notice


def lab_to_srgb(lab: np.ndarray) -> np.ndarray:
    """CIELAB (D65) to sRGB in [0, 1], out-of-gamut values clipped.

    Parameters
    ----------
    lab : ndarray, shape (..., 3), float
        L* in [0, 100], a*, b* unbounded.

    Returns
    -------
    ndarray, shape (..., 3), float64
        Gamma-encoded sRGB, clipped to [0, 1].
    """
    lab = np.asarray(lab, dtype=np.float64)
    if lab.ndim < 1 or lab.shape[-1] != 3:
        raise ValueError(f"lab must have shape (..., 3), got {lab.shape!r}")
    fy = (lab[..., 0] + 16.0) / 116.0
    f = np.stack([fy + lab[..., 1] / 500.0, fy, fy - lab[..., 2] / 200.0], axis=-1)
    delta = 6.0 / 29.0
    xyz = np.where(f > delta, f**3, 3.0 * delta**2 * (f - 4.0 / 29.0)) * _WHITE_D65
    rgb_lin = xyz @ _XYZ_TO_SRGB.T
    rgb_lin = np.clip(rgb_lin, 0.0, 1.0)
    rgb = np.where(rgb_lin <= 0.0031308, 12.92 * rgb_lin, 1.055 * rgb_lin ** (1.0 / 2.4) - 0.055)
    return np.clip(rgb, 0.0, 1.0)


def ramp_rgb(t: np.ndarray) -> np.ndarray:
    """The heat ramp's sRGB colours at damage levels ``t`` (0 = none, 1 = worst).

    Parameters
    ----------
    t : ndarray, any shape, float
        Values in [0, 1]; outside values are clipped.

    Returns
    -------
    ndarray, shape ``t.shape + (3,)``, uint8
    """
    t = np.clip(np.asarray(t, dtype=np.float64), 0.0, 1.0)
    lab = np.stack([np.interp(t, _ANCHORS[:, 0], _ANCHORS[:, i]) for i in (1, 2, 3)], axis=-1)
    return np.round(lab_to_srgb(lab) * 255.0).astype(np.uint8)


_LUT_RGB = ramp_rgb(np.linspace(0.0, 1.0, _LUT_SIZE))


def _check_low(low) -> float:
    if isinstance(low, bool) or not isinstance(low, (int, float, np.floating, np.integer)):
        raise ValueError(f"low must be a number in [-1, 1), got {low!r}")
    low = float(low)
    if not (math.isfinite(low) and -1.0 <= low < 1.0):
        raise ValueError(f"low must be a number in [-1, 1), got {low!r}")
    return low


def _check_max_alpha(max_alpha) -> int:
    if isinstance(max_alpha, bool) or not isinstance(max_alpha, (int, np.integer)) or not 1 <= max_alpha <= 255:
        raise ValueError(f"max_alpha must be an integer from 1 to 255, got {max_alpha!r}")
    return int(max_alpha)


def _check_map(ssim_map) -> np.ndarray:
    if not isinstance(ssim_map, np.ndarray):
        raise ValueError(f"ssim_map must be a numpy array, got {type(ssim_map).__name__}")
    if ssim_map.ndim != 2 or ssim_map.size == 0:
        raise ValueError(f"ssim_map must be a non-empty 2-D array (H, W), got shape {ssim_map.shape!r}")
    if ssim_map.dtype == np.bool_ or not (
        np.issubdtype(ssim_map.dtype, np.floating) or np.issubdtype(ssim_map.dtype, np.integer)
    ):
        raise ValueError(f"ssim_map must hold real numbers, got dtype {ssim_map.dtype!s}")
    values = ssim_map.astype(np.float32, copy=False)
    bad = ~np.isfinite(values)
    if bad.any():
        raise ValueError(f"ssim_map must be finite, got {int(bad.sum())} NaN or infinite value(s)")
    lo, hi = float(values.min()), float(values.max())
    # A small tolerance for float rounding; anything further off is not an SSIM map (e.g. pixels).
    if lo < -1.0 - 1e-4 or hi > 1.0 + 1e-4:
        raise ValueError(f"ssim_map values must lie in [-1, 1], got range [{lo!r}, {hi!r}]")
    return values


def _check_high(high, low: float) -> float:
    if isinstance(high, bool) or not isinstance(high, (int, float, np.floating, np.integer)):
        raise ValueError(f"high must be a number in (low, 1], got {high!r}")
    high = float(high)
    if not (math.isfinite(high) and low < high <= 1.0):
        raise ValueError(f"high must be a number in (low, 1] with low={low!r}, got {high!r}")
    return high


def heat_rgba(ssim_map: np.ndarray, *, low: float = 0.5, high: float = 1.0,
              max_alpha: int = DEFAULT_MAX_ALPHA) -> np.ndarray:
    """Colour an SSIM map as straight (not premultiplied) RGBA.

    Damage ``t = (high - ssim) / (high - low)``, clipped to [0, 1], picks the ramp colour; alpha is
    ``round(max_alpha * t ** 0.75)``: 0 at SSIM >= ``high``, ``max_alpha`` at SSIM <= ``low``.

    Parameters
    ----------
    ssim_map : ndarray, shape (H, W), real dtype
        Local SSIM in [-1, 1], 1 = identical.
    low : float, keyword-only
        SSIM at and below which the overlay is at full strength; in [-1, 1).
    high : float, keyword-only
        SSIM at and above which the overlay is clear; in (low, 1].
    max_alpha : int, keyword-only
        Alpha at full strength, 1..255.

    Returns
    -------
    ndarray, shape (H, W, 4), uint8
    """
    values = _check_map(ssim_map)
    low = _check_low(low)
    high = _check_high(high, low)
    max_alpha = _check_max_alpha(max_alpha)
    t = np.clip((np.float32(high) - values) / np.float32(high - low), 0.0, 1.0)
    index = np.rint(t * (_LUT_SIZE - 1)).astype(np.intp)
    alpha_lut = np.rint(max_alpha * np.linspace(0.0, 1.0, _LUT_SIZE) ** _ALPHA_EXPONENT).astype(np.uint8)
    out = np.empty(values.shape + (4,), dtype=np.uint8)
    out[..., :3] = _LUT_RGB[index]
    out[..., 3] = alpha_lut[index]
    return out


def ssim_heatmap_png(
    ssim_map: np.ndarray, *, low: float = 0.5, high: float = 1.0, alpha: bool = True,
    max_alpha: int = DEFAULT_MAX_ALPHA,
) -> bytes:
    """PNG bytes of the heat-map for an SSIM map, one PNG pixel per map entry.

    Parameters
    ----------
    ssim_map : ndarray, shape (H, W), real dtype
        Local SSIM in [-1, 1], 1 = identical.
    low : float, keyword-only
        SSIM at and below which colour and opacity are at full strength; in [-1, 1).
    high : float, keyword-only
        SSIM at and above which the overlay is clear; in (low, 1].
    alpha : bool, keyword-only
        True: RGBA overlay (transparent where SSIM is 1). False: opaque RGB heat-map on its own.
    max_alpha : int, keyword-only
        Overlay alpha at full strength, 1..255.

    Returns
    -------
    bytes
        A PNG (8-bit RGBA or RGB) with no text, time or other metadata chunks.
    """
    if not isinstance(alpha, bool):
        raise ValueError(f"alpha must be True or False, got {alpha!r}")
    rgba = heat_rgba(ssim_map, low=low, high=high, max_alpha=max_alpha)
    pixels = rgba if alpha else np.ascontiguousarray(rgba[..., :3])
    buf = io.BytesIO()
    # A fresh image carries no info dict, so Pillow writes only IHDR, IDAT and IEND.
    Image.fromarray(pixels).save(buf, "PNG")
    return buf.getvalue()


def ssim_legend_svg(low: float = 0.5, *, high: float = 1.0, width: int = 240) -> str:
    """A small SVG colour key for the overlay: SSIM ``high`` (left, clear) to ``low`` (right, strongest).

    The bar is drawn over a light checkerboard so that transparency reads as transparency. No ids,
    no ``<style>``, no scripts; sizes scale with the ``viewBox``.

    Parameters
    ----------
    low : float
        Same meaning as in :func:`heat_rgba`; in [-1, 1).
    width : int, keyword-only
        ``viewBox`` width in CSS pixels, 140..800.

    Returns
    -------
    str
        A standalone ``<svg>`` element.
    """
    low = _check_low(low)
    high = _check_high(high, low)
    if isinstance(width, bool) or not isinstance(width, int) or not 140 <= width <= 800:
        raise ValueError(f"width must be an integer from 140 to 800, got {width!r}")
    height = 46
    pad = 14
    bar_x, bar_y, bar_w, bar_h = pad, 18, width - 2 * pad, 12
    steps = 40
    mid = (high + low) / 2.0
    low_txt, mid_txt, high_txt = f"{low:.2f}", f"{mid:.2f}", f"{high:.2f}"
    label = (
        f"Heat-map key: clear at SSIM {high_txt} or higher, strongest and darkest at SSIM {low_txt} or lower"
    )
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" width="{width}" '
        f'height="{height}" style="max-width:100%;height:auto" role="img" aria-label="{label}" '
        f'font-family="system-ui, -apple-system, Arial, sans-serif" font-size="11" fill="#1f2428">',
        f"<title>{label}</title>",
        f'<text class="hm-key-title" x="{bar_x}" y="12" font-weight="600">local SSIM</text>',
        f'<text x="{bar_x + bar_w}" y="12" text-anchor="end" fill="#5e6670">damage \u2192</text>',
    ]
    cell = bar_h / 2
    n_cells = int(math.ceil(bar_w / cell))
    checks = ['<g class="hm-key-checker" fill="#d5d8dc">']
    for row in range(2):
        for col in range(n_cells):
            if (row + col) % 2:
                x = bar_x + col * cell
                w = min(cell, bar_x + bar_w - x)
                checks.append(
                    f'<rect x="{x:.2f}" y="{bar_y + row * cell:.2f}" width="{w:.2f}" height="{cell:.2f}"/>'
                )
    checks.append("</g>")
    parts.append(f'<rect x="{bar_x}" y="{bar_y}" width="{bar_w}" height="{bar_h}" fill="#ffffff"/>')
    parts.extend(checks)
    ssim_steps = high - (np.arange(steps) + 0.5) / steps * (high - low)
    colours = heat_rgba(ssim_steps.reshape(1, -1), low=low, high=high)[0]
    sw = bar_w / steps
    parts.append('<g class="hm-key-bar">')
    for i, (r, g, b, a) in enumerate(colours.tolist()):
        # Slight overlap hides hairline seams between neighbouring cells when scaled.
        parts.append(
            f'<rect x="{bar_x + i * sw:.2f}" y="{bar_y}" width="{sw + 0.3:.2f}" height="{bar_h}" '
            f'fill="#{r:02x}{g:02x}{b:02x}" fill-opacity="{a / 255:.3f}"/>'
        )
    parts.append("</g>")
    parts.append(
        f'<rect x="{bar_x}" y="{bar_y}" width="{bar_w}" height="{bar_h}" fill="none" stroke="#8a939c" '
        f'stroke-width="0.8"/>'
    )
    first = high_txt if high >= 1.0 else f"\u2265 {high_txt}"
    ends = ((high, first, "start"), (mid, mid_txt, "middle"), (low, f"\u2264 {low_txt}", "end"))
    for value, text, anchor in ends:
        x = bar_x + (high - value) / (high - low) * bar_w
        parts.append(
            f'<text class="hm-key-tick" x="{x:.2f}" y="{bar_y + bar_h + 12}" text-anchor="{anchor}" '
            f'data-value="{value!r}" fill="#5e6670">{text}</text>'
        )
    parts.append("</svg>")
    return "\n".join(parts)
