#!/usr/bin/env python3
"""Draw the Fernridge Outfitters demo sample set.

Fernridge Outfitters is a fictional outdoor-gear shop. Every image in ``demo_images/`` is drawn by
this script from fixed seeds with numpy, scipy and Pillow (text uses only Pillow's built-in
``ImageFont.load_default``); nothing is downloaded or copied from elsewhere.

Usage::

    python scripts/make_demo_images.py [--out DIR] [--only CLASS[/NAME]] ...

The classes differ in the ways that matter to JPEG coding: product shots are smooth shading with
sensor noise on a flat backdrop, banners are dense natural texture, screenshots are flat fills with
sharp small text, illustrations are a few flat colours with hard edges, thumbnails are small
downscaled product renders.
"""

from __future__ import annotations

import argparse
import math
import sys
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Callable

import numpy as np
from PIL import Image, ImageDraw, ImageFont
from scipy import ndimage

DEFAULT_OUT = Path(__file__).resolve().parents[1] / "demo_images"

# Light from the upper left, slightly towards the viewer; H is the Blinn-Phong half vector.
_LIGHT = np.array([-0.45, -0.6, 0.66])
_LIGHT = _LIGHT / np.linalg.norm(_LIGHT)
_HALF = _LIGHT + np.array([0.0, 0.0, 1.0])
_HALF = _HALF / np.linalg.norm(_HALF)

BRAND_GREEN = (38, 86, 64)
BRAND_ORANGE = (214, 112, 44)


# ----------------------------------------------------------------------------------------------
# Shared helpers
# ----------------------------------------------------------------------------------------------


@lru_cache(maxsize=None)
def _font(size: int) -> ImageFont.FreeTypeFont | ImageFont.ImageFont:
    """Pillow's built-in font at ``size`` pixels (the only font this script uses)."""
    return ImageFont.load_default(size=size)


def _noise(rng: np.random.Generator, shape: tuple[int, int], *, beta: float,
           squash: tuple[float, float] = (1.0, 1.0)) -> np.ndarray:
    """Fractal (fBm-like) noise with power spectrum ~ 1/f**beta.

    Parameters
    ----------
    shape : (h, w)
    beta : spectral exponent; 0 is white noise, ~2 is Brownian, larger is smoother.
    squash : (ky, kx) frequency weights; the axis with the larger weight varies more slowly, so
        (1, 4) gives features stretched along x (cloud banks, ripples).

    Returns
    -------
    (h, w) float64, zero mean and unit standard deviation.
    """
    h, w = shape
    spec = np.fft.rfft2(rng.standard_normal((h, w)))
    fy = np.fft.fftfreq(h)[:, None] * squash[0]
    fx = np.fft.rfftfreq(w)[None, :] * squash[1]
    f = np.hypot(fx, fy)
    f[0, 0] = np.inf  # drop the mean
    spec *= f ** (-beta / 2)
    out = np.fft.irfft2(spec, s=(h, w))
    return (out - out.mean()) / out.std()


def _profile(rng: np.random.Generator, n: int, *, beta: float) -> np.ndarray:
    """1-D fractal profile of length ``n`` (float64, zero mean, unit std), e.g. a ridgeline."""
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n)
    f[0] = np.inf
    spec *= f ** (-beta / 2)
    out = np.fft.irfft(spec, n)
    return (out - out.mean()) / out.std()


def _smoothstep(e0: float, e1: float, x: np.ndarray) -> np.ndarray:
    t = np.clip((x - e0) / (e1 - e0), 0.0, 1.0)
    return t * t * (3 - 2 * t)


def _vgrad(h: int, w: int, stops: list[tuple[float, tuple[int, int, int]]]) -> np.ndarray:
    """Vertical colour gradient, (h, w, 3) float64, through ``stops`` = [(t in 0..1, rgb), ...]."""
    t = (np.arange(h) + 0.5) / h
    ts = [s[0] for s in stops]
    cols = np.array([s[1] for s in stops], float)
    rows = np.stack([np.interp(t, ts, cols[:, c]) for c in range(3)], axis=-1)
    return np.broadcast_to(rows[:, None, :], (h, w, 3)).copy()


def _over(canvas: np.ndarray, alpha: np.ndarray, colour) -> None:
    """Composite ``colour`` ((3,) or (H, W, 3)) over ``canvas`` (H, W, 3) in place with coverage alpha."""
    a = alpha[..., None]
    canvas *= 1.0 - a
    canvas += a * np.asarray(colour, float)


def _to_image(canvas: np.ndarray) -> Image.Image:
    return Image.fromarray(np.clip(np.rint(canvas), 0, 255).astype(np.uint8), "RGB")


def _spline(pts, *, closed: bool = True, n: int = 12) -> list[tuple[float, float]]:
    """Catmull-Rom curve through ``pts`` (list of (x, y)); ``n`` samples per span."""
    p = np.asarray(pts, float)
    ext = np.vstack([p[-1], p, p[0], p[1]]) if closed else np.vstack([p[0], p, p[-1]])
    out = []
    for i in range(1, len(ext) - 2):
        p0, p1, p2, p3 = ext[i - 1:i + 3]
        for t in np.linspace(0.0, 1.0, n, endpoint=False):
            t2, t3 = t * t, t * t * t
            q = 0.5 * (2 * p1 + (p2 - p0) * t + (2 * p0 - 5 * p1 + 4 * p2 - p3) * t2
                       + (3 * p1 - p0 - 3 * p2 + p3) * t3)
            out.append((float(q[0]), float(q[1])))
    if not closed:
        out.append((float(p[-1, 0]), float(p[-1, 1])))
    return out


def _quad(a, c, b, n: int = 24) -> list[tuple[float, float]]:
    """Quadratic Bezier from ``a`` to ``b`` with control point ``c``."""
    t = np.linspace(0.0, 1.0, n)[:, None]
    q = (1 - t) ** 2 * np.asarray(a, float) + 2 * (1 - t) * t * np.asarray(c, float) + t * t * np.asarray(b, float)
    return [(float(x), float(y)) for x, y in q]


def _rrect_path(box, r: float, n: int = 10) -> list[tuple[float, float]]:
    """Closed outline of a rounded rectangle ``box`` = (x0, y0, x1, y1)."""
    x0, y0, x1, y1 = box
    pts = []
    for cx, cy, a0 in ((x1 - r, y0 + r, -90), (x1 - r, y1 - r, 0), (x0 + r, y1 - r, 90), (x0 + r, y0 + r, 180)):
        for a in np.radians(np.linspace(a0, a0 + 90, n)):
            pts.append((cx + r * math.cos(a), cy + r * math.sin(a)))
    pts.append(pts[0])
    return pts


def _ellipse_path(box, a0: float = 0, a1: float = 360, n: int = 90) -> list[tuple[float, float]]:
    x0, y0, x1, y1 = box
    cx, cy, rx, ry = (x0 + x1) / 2, (y0 + y1) / 2, (x1 - x0) / 2, (y1 - y0) / 2
    return [(cx + rx * math.cos(a), cy + ry * math.sin(a)) for a in np.radians(np.linspace(a0, a1, n))]


def _dashes(pts, dash: float, gap: float) -> list[list[tuple[float, float]]]:
    """Cut the polyline ``pts`` into dashes (stitching, zipper teeth, trail markings)."""
    segs: list[list[tuple[float, float]]] = []
    cur = [pts[0]]
    on, left = True, dash
    for (ax, ay), (bx, by) in zip(pts, pts[1:]):
        seg = math.hypot(bx - ax, by - ay)
        t = 0.0
        while seg - t > left:
            t += left
            p = (ax + (bx - ax) * t / seg, ay + (by - ay) * t / seg)
            if on:
                cur.append(p)
                segs.append(cur)
            else:
                cur = [p]
            on = not on
            left = dash if on else gap
        left -= seg - t
        if on:
            cur.append((bx, by))
    if on and len(cur) > 1:
        segs.append(cur)
    return segs


class _Pen:
    """ImageDraw wrapper that works in design units: pixel = (design + offset) * k."""

    def __init__(self, draw: ImageDraw.ImageDraw, k: float, offset=(0.0, 0.0)):
        self.d, self.k, self.ox, self.oy = draw, k, offset[0], offset[1]

    def _pts(self, pts):
        return [((x + self.ox) * self.k, (y + self.oy) * self.k) for x, y in pts]

    def _box(self, b):
        x0, y0, x1, y1 = b
        return [(x0 + self.ox) * self.k, (y0 + self.oy) * self.k, (x1 + self.ox) * self.k, (y1 + self.oy) * self.k]

    def _w(self, width):
        return max(1, round(width * self.k))

    def poly(self, pts, fill=255):
        self.d.polygon(self._pts(pts), fill=fill)

    def rect(self, box, fill=255):
        self.d.rectangle(self._box(box), fill=fill)

    def ellipse(self, box, fill=255, width=0):
        if width:
            self.d.ellipse(self._box(box), outline=fill, width=self._w(width))
        else:
            self.d.ellipse(self._box(box), fill=fill)

    def rrect(self, box, r, fill=255, width=0):
        if width:
            self.d.rounded_rectangle(self._box(box), r * self.k, outline=fill, width=self._w(width))
        else:
            self.d.rounded_rectangle(self._box(box), r * self.k, fill=fill)

    def line(self, pts, width, fill=255):
        self.d.line(self._pts(pts), fill=fill, width=self._w(width), joint="curve")

    def dashed(self, pts, width, dash, gap, fill=255):
        for seg in _dashes(pts, dash, gap):
            self.line(seg, width, fill)

    def arc(self, box, start, end, width, fill=255):
        self.d.arc(self._box(box), start, end, fill=fill, width=self._w(width))

    def text(self, xy, s, size, fill=255, anchor="mm", stroke=0):
        x, y = xy
        self.d.text(((x + self.ox) * self.k, (y + self.oy) * self.k), s, fill=fill,
                    font=_font(max(6, round(size * self.k))), anchor=anchor,
                    stroke_width=round(stroke * self.k), stroke_fill=fill)


def _mask(size: tuple[int, int], design: float, fn: Callable[[_Pen], object], *, offset=(0.0, 0.0),
          ss: int = 3) -> np.ndarray:
    """Antialiased coverage of the shapes ``fn`` draws, (H, W) float64 in [0, 1].

    Shapes are drawn at ``ss`` times the size and box-reduced, so edges get fractional coverage.
    ``design`` is the width of the design grid the coordinates are written in.
    """
    w, h = size
    im = Image.new("L", (w * ss, h * ss), 0)
    fn(_Pen(ImageDraw.Draw(im), ss * w / design, offset))
    return np.asarray(im.reduce(ss), dtype=np.float64) / 255.0


def _glyph(pen: _Pen, cx: float, cy: float, s: float, fill=255) -> None:
    """The shop's mark: two peaks, the taller with a notch of snow cut out."""
    pen.poly([(cx - s, cy + 0.55 * s), (cx - 0.25 * s, cy - 0.7 * s), (cx + 0.5 * s, cy + 0.55 * s)], fill)
    pen.poly([(cx - 0.05 * s, cy + 0.55 * s), (cx + 0.45 * s, cy - 0.2 * s), (cx + s, cy + 0.55 * s)], fill)


# ----------------------------------------------------------------------------------------------
# Product shots: shaded shapes on a light backdrop
# ----------------------------------------------------------------------------------------------


def _bulge(alpha: np.ndarray, radius: float, *, shininess: float = 24.0) -> tuple[np.ndarray, np.ndarray]:
    """Lambert and Blinn-Phong terms, each (H, W) float64, for a shape puffed up like a cushion.

    The height rises as a quarter circle of ``radius`` pixels from the outline, so edges turn away
    from the light and flat middles face the viewer.
    """
    dif = np.full(alpha.shape, _LIGHT[2])
    spec = np.zeros(alpha.shape)
    inside = alpha > 0.5
    rows, cols = np.nonzero(inside)
    if rows.size == 0:
        return dif, spec
    # Work on the shape's bounding box only: the outside never shows.
    box = (slice(max(rows.min() - 4, 0), rows.max() + 5), slice(max(cols.min() - 4, 0), cols.max() + 5))
    d = ndimage.distance_transform_edt(inside[box])
    t = np.clip(d / max(radius, 1.0), 0.0, 1.0)
    height = ndimage.gaussian_filter(radius * np.sqrt(1.0 - (1.0 - t) ** 2), 1.2)
    gy, gx = np.gradient(height)
    n = np.stack([-gx, -gy, np.ones_like(gx)], axis=-1)
    n /= np.sqrt((n * n).sum(axis=-1, keepdims=True))
    dif[box] = np.clip(n @ _LIGHT, 0.0, 1.0)
    spec[box] = np.clip(n @ _HALF, 0.0, 1.0) ** shininess
    return dif, spec


def _cylinder(shape: tuple[int, int], x0: float, x1: float, *, shininess: float = 40.0):
    """Lambert and Blinn-Phong terms, (H, W) float64, of an upright cylinder spanning columns x0..x1."""
    h, w = shape
    u = np.clip(((np.arange(w) + 0.5) - (x0 + x1) / 2) / max((x1 - x0) / 2, 1.0), -0.995, 0.995)
    n = np.stack([u, np.zeros_like(u), np.sqrt(1.0 - u * u)], axis=-1)
    dif = np.clip(n @ _LIGHT, 0.0, 1.0)
    spec = np.clip(n @ _HALF, 0.0, 1.0) ** shininess
    return np.broadcast_to(dif, (h, w)), np.broadcast_to(spec, (h, w))


def _lit(canvas, alpha, colour, light, *, ambient=0.45, spec_gain=0.15, tex=None) -> np.ndarray:
    """Composite a lit part; returns its shade factor (H, W) so details on it can follow the light."""
    dif, spec = light
    flat = ambient + (1 - ambient) * _LIGHT[2]
    shade = (ambient + (1 - ambient) * dif) / flat
    col = np.asarray(colour, float)
    if tex is not None:
        col = col * tex[..., None]
    _over(canvas, alpha, col * shade[..., None] + 255.0 * spec_gain * spec[..., None])
    return shade


def _detail(canvas, alpha, colour, shade) -> None:
    """Composite a flat detail (stitching, print) that follows the shade of the part under it."""
    _over(canvas, alpha, np.asarray(colour, float) * shade[..., None])


def _studio(shape: tuple[int, int], rng: np.random.Generator) -> np.ndarray:
    """White or light-grey seamless backdrop, a little brighter at the top centre."""
    h, w = shape
    tone = rng.uniform(238.0, 250.0)
    y = np.linspace(0.0, 1.0, h)[:, None]
    x = np.linspace(-1.0, 1.0, w)[None, :]
    v = tone + 4.0 - 5.0 * x * x - 7.0 * y
    tint = np.array([1.0, 1.0, 1.0 + rng.uniform(-0.01, 0.012)])
    return np.clip(v[..., None] * tint, 0, 255)


def _shadow(canvas, size, box, *, blur: float, strength: float, offset=(0.0, 0.0)) -> None:
    m = _mask(size, 800, lambda p: p.ellipse(box), offset=offset, ss=1)
    m = ndimage.gaussian_filter(m, blur * size[0] / 800)
    canvas *= (1.0 - strength * m)[..., None]


def _sensor(canvas: np.ndarray, rng: np.random.Generator, sigma: float) -> np.ndarray:
    """Camera-like noise: mostly luminance, a little chroma."""
    h, w, _ = canvas.shape
    luma = rng.standard_normal((h, w)) * sigma
    chroma = rng.standard_normal((h, w, 3)) * (0.35 * sigma)
    return canvas + luma[..., None] + chroma


def _weave(rng: np.random.Generator, shape: tuple[int, int], s: float) -> np.ndarray:
    """Ripstop fabric texture: a faint square grid over fine grain, (H, W) multiplicative ~1."""
    h, w = shape
    yy, xx = np.mgrid[0:h, 0:w]
    period = max(3, round(7 * s))
    grid = ((xx % period) == 0) | ((yy % period) == 0)
    return 1.0 + 0.03 * _noise(rng, shape, beta=0.6) + 0.04 * grid


def _grain(rng: np.random.Generator, shape, amount: float, beta: float = 1.2) -> np.ndarray:
    return 1.0 + amount * _noise(rng, shape, beta=beta)


def _pick(rng: np.random.Generator, options):
    return np.array(options[int(rng.integers(len(options)))], float)


def _finish_product(canvas, rng) -> Image.Image:
    return _to_image(_sensor(canvas, rng, rng.uniform(1.0, 1.8)))


def product_backpack(seed: int, size: tuple[int, int]) -> Image.Image:
    """A daypack, front view, with lid, pocket, zip, straps, buckles, stitching and a logo patch."""
    rng = np.random.default_rng(seed)
    w, h = size
    M = lambda fn: _mask(size, 800, fn)  # noqa: E731
    c = _pick(rng, [(52, 96, 70), (168, 82, 46), (42, 62, 104), (190, 146, 52), (96, 40, 52)])
    thread = np.array([226, 214, 186], float)
    webbing = np.array([38, 38, 41], float)
    canvas = _studio((h, w), rng)
    _shadow(canvas, size, (205, 662, 595, 738), blur=18, strength=0.35)
    tex = _weave(rng, (h, w), w / 800)

    straps = M(lambda p: (p.rrect((222, 250, 262, 640), 18), p.rrect((538, 250, 578, 640), 18)))
    _lit(canvas, straps, c * 0.6, _bulge(straps, 12 * w / 800), tex=tex)
    loop = M(lambda p: p.arc((365, 98, 435, 182), 180, 360, 11))
    _lit(canvas, loop, webbing, _bulge(loop, 4 * w / 800))

    body = M(lambda p: p.rrect((245, 175, 555, 695), 95))
    base = M(lambda p: p.rect((0, 628, 800, 800))) * body
    col = c[None, None, :] * (1.0 - 0.28 * base[..., None])
    shade = _lit(canvas, body, col, _bulge(body, 70 * w / 800, shininess=12), spec_gain=0.06, tex=tex)
    _detail(canvas, M(lambda p: (p.dashed(_rrect_path((259, 189, 541, 681), 81), 2.2, 9, 6),
                                 p.dashed([(262, 636), (538, 636)], 2.2, 9, 6))), thread * 0.9, shade)

    lid = M(lambda p: p.rrect((258, 146, 542, 305), 75))
    shade = _lit(canvas, lid, c * 0.9, _bulge(lid, 45 * w / 800, shininess=12), spec_gain=0.06, tex=tex)
    _detail(canvas, M(lambda p: p.dashed(_rrect_path((269, 157, 531, 294), 64), 2.2, 9, 6)), thread * 0.9, shade)

    pocket = M(lambda p: p.rrect((288, 430, 512, 668), 55))
    shade = _lit(canvas, pocket, c * 1.07, _bulge(pocket, 32 * w / 800, shininess=12), spec_gain=0.06, tex=tex)
    _detail(canvas, M(lambda p: p.dashed(_rrect_path((298, 440, 502, 658), 45), 2.2, 9, 6)), thread * 0.9, shade)
    zip_path = _quad((300, 462), (400, 444), (500, 462))
    _detail(canvas, M(lambda p: p.line(zip_path, 8)), np.array([48, 48, 50.0]), shade)
    _detail(canvas, M(lambda p: p.dashed(zip_path, 5, 2, 2)), np.array([150, 150, 152.0]), shade)
    puller = M(lambda p: p.rrect((466, 458, 480, 494), 4))
    _lit(canvas, puller, np.array([160, 160, 165.0]), _bulge(puller, 4 * w / 800), spec_gain=0.5)
    _detail(canvas, M(lambda p: p.line([(473, 492), (477, 522)], 3)), webbing, shade)

    vstraps = M(lambda p: (p.rect((318, 240, 340, 472)), p.rect((460, 240, 482, 472))))
    _lit(canvas, vstraps, webbing * 1.1, _bulge(vstraps, 4 * w / 800), tex=tex)
    buckles = M(lambda p: (p.rrect((311, 390, 347, 424), 5), p.rrect((453, 390, 489, 424), 5)))
    _lit(canvas, buckles, np.array([66, 66, 70.0]), _bulge(buckles, 5 * w / 800), spec_gain=0.35)
    slots = M(lambda p: (p.rect((318, 401, 340, 413)), p.rect((460, 401, 482, 413))))
    _over(canvas, slots, np.array([22, 22, 24.0]))

    patch = M(lambda p: p.rrect((345, 196, 455, 262), 9))
    patch_c = _pick(rng, [(232, 222, 196), (214, 112, 44), (240, 240, 236)])
    shade = _lit(canvas, patch, patch_c, _bulge(patch, 6 * w / 800), spec_gain=0.05)
    ink = c * 0.55 if patch_c.mean() > 180 else np.array([245, 240, 228.0])
    _detail(canvas, M(lambda p: p.dashed(_rrect_path((350, 201, 450, 257), 6), 1.5, 5, 3)), ink, shade)
    _detail(canvas, M(lambda p: (_glyph(p, 400, 224, 17), p.text((400, 250), "FERNRIDGE", 12))), ink, shade)
    return _finish_product(canvas, rng)


_BOOT = [(252, 222), (318, 230), (378, 226), (398, 262), (418, 330), (452, 392), (512, 446), (584, 478),
         (622, 515), (628, 558), (612, 584), (230, 584), (214, 548), (222, 470), (232, 380), (240, 300)]


def _draw_boot(canvas, size, rng, *, leather, lace, offset, dim) -> None:
    w, h = size
    s = w / 800
    M = lambda fn: _mask(size, 800, fn, offset=offset)  # noqa: E731
    thread = np.array([214, 196, 150.0]) * dim
    tongue = M(lambda p: p.poly(_spline([(362, 236), (372, 196), (404, 190), (420, 262), (384, 280)])))
    _lit(canvas, tongue, leather * 0.85 * dim, _bulge(tongue, 10 * s))
    upper = M(lambda p: p.poly(_spline(_BOOT)))
    toe = M(lambda p: p.ellipse((488, 448, 690, 650))) * upper
    heel = M(lambda p: p.ellipse((150, 440, 320, 660))) * upper
    collar = M(lambda p: p.rect((0, 0, 800, 258))) * upper
    col = leather[None, None, :] * (1 - 0.3 * toe - 0.18 * heel)[..., None]
    col = col * (1 - collar[..., None]) + collar[..., None] * (leather * 0.45)
    grain = _grain(rng, (h, w), 0.05, beta=1.0)
    shade = _lit(canvas, upper, col * dim, _bulge(upper, 42 * s, shininess=16), spec_gain=0.12, tex=grain)
    stitches = M(lambda p: (p.dashed(_ellipse_path((497, 457, 681, 641), 180, 300), 2, 7, 5),
                            p.dashed(_ellipse_path((159, 449, 311, 651), 270, 360), 2, 7, 5),
                            p.dashed([(232, 266), (392, 270)], 2, 7, 5))) * upper
    _detail(canvas, stitches, thread, shade)
    a, b = np.array([398.0, 266.0]), np.array([508.0, 444.0])
    normal = np.array([-(b - a)[1], (b - a)[0]]) / np.linalg.norm(b - a)  # points back, into the boot
    ts = np.linspace(0.05, 0.9, 7)
    holes = [tuple(a + t * (b - a) + 20 * normal) for t in ts]
    edge = [tuple(a + t * (b - a) + 4 * normal) for t in ts]
    zig1 = [holes[i] if i % 2 == 0 else edge[i] for i in range(len(ts))]
    zig2 = [edge[i] if i % 2 == 0 else holes[i] for i in range(len(ts))]
    top = holes[0]
    laces = M(lambda p: (p.line(zig1, 5), p.line(zig2, 5),
                         p.line(_quad(top, (top[0] - 30, top[1] + 10), (top[0] - 40, top[1] + 58)), 4.5),
                         p.line(_quad(top, (top[0] - 14, top[1] + 16), (top[0] - 16, top[1] + 70)), 4.5)))
    _lit(canvas, laces, lace * dim, _bulge(laces, 2.5 * s))
    eyelets = M(lambda p: [p.ellipse((x - 6, y - 6, x + 6, y + 6), width=3.5) for x, y in holes])
    _lit(canvas, eyelets, np.array([176, 166, 146.0]) * dim, _bulge(eyelets, 2 * s), spec_gain=0.5)
    sole = M(lambda p: p.rrect((204, 556, 638, 612), 24))
    mid = M(lambda p: p.rect((0, 0, 800, 577))) * sole
    scol = np.array([44, 42, 40.0])[None, None, :] * (1 - mid[..., None]) + mid[..., None] * np.array([200, 176, 136.0])
    _lit(canvas, sole, scol * dim, _bulge(sole, 12 * s), spec_gain=0.08)
    lugs = M(lambda p: [p.rrect((x, 606, x + 15, 621), 3) for x in range(222, 606, 26)])
    _lit(canvas, lugs, np.array([36, 34, 32.0]) * dim, _bulge(lugs, 3 * s))


def product_boots(seed: int, size: tuple[int, int]) -> Image.Image:
    """A pair of hiking boots in side view: laces, eyelets, toe cap, stitching, lugged sole."""
    rng = np.random.default_rng(seed)
    w, h = size
    leather = _pick(rng, [(122, 80, 48), (108, 106, 98), (84, 92, 60), (150, 104, 62)])
    lace = _pick(rng, [(176, 44, 38), (222, 200, 150), (40, 40, 44), (214, 112, 44)])
    canvas = _studio((h, w), rng)
    _shadow(canvas, size, (70, 560, 690, 648), blur=16, strength=0.38)
    _draw_boot(canvas, size, rng, leather=leather, lace=lace, offset=(-118, -44), dim=0.78)
    _draw_boot(canvas, size, rng, leather=leather, lace=lace, offset=(40, 20), dim=1.0)
    return _finish_product(canvas, rng)


def product_tent(seed: int, size: tuple[int, int]) -> Image.Image:
    """A two-person dome tent: lit and shaded panels, door with zip, pole sleeves, guy lines."""
    rng = np.random.default_rng(seed)
    w, h = size
    s = w / 800
    M = lambda fn: _mask(size, 800, fn)  # noqa: E731
    fly = _pick(rng, [(214, 112, 44), (70, 122, 84), (220, 172, 52), (52, 96, 150)])
    canvas = _studio((h, w), rng)
    _shadow(canvas, size, (100, 582, 710, 668), blur=16, strength=0.38)
    guys = M(lambda p: (p.line([(232, 360), (70, 652)], 2), p.line([(600, 350), (742, 650)], 2)))
    _over(canvas, guys * 0.8, np.array([96, 96, 100.0]))
    stakes = M(lambda p: (p.poly([(62, 640), (78, 640), (70, 668)]), p.poly([(734, 638), (750, 638), (742, 666)])))
    _lit(canvas, stakes, np.array([150, 150, 156.0]), _bulge(stakes, 3 * s), spec_gain=0.4)

    outline = _spline([(140, 620), (176, 470), (250, 320), (340, 226), (410, 204), (500, 240),
                       (590, 340), (650, 470), (680, 620)], closed=False)
    body = M(lambda p: p.poly(outline + [(680, 620), (140, 620)]))
    seam = _quad((410, 204), (470, 360), (480, 622))
    right = M(lambda p: p.poly(seam + [(800, 622), (800, 0), (410, 0)])) * body
    floor = M(lambda p: p.rect((0, 598, 800, 800))) * body
    col = fly[None, None, :] * (1 - 0.24 * right)[..., None]
    col = col * (1 - floor[..., None]) + floor[..., None] * np.array([58, 58, 60.0])
    wrinkles = 1 + 0.05 * _noise(rng, (h, w), beta=2.6, squash=(1.0, 2.5))
    shade = _lit(canvas, body, col, _bulge(body, 90 * s, shininess=10), spec_gain=0.1, tex=wrinkles)
    sleeves = M(lambda p: (p.line(seam, 9), p.line(_quad((168, 600), (250, 200), (600, 300)), 9),
                           p.line(_quad((250, 320), (400, 420), (650, 470)), 5))) * body * (1 - floor)
    _detail(canvas, sleeves, fly * 0.72, shade)
    _detail(canvas, M(lambda p: p.line(seam, 2)) * body, fly * 0.5, shade)

    door_pts = _spline([(226, 598), (238, 470), (290, 382), (352, 372), (402, 430), (420, 598)], closed=False)
    door = M(lambda p: p.poly(door_pts + [(226, 598)]))
    inner = M(lambda p: p.poly(_spline([(248, 598), (262, 500), (302, 430), (352, 424), (392, 470), (404, 598)],
                                       closed=False) + [(248, 598)]))
    shade_d = _lit(canvas, door, fly * 0.88, _bulge(door, 20 * s), spec_gain=0.05, tex=wrinkles)
    _lit(canvas, inner, np.array([48, 44, 40.0]), _bulge(inner, 40 * s), spec_gain=0.0)
    _detail(canvas, M(lambda p: p.dashed(door_pts, 3, 2, 2)) * door, np.array([70, 70, 72.0]), shade_d)
    roll = M(lambda p: p.line(_spline([(262, 470), (300, 410), (352, 400), (392, 440)], closed=False, n=8), 16))
    _lit(canvas, roll, fly * 0.95, _bulge(roll, 8 * s), tex=wrinkles)
    vent = M(lambda p: p.rrect((440, 250, 520, 284), 12))
    shade_v = _lit(canvas, vent, fly * 0.7, _bulge(vent, 8 * s), spec_gain=0.05)
    _detail(canvas, M(lambda p: p.dashed(_rrect_path((446, 256, 514, 278), 8), 1.5, 4, 3)) * vent,
            np.array([226, 214, 186.0]), shade_v)
    logo = M(lambda p: (_glyph(p, 560, 520, 14), p.text((560, 546), "FERNRIDGE", 11)))
    _detail(canvas, logo * 0.85, np.array([246, 240, 228.0]), shade)
    return _finish_product(canvas, rng)


def product_bottle(seed: int, size: tuple[int, int]) -> Image.Image:
    """A powder-coated steel bottle: cylinder shading, ribbed cap with loop, printed label band."""
    rng = np.random.default_rng(seed)
    w, h = size
    s = w / 800
    M = lambda fn: _mask(size, 800, fn)  # noqa: E731
    coat = _pick(rng, [(40, 120, 130), (168, 52, 46), (200, 184, 150), (52, 54, 58), (92, 120, 70)])
    canvas = _studio((h, w), rng)
    _shadow(canvas, size, (270, 676, 530, 728), blur=14, strength=0.4)
    loop = M(lambda p: p.ellipse((374, 82, 426, 142), width=10))
    _lit(canvas, loop, np.array([44, 44, 48.0]), _bulge(loop, 4 * s))
    cap = M(lambda p: p.rrect((355, 128, 445, 224), 14))
    cap_light = _cylinder((h, w), 355 * s, 445 * s, shininess=30)
    shade = _lit(canvas, cap, np.array([46, 46, 50.0]), cap_light, spec_gain=0.35)
    ribs = M(lambda p: [p.line([(x, 140), (x, 214)], 2) for x in range(361, 442, 7)]) * cap
    _detail(canvas, ribs, np.array([80, 80, 86.0]), shade)

    outline = ([(436, 206)] + _quad((436, 232), (498, 246), (498, 310)) + _quad((498, 670), (498, 706), (460, 706))
               + _quad((340, 706), (302, 706), (302, 670)) + _quad((302, 310), (302, 246), (364, 232)) + [(364, 206)])
    body = M(lambda p: p.poly(outline))
    band = M(lambda p: p.rect((0, 400, 800, 540))) * body
    label_c = _pick(rng, [(238, 234, 224), (246, 246, 244), (34, 34, 36)])
    col = coat[None, None, :] * (1 - band[..., None]) + band[..., None] * label_c
    light = _cylinder((h, w), 302 * s, 498 * s, shininess=45)
    shade = _lit(canvas, body, col, light, ambient=0.4, spec_gain=0.45, tex=_grain(rng, (h, w), 0.025, beta=0.4))
    ink = coat * 0.8 if label_c.mean() > 128 else np.array([236, 230, 214.0])
    print_ = M(lambda p: (_glyph(p, 400, 438, 24), p.text((400, 478), "FERNRIDGE", 22, stroke=0.4),
                          p.text((400, 506), "OUTFITTERS  ·  750 ml", 12))) * body
    _detail(canvas, print_, ink, shade)
    _detail(canvas, M(lambda p: p.line([(304, 662), (496, 662)], 2)) * body * 0.7, coat * 0.55, shade)
    return _finish_product(canvas, rng)


def product_lantern(seed: int, size: tuple[int, int]) -> Image.Image:
    """A camp lantern, lit: glowing globe with mantle, wire cage, metal cap and base, handle."""
    rng = np.random.default_rng(seed)
    w, h = size
    s = w / 800
    M = lambda fn: _mask(size, 800, fn)  # noqa: E731
    metal = _pick(rng, [(38, 82, 60), (150, 42, 36), (40, 40, 44), (40, 70, 120)])
    canvas = _studio((h, w), rng)
    yy, xx = np.mgrid[0:h, 0:w]
    r = np.hypot(xx - 400 * s, yy - 450 * s) / (320 * s)
    canvas += np.exp(-r * r * 2.0)[..., None] * np.array([10.0, 5.0, -6.0])  # warm spill on the backdrop
    _shadow(canvas, size, (270, 640, 530, 690), blur=14, strength=0.4)
    handle = M(lambda p: (p.arc((322, 150, 478, 430), 180, 360, 9), p.line([(322, 288), (334, 334)], 9),
                          p.line([(478, 288), (466, 334)], 9)))
    _lit(canvas, handle, np.array([70, 70, 74.0]), _bulge(handle, 4 * s), spec_gain=0.4)

    globe = M(lambda p: p.rrect((318, 330, 482, 572), 44))
    gr = np.hypot((xx - 400 * s) / (90 * s), (yy - 452 * s) / (130 * s))
    glow = np.array([255, 240, 190.0]) * (1 - _smoothstep(0, 1.1, gr))[..., None] + \
        np.array([226, 160, 70.0]) * _smoothstep(0, 1.1, gr)[..., None]
    _over(canvas, globe, glow)
    mantle = M(lambda p: p.ellipse((382, 416, 418, 486)))
    _over(canvas, ndimage.gaussian_filter(mantle, 3 * s), np.array([255, 252, 238.0]))
    _over(canvas, M(lambda p: p.rrect((334, 350, 350, 550), 8)) * 0.35, np.array([255, 255, 250.0]))
    bars = M(lambda p: [p.line([(x, 330), (x, 572)], 6) for x in (345, 400, 455)])
    _lit(canvas, bars, metal * 0.7, _cylinder((h, w), 318 * s, 482 * s), spec_gain=0.3)

    cap = M(lambda p: (p.poly([(326, 340), (474, 340), (446, 284), (354, 284)]), p.rrect((384, 258, 416, 292), 6)))
    _lit(canvas, cap, metal, _cylinder((h, w), 326 * s, 474 * s), spec_gain=0.45)
    ring = M(lambda p: p.rrect((310, 560, 490, 578), 6))
    _lit(canvas, ring, metal * 0.6, _cylinder((h, w), 310 * s, 490 * s), spec_gain=0.3)
    base = M(lambda p: p.rrect((304, 572, 496, 662), 18))
    shade = _lit(canvas, base, metal, _cylinder((h, w), 304 * s, 496 * s), spec_gain=0.45,
                 tex=_grain(rng, (h, w), 0.02, beta=0.4))
    knob = M(lambda p: p.ellipse((388, 598, 412, 622)))
    _lit(canvas, knob, np.array([190, 190, 196.0]), _bulge(knob, 8 * s), spec_gain=0.6)
    _detail(canvas, M(lambda p: p.text((400, 642), "FERNRIDGE", 13)) * base, metal * 1.6 + 40, shade)
    return _finish_product(canvas, rng)


def product_mug(seed: int, size: tuple[int, int]) -> Image.Image:
    """A speckled enamel camp mug with a dark rim and handle."""
    rng = np.random.default_rng(seed)
    w, h = size
    s = w / 800
    M = lambda fn: _mask(size, 800, fn)  # noqa: E731
    enamel = _pick(rng, [(38, 78, 148), (60, 110, 80), (168, 52, 46), (226, 220, 204)])
    rim_c = np.array([34, 34, 38.0])
    canvas = _studio((h, w), rng)
    _shadow(canvas, size, (228, 618, 590, 690), blur=14, strength=0.4)
    handle = M(lambda p: p.ellipse((452, 380, 592, 548), width=24))
    _lit(canvas, handle, enamel, _bulge(handle, 10 * s, shininess=40), spec_gain=0.4)
    body = M(lambda p: (p.rect((262, 322, 498, 638)), p.ellipse((262, 612, 498, 664))))
    shade = _lit(canvas, body, enamel, _cylinder((h, w), 262 * s, 498 * s, shininess=50), spec_gain=0.5)
    xs = rng.uniform(262, 498, 700)
    ys = rng.uniform(330, 660, 700)
    rs = rng.uniform(0.7, 1.8, 700)
    fleck = enamel * 0.4 if enamel.mean() > 180 else np.array([240, 240, 236.0])
    specks = M(lambda p: [p.ellipse((x - r, y - r, x + r, y + r)) for x, y, r in zip(xs, ys, rs)]) * body
    _detail(canvas, specks * 0.85, fleck, shade)
    _detail(canvas, M(lambda p: p.arc((262, 612, 498, 664), 0, 180, 5)) * body, rim_c, shade)
    print_ = M(lambda p: (_glyph(p, 380, 448, 26), p.text((380, 496), "FERNRIDGE", 17, stroke=0.3)))
    _detail(canvas, print_, fleck, shade)
    rim = M(lambda p: p.ellipse((258, 298, 502, 348)))
    _lit(canvas, rim, rim_c, _bulge(rim, 5 * s), spec_gain=0.4)
    inside = M(lambda p: p.ellipse((268, 305, 492, 341)))
    yy = np.arange(h)[:, None] / h
    _over(canvas, inside, np.array([230, 228, 220.0]) * (0.62 + 0.7 * (yy - 0.38))[..., None] * np.ones(3))
    return _finish_product(canvas, rng)


def thumbnail(render: Callable[[int, tuple[int, int]], Image.Image], crop: tuple[int, int, int, int]):
    """A thumbnail maker: render the product at 800x800, crop to the square ``crop``, shrink with Lanczos."""
    if crop[2] - crop[0] != crop[3] - crop[1]:
        raise ValueError(f"thumbnail crop {crop!r} is not square; the thumbnail would be stretched")

    def make(seed: int, size: tuple[int, int]) -> Image.Image:
        return render(seed, (800, 800)).crop(crop).resize(size, Image.Resampling.LANCZOS)

    make.__doc__ = f"Thumbnail of {render.__name__}."
    return make


# ----------------------------------------------------------------------------------------------
# Banners: wide scenic views built from fractal noise, dense high-frequency texture
# ----------------------------------------------------------------------------------------------


def _sky(rng, h, w, stops, *, clouds: float, band: tuple[float, float] = (0.2, 0.16)) -> np.ndarray:
    """Gradient sky with soft clouds stretched along x, (h, w, 3) float64."""
    sky = _vgrad(h, w, stops)
    if clouds:
        n = _noise(rng, (h, w), beta=3.0, squash=(1.0, 3.0)) + 0.35 * _noise(rng, (h, w), beta=2.2, squash=(1.0, 2.0))
        yy = (np.arange(h)[:, None] + 0.5) / h
        where = np.exp(-(((yy - band[0]) / band[1]) ** 2))
        a = _smoothstep(0.3, 1.8, n * where + 0.6 * where - 0.3) * clouds
        underside = _smoothstep(-0.5, 1.2, n - np.roll(n, -6, axis=0))  # bottoms of puffs go grey
        col = np.array([250, 250, 252.0]) * (1 - 0.14 * underside)[..., None]
        _over(sky, a, col)
    return sky


def _ridge(canvas, rng, y, colour, *, tex: float, relief: float = 0.6, haze=None, fade: float = 0.3,
           snow: float = 0.0) -> None:
    """A mountain layer below the ridgeline ``y`` ((w,) rows), with rock texture and valley haze."""
    h, w, _ = canvas.shape
    yy = np.arange(h)[:, None] + 0.5
    below = yy - y[None, :]
    alpha = np.clip(below + 0.5, 0.0, 1.0)
    rock = _noise(rng, (h, w), beta=1.9)
    fine = _noise(rng, (h, w), beta=0.8)
    gullies = _streaks(rng, (h, w), sigma=(7, 1.2))
    emb = rock - np.roll(rock, (3, 3), axis=(0, 1))  # lit from the upper left
    emb /= emb.std()
    col = np.asarray(colour, float) * (1 + tex * (0.45 * rock + 0.25 * fine + 0.35 * gullies + relief * emb))[..., None]
    if haze is not None:
        m = _smoothstep(0.0, fade * h, below)[..., None]
        col = col * (1 - 0.55 * m) + np.asarray(haze, float) * 0.55 * m
    if snow:
        depth = snow * h * (0.75 + 0.35 * _profile(rng, w, beta=1.5))
        v = (depth[None, :] - below) / (0.04 * h) + 0.8 * _noise(rng, (h, w), beta=2.6) + 0.5 * gullies
        snow_a = _smoothstep(-0.2, 0.2, v)
        snow_c = np.array([236, 242, 250.0]) * (1 + 0.09 * emb + 0.03 * fine)[..., None]
        col = col * (1 - snow_a[..., None]) + snow_c * snow_a[..., None]
    _over(canvas, alpha, col)


def _conifers(canvas, rng, *, count: int, x: tuple[float, float], base, height: tuple[float, float],
              colours, texture: float = 0.22, ss: int = 2) -> None:
    """A stand of serrated pine silhouettes, lit on the left; ``base(x)`` gives each tree's foot row."""
    h, w, _ = canvas.shape
    layer = Image.new("RGB", (w * ss, h * ss))
    cover = Image.new("L", (w * ss, h * ss))
    dl, dm = ImageDraw.Draw(layer), ImageDraw.Draw(cover)
    xs = rng.uniform(x[0], x[1], count)
    feet = np.array([base(v) for v in xs]) + rng.uniform(0, 0.02 * h, count)
    tall = rng.uniform(height[0], height[1], count)
    for i in np.argsort(feet):
        cx, foot, th = xs[i], feet[i], tall[i]
        tw = th * rng.uniform(0.26, 0.36)
        top = foot - th
        tiers = int(rng.integers(5, 9))
        left = [(cx, top)]
        for k in range(1, tiers + 1):
            f = k / tiers
            yk = top + th * 0.9 * f
            wk = tw * f * rng.uniform(0.85, 1.1)
            left += [(cx - 0.5 * wk, yk - 0.06 * th), (cx - wk, yk)]
        left += [(cx - 0.06 * tw, foot), (cx, foot)]
        right = [(2 * cx - px, py) for px, py in left]
        col = np.asarray(colours[int(rng.integers(len(colours)))], float) * rng.uniform(0.85, 1.1)
        lit = tuple(int(v) for v in np.clip(col * 1.12, 0, 255))
        dark = tuple(int(v) for v in np.clip(col * 0.8, 0, 255))
        for pts, c in ((left, lit), (right, dark)):
            q = [(px * ss, py * ss) for px, py in pts]
            dl.polygon(q, fill=c)
            dm.polygon(q, fill=255)
    rgb = np.asarray(layer.reduce(ss), float)
    a = np.asarray(cover.reduce(ss), float) / 255.0
    needles = 1 + texture * _noise(rng, (h, w), beta=0.5)
    canvas *= 1 - a[..., None]
    canvas += rgb * needles[..., None]


def _streaks(rng, shape, sigma=(2.5, 0.5)) -> np.ndarray:
    """Vertical blade-like streaks (grass), zero mean, unit std."""
    s = ndimage.gaussian_filter(rng.standard_normal(shape), sigma)
    return (s - s.mean()) / s.std()


def _ridgeline(rng, w, h, *, base: float, amp: float, beta: float = 2.7, jag: float = 0.0) -> np.ndarray:
    y = base * h - amp * h * _profile(rng, w, beta=beta)
    if jag:
        y += jag * h * _profile(rng, w, beta=1.9)
    return y


def banner_alpine(seed: int, size: tuple[int, int]) -> Image.Image:
    """Snowy peaks over layered ridges, a pine-covered slope and a grassy foreground."""
    rng = np.random.default_rng(seed)
    w, h = size
    canvas = _sky(rng, h, w, [(0, (52, 98, 168)), (0.5, (140, 178, 216)), (0.8, (206, 222, 234)), (1, (214, 226, 236))],
                  clouds=0.9)
    haze = (176, 196, 216)
    _ridge(canvas, rng, _ridgeline(rng, w, h, base=0.42, amp=0.085, jag=0.01), (120, 136, 164), tex=0.12,
           haze=haze, fade=0.35, snow=0.07)
    _ridge(canvas, rng, _ridgeline(rng, w, h, base=0.56, amp=0.045, jag=0.006), (84, 104, 118), tex=0.14,
           haze=haze, fade=0.25)
    near = _ridgeline(rng, w, h, base=0.68, amp=0.035, beta=2.6)
    _ridge(canvas, rng, near, (52, 78, 58), tex=0.2, relief=0.3)
    _conifers(canvas, rng, count=420, x=(-20, w + 20), base=lambda v: near[int(np.clip(v, 0, w - 1))] + 0.06 * h,
              height=(0.05 * h, 0.16 * h), colours=[(30, 62, 44), (40, 72, 48), (26, 54, 40), (48, 80, 52)])
    fg = _ridgeline(rng, w, h, base=0.87, amp=0.02, beta=3.0)
    yy = np.arange(h)[:, None] + 0.5
    t = np.clip((yy - fg[None, :]) / (h - fg.min()), 0, 1)
    grass = np.array([112, 140, 62.0]) * (1 + 0.3 * _streaks(rng, (h, w)) + 0.12 * _noise(rng, (h, w), beta=1.2)
                                         - 0.3 * t)[..., None]
    _over(canvas, np.clip(yy - fg[None, :] + 0.5, 0, 1), grass)
    return _to_image(_sensor(canvas, rng, 1.2))


def banner_lake(seed: int, size: tuple[int, int]) -> Image.Image:
    """A still mountain lake at morning: ridges, a pine shore and a rippled reflection."""
    rng = np.random.default_rng(seed)
    w, h = size
    canvas = _sky(rng, h, w, [(0, (96, 140, 196)), (0.45, (186, 206, 226)), (0.6, (232, 222, 210))], clouds=0.6,
                  band=(0.12, 0.1))
    haze = (200, 208, 220)
    _ridge(canvas, rng, _ridgeline(rng, w, h, base=0.33, amp=0.07, jag=0.008), (118, 130, 156), tex=0.12,
           haze=haze, fade=0.2, snow=0.05)
    _ridge(canvas, rng, _ridgeline(rng, w, h, base=0.45, amp=0.035), (80, 98, 104), tex=0.15, haze=haze, fade=0.12)
    shore = 0.57 * h
    _conifers(canvas, rng, count=360, x=(-20, w + 20), base=lambda v: shore, height=(0.04 * h, 0.15 * h),
              colours=[(30, 58, 44), (40, 70, 50), (24, 50, 38)])
    yy, xx = np.mgrid[0:h, 0:w].astype(float)
    depth = np.clip((yy - shore) / (h - shore), 0, 1)
    wave = _noise(rng, (h, w), beta=2.2, squash=(1.0, 6.0))
    src_y = np.clip(2 * shore - yy + 4 * depth * wave, 0, shore - 1)
    src_x = xx + 10 * depth * _noise(rng, (h, w), beta=2.0, squash=(1.0, 8.0))
    refl = np.stack([ndimage.map_coordinates(canvas[..., c], [src_y, src_x], order=1, mode="nearest")
                     for c in range(3)], axis=-1)
    water = refl * 0.72 + np.array([26, 58, 76.0]) * 0.28
    water *= (1 - 0.25 * depth)[..., None]
    ripples = _noise(rng, (h, w), beta=1.0, squash=(1.0, 6.0))
    water += (38 * _smoothstep(1.2, 2.6, ripples) * (0.4 + depth))[..., None] * np.array([1.0, 1.0, 0.96])
    water -= (14 * _smoothstep(1.0, 2.4, -ripples))[..., None]
    below = np.clip(yy - shore + 0.5, 0, 1)
    _over(canvas, below, water)
    return _to_image(_sensor(canvas, rng, 1.2))


def banner_forest(seed: int, size: tuple[int, int]) -> Image.Image:
    """Inside an old forest: trunks at three depths, leafy canopy, light shafts and ferns."""
    rng = np.random.default_rng(seed)
    w, h = size
    canvas = _vgrad(h, w, [(0, (196, 214, 190)), (0.5, (150, 174, 140)), (1, (96, 118, 82))])
    yy, xx = np.mgrid[0:h, 0:w].astype(float)
    for depth, count, (w0, w1), col in ((0, 26, (6, 16), (150, 164, 140)), (1, 16, (14, 34), (104, 108, 92)),
                                        (2, 8, (40, 90), (74, 62, 50))):
        bark = 1 + (0.1 + 0.12 * depth) * _streaks(rng, (h, w), sigma=(9, 0.7))
        for _ in range(count):
            x0, tw, lean = rng.uniform(-40, w + 40), rng.uniform(w0, w1), rng.uniform(-0.04, 0.04)
            lo = int(np.clip(min(x0, x0 - lean * h) - tw, 0, w))
            hi = int(np.clip(max(x0, x0 - lean * h) + tw, 0, w))
            if hi <= lo:
                continue
            cols = slice(lo, hi)  # only the columns the trunk can touch
            u = (xx[:, cols] - (x0 + lean * (yy[:, cols] - h))) / (tw / 2)
            a = np.clip((1 - np.abs(u)) * tw / 2, 0, 1)
            round_ = 0.55 + 0.45 * np.sqrt(np.clip(1 - u * u, 0, 1)) * (1 - 0.35 * u)
            streaks = np.roll(bark, lo * 7, axis=0)[:, cols]  # shift so neighbouring trunks differ
            _over(canvas[:, cols], a, np.asarray(col, float) * (streaks * round_)[..., None])
    canopy = _noise(rng, (h, w), beta=1.6) + 2.8 * (0.42 - yy / h) / 0.42
    leaf_a = _smoothstep(-0.2, 0.5, canopy)
    tone = _noise(rng, (h, w), beta=2.4)
    leaves = np.array([70, 110, 52.0]) * (1 + 0.18 * tone)[..., None] + np.array([30, 26, 8.0]) * _smoothstep(
        0.5, 1.5, tone)[..., None]
    leaves *= (1 + 0.28 * _noise(rng, (h, w), beta=0.4))[..., None]
    _over(canvas, leaf_a, leaves)
    shafts = ndimage.gaussian_filter(_profile(rng, w + h, beta=1.2), 6)
    rays = np.take(shafts, (xx + 0.55 * yy).astype(int) % (w + h))
    canvas += (30 * _smoothstep(0.6, 2.0, rays) * (1 - yy / h))[..., None] * np.array([1.0, 0.98, 0.85])
    floor = 0.74 * h
    ground = np.array([78, 70, 46.0]) * (1 + 0.25 * _noise(rng, (h, w), beta=0.9))[..., None]
    _over(canvas, _smoothstep(floor - 10, floor + 30, yy), ground)
    _ferns(canvas, rng, count=170, top=0.62 * h)
    return _to_image(_sensor(canvas, rng, 1.2))


def _ferns(canvas, rng, *, count: int, top: float, ss: int = 2) -> None:
    """Arching fern fronds with alternating leaflets drawn as thin lines."""
    h, w, _ = canvas.shape
    layer = Image.new("RGB", (w * ss, h * ss))
    cover = Image.new("L", (w * ss, h * ss))
    dl, dm = ImageDraw.Draw(layer), ImageDraw.Draw(cover)
    bases = sorted(zip(rng.uniform(top + 0.15 * h, h + 20, count), rng.uniform(-30, w + 30, count)))
    for by, bx in bases:
        length = rng.uniform(50, 130) * (0.6 + 0.6 * (by - top) / (h - top))
        ang = rng.uniform(-2.6, -0.5)
        end = (bx + length * math.cos(ang), by + length * math.sin(ang))
        ctrl = (bx + 0.5 * length * math.cos(ang - 0.4), by + 0.6 * length * math.sin(ang) - 0.2 * length)
        rachis = _quad((bx, by), ctrl, end, n=22)
        g = rng.uniform(0.75, 1.2)
        col = tuple(int(v) for v in np.clip(np.array([62, 112, 46]) * g, 0, 255))
        for j, (px, py) in enumerate(rachis[1:-1], start=1):
            qx, qy = rachis[j + 1]
            dx, dy = qx - px, qy - py
            n = math.hypot(dx, dy) or 1.0
            side = 1 if j % 2 else -1
            leaf = length * 0.22 * math.sin(math.pi * j / len(rachis))
            tip = (px - side * dy / n * leaf + 0.3 * dx / n * leaf, py + side * dx / n * leaf + 0.3 * dy / n * leaf)
            seg = [(px * ss, py * ss), (tip[0] * ss, tip[1] * ss)]
            dl.line(seg, fill=col, width=2 * ss)
            dm.line(seg, fill=255, width=2 * ss)
        q = [(px * ss, py * ss) for px, py in rachis]
        dl.line(q, fill=tuple(int(v * 0.7) for v in col), width=ss)
        dm.line(q, fill=255, width=ss)
    rgb = np.asarray(layer.reduce(ss), float)
    a = np.asarray(cover.reduce(ss), float) / 255.0
    canvas *= 1 - a[..., None]
    canvas += rgb


def banner_sunset(seed: int, size: tuple[int, int]) -> Image.Image:
    """Evening over receding forested ridges, the sun low in a warm sky, grass in the foreground."""
    rng = np.random.default_rng(seed)
    w, h = size
    canvas = _sky(rng, h, w, [(0, (58, 48, 106)), (0.3, (150, 80, 120)), (0.55, (238, 140, 96)),
                              (0.7, (252, 196, 130)), (1, (255, 220, 160))], clouds=0.35, band=(0.18, 0.1))
    yy, xx = np.mgrid[0:h, 0:w].astype(float)
    sx, sy, sr = rng.uniform(0.35, 0.7) * w, 0.58 * h, 0.055 * h
    d = np.hypot(xx - sx, yy - sy)
    canvas += (np.exp(-((d / (4 * sr)) ** 2)) * 60)[..., None] * np.array([1.0, 0.8, 0.5])
    _over(canvas, np.clip(sr - d + 0.5, 0, 1), np.array([255, 240, 200.0]))
    far, near_c = np.array([176, 104, 132.0]), np.array([40, 26, 44.0])
    for i, base in enumerate((0.55, 0.62, 0.69, 0.77, 0.85)):
        f = i / 4
        col = far * (1 - f) + near_c * f
        line = _ridgeline(rng, w, h, base=base, amp=0.045 - 0.005 * i, beta=2.4)
        _ridge(canvas, rng, line, col, tex=0.05 + 0.03 * i, relief=0.2, haze=col * 1.25 + 20, fade=0.12)
        if i >= 1:
            _conifers(canvas, rng, count=160 + 60 * i, x=(-20, w + 20),
                      base=lambda v, line=line: line[int(np.clip(v, 0, w - 1))] + 4,
                      height=(0.01 * h * (1 + i), 0.025 * h * (1 + i)), colours=[tuple(col * 0.92)], texture=0.08)
    fg = _ridgeline(rng, w, h, base=0.93, amp=0.025, beta=3.0)
    blades = _streaks(rng, (h, w), sigma=(3.0, 0.6))
    grass = np.array([38, 26, 30.0]) * (1 + 0.35 * blades)[..., None] + (
        np.array([120, 70, 30.0]) * _smoothstep(1.0, 2.5, blades)[..., None])
    _over(canvas, np.clip(yy - fg[None, :] + 0.5, 0, 1), grass)
    birds = _mask(size, w, lambda p: [p.line([(bx - 7, by - 4), (bx, by), (bx + 7, by - 4)], 1.6)
                                      for bx, by in zip(rng.uniform(0.2, 0.8, 7) * w, rng.uniform(0.2, 0.4, 7) * h)])
    _over(canvas, birds, np.array([50, 32, 48.0]))
    return _to_image(_sensor(canvas, rng, 1.2))


def banner_meadow(seed: int, size: tuple[int, int]) -> Image.Image:
    """A trail winding through a flowering meadow towards distant hills, with a headline."""
    rng = np.random.default_rng(seed)
    w, h = size
    canvas = _sky(rng, h, w, [(0, (70, 130, 200)), (0.5, (170, 204, 232)), (1, (214, 230, 240))], clouds=1.0,
                  band=(0.22, 0.18))
    _ridge(canvas, rng, _ridgeline(rng, w, h, base=0.44, amp=0.04, beta=3.0), (120, 150, 176), tex=0.05,
           haze=(180, 200, 220), fade=0.1)
    hills = _ridgeline(rng, w, h, base=0.5, amp=0.02, beta=3.0)
    _ridge(canvas, rng, hills, (72, 108, 86), tex=0.1, relief=0.3)
    _conifers(canvas, rng, count=500, x=(-20, w + 20), base=lambda v: hills[int(np.clip(v, 0, w - 1))] + 0.035 * h,
              height=(0.015 * h, 0.05 * h), colours=[(40, 72, 52), (50, 84, 56)], texture=0.15)
    horizon = 0.55 * h
    yy, xx = np.mgrid[0:h, 0:w].astype(float)
    t = np.clip((yy - horizon) / (h - horizon), 0, 1)
    tex = (1 - t) * _streaks(rng, (h, w), sigma=(1.5, 0.5)) + t * _streaks(rng, (h, w), sigma=(6, 1.3))
    meadow = (np.array([176, 184, 90.0]) * (1 - t[..., None]) + np.array([84, 128, 52.0]) * t[..., None]) * (
        1 + 0.28 * tex + 0.1 * _noise(rng, (h, w), beta=2.0))[..., None]
    _over(canvas, np.clip(yy - horizon + 0.5, 0, 1), meadow)
    cx = 0.55 * w + 0.16 * w * np.sin(2.4 * t + rng.uniform(0, 1)) * t
    half = 3 + 0.11 * w * t ** 1.4
    edge = np.abs(xx - cx) + 6 * t * _noise(rng, (h, w), beta=1.5)
    path_a = _smoothstep(half + 2, half - 2, edge) * (yy > horizon)
    gravel = np.array([182, 160, 124.0]) * (1 + 0.22 * _noise(rng, (h, w), beta=0.3) - 0.15 * (edge / half))[..., None]
    _over(canvas, path_a, gravel)
    n = 2600
    fy = horizon + (h - horizon) * rng.uniform(0, 1, n) ** 0.7
    fx = rng.uniform(0, w, n)
    palette = [(246, 214, 60), (250, 250, 244), (176, 110, 190), (230, 120, 60)]
    layer = Image.new("RGB", (w * 2, h * 2))
    cover = Image.new("L", (w * 2, h * 2))
    dl, dm = ImageDraw.Draw(layer), ImageDraw.Draw(cover)
    for x, y in zip(fx, fy):
        tt = (y - horizon) / (h - horizon)
        cxy = cx[int(min(y, h - 1)), 0]
        if abs(x - cxy) < half[int(min(y, h - 1)), 0] + 4:
            continue  # nothing grows on the trail
        r = (0.5 + 3.2 * tt) * 2
        c = palette[int(rng.integers(len(palette)))]
        dl.ellipse((x * 2 - r, y * 2 - r, x * 2 + r, y * 2 + r), fill=c)
        dm.ellipse((x * 2 - r, y * 2 - r, x * 2 + r, y * 2 + r), fill=255)
    _over(canvas, np.asarray(cover.reduce(2), float) / 255, np.asarray(layer.reduce(2), float)
          / np.maximum(np.asarray(cover.reduce(2), float)[..., None] / 255, 1e-6))
    title = _mask(size, w, lambda p: (p.text((0.07 * w, 0.2 * h), "Gear for the long way round", 0.085 * h,
                                             anchor="lm", stroke=0.6),
                                      p.text((0.07 * w, 0.31 * h), "New season packs, boots and shelters at Fernridge",
                                             0.04 * h, anchor="lm")), ss=2)
    _over(canvas, ndimage.gaussian_filter(title, 3) * 0.35, np.array([20, 30, 40.0]))
    _over(canvas, title, np.array([255, 255, 255.0]))
    return _to_image(_sensor(canvas, rng, 1.2))


# ----------------------------------------------------------------------------------------------
# Screenshots: the shop's own pages, flat fills with small sharp text and thin rules
# ----------------------------------------------------------------------------------------------

_INK = (34, 38, 42)
_MUTED = (108, 114, 120)
_RULE = (226, 228, 226)
_PAGE = (246, 246, 243)
_FIRST = ["Mara", "Tobias", "Ines", "Owen", "Priya", "Jonas", "Leila", "Ruben", "Hana", "Felix", "Ada", "Milo",
          "Sofia", "Kai", "Nora", "Elias", "Greta", "Idris"]
_LAST = ["Lindqvist", "Okafor", "Brandt", "Moreau", "Castell", "Haines", "Novak", "Ferreira", "Tanaka", "Ellison",
         "Quinn", "Rahman", "Abbott", "Varga", "Holm", "Achebe"]
_GOODS = [("Ridgeline 38L Pack", "Packs", 129.0), ("Switchback Hiking Boot", "Footwear", 164.0),
          ("Larchwood 2P Dome Tent", "Shelter", 289.0), ("Alder 750 ml Bottle", "Kitchen", 29.0),
          ("Emberglow Lantern", "Lighting", 46.0), ("Speckle Enamel Mug", "Kitchen", 16.0),
          ("Tarn Rain Shell", "Clothing", 189.0), ("Cirque Sleeping Bag", "Sleep", 219.0),
          ("Scree Trekking Poles", "Packs", 74.0), ("Moss Merino Socks", "Clothing", 19.0),
          ("Heron Camp Stove", "Kitchen", 88.0), ("Bramble Day Pack 22L", "Packs", 79.0)]
_SWATCH = [(52, 96, 70), (168, 82, 46), (42, 62, 104), (190, 146, 52), (214, 112, 44), (40, 120, 130),
           (122, 80, 48), (96, 40, 52)]


def _t(d: ImageDraw.ImageDraw, xy, s: str, size: int, fill=_INK, anchor="la", bold=False) -> None:
    # A thin stroke of the same ink stands in for a bold face (the built-in font has one weight).
    d.text(xy, s, fill=fill, font=_font(size), anchor=anchor, stroke_width=(0.5 if size >= 20 else 0.3) if bold else 0,
           stroke_fill=fill if bold else None)


def _money(v: float) -> str:
    return f"${v:,.2f}"


def _icon(d: ImageDraw.ImageDraw, name: str, x: float, y: float, s: float = 18, fill=_INK, width: int = 2) -> None:
    """Small line icons centred on (x, y), about ``s`` pixels across."""
    r = s / 2
    if name == "cart":
        d.line([(x - r, y - r * 0.7), (x - r * 0.6, y - r * 0.7), (x - r * 0.3, y + r * 0.4),
                (x + r * 0.8, y + r * 0.4), (x + r, y - r * 0.4), (x - r * 0.45, y - r * 0.4)],
               fill=fill, width=width, joint="curve")
        for cx in (x - r * 0.15, x + r * 0.6):
            d.ellipse((cx - 2, y + r * 0.7 - 2, cx + 2, y + r * 0.7 + 2), fill=fill)
    elif name == "search":
        d.ellipse((x - r, y - r, x + r * 0.4, y + r * 0.4), outline=fill, width=width)
        d.line([(x + r * 0.25, y + r * 0.25), (x + r, y + r)], fill=fill, width=width)
    elif name == "user":
        d.ellipse((x - r * 0.4, y - r, x + r * 0.4, y - r * 0.2), outline=fill, width=width)
        d.arc((x - r * 0.9, y - r * 0.05, x + r * 0.9, y + r * 1.6), 180, 360, fill=fill, width=width)
    elif name == "home":
        d.line([(x - r, y), (x, y - r), (x + r, y)], fill=fill, width=width, joint="curve")
        d.line([(x - r * 0.7, y - r * 0.2), (x - r * 0.7, y + r), (x + r * 0.7, y + r), (x + r * 0.7, y - r * 0.2)],
               fill=fill, width=width)
    elif name == "box":
        d.rectangle((x - r, y - r * 0.6, x + r, y + r), outline=fill, width=width)
        d.line([(x - r, y - r * 0.1), (x + r, y - r * 0.1)], fill=fill, width=width)
        d.line([(x - r * 0.2, y - r * 0.1), (x - r * 0.2, y + r * 0.2), (x + r * 0.2, y + r * 0.2),
                (x + r * 0.2, y - r * 0.1)], fill=fill, width=1)
    elif name == "chart":
        for i, hgt in enumerate((0.6, 1.2, 0.9, 1.7)):
            bx = x - r + i * r * 0.55
            d.rectangle((bx, y + r - hgt * r, bx + r * 0.35, y + r), fill=fill)
    elif name == "gear":
        for k in range(8):
            a = k * math.pi / 4
            d.line([(x + r * 0.5 * math.cos(a), y + r * 0.5 * math.sin(a)), (x + r * math.cos(a), y + r * math.sin(a))],
                   fill=fill, width=width + 1)
        d.ellipse((x - r * 0.7, y - r * 0.7, x + r * 0.7, y + r * 0.7), outline=fill, width=width)
        d.ellipse((x - r * 0.25, y - r * 0.25, x + r * 0.25, y + r * 0.25), fill=fill)
    elif name == "tag":
        d.polygon([(x - r, y - r), (x + r * 0.1, y - r), (x + r, y - r * 0.1), (x - r * 0.1, y + r),
                   (x - r, y + r * 0.1)], outline=fill, width=width)
        d.ellipse((x - r * 0.6, y - r * 0.6, x - r * 0.3, y - r * 0.3), fill=fill)
    elif name == "truck":
        d.rectangle((x - r, y - r * 0.6, x + r * 0.25, y + r * 0.4), outline=fill, width=width)
        d.line([(x + r * 0.25, y - r * 0.2), (x + r * 0.7, y - r * 0.2), (x + r, y + r * 0.1), (x + r, y + r * 0.4),
                (x + r * 0.25, y + r * 0.4)], fill=fill, width=width)
        for cx in (x - r * 0.55, x + r * 0.6):
            d.ellipse((cx - 3, y + r * 0.4 - 3, cx + 3, y + r * 0.4 + 3), fill=fill)
    elif name == "lock":
        d.rectangle((x - r * 0.7, y - r * 0.1, x + r * 0.7, y + r), fill=fill)
        d.arc((x - r * 0.45, y - r, x + r * 0.45, y + r * 0.2), 180, 360, fill=fill, width=width)
    elif name == "bell":
        d.chord((x - r * 0.8, y - r, x + r * 0.8, y + r * 1.2), 180, 360, outline=fill, width=width)
        d.line([(x - r, y + r * 0.55), (x + r, y + r * 0.55)], fill=fill, width=width)
        d.ellipse((x - 2, y + r * 0.7, x + 2, y + r * 0.7 + 4), fill=fill)
    elif name == "people":
        for ox, sc in ((-r * 0.45, 0.8), (r * 0.35, 1.0)):
            d.ellipse((x + ox - r * 0.3 * sc, y - r * 0.8, x + ox + r * 0.3 * sc, y - r * 0.2), outline=fill,
                      width=width)
            d.arc((x + ox - r * 0.6 * sc, y - r * 0.05, x + ox + r * 0.6 * sc, y + r * 1.3), 180, 360, fill=fill,
                  width=width)
    elif name == "check":
        d.line([(x - r * 0.7, y), (x - r * 0.15, y + r * 0.55), (x + r * 0.75, y - r * 0.6)], fill=fill, width=width,
               joint="curve")
    elif name == "down":
        d.line([(x - r * 0.5, y - r * 0.25), (x, y + r * 0.25), (x + r * 0.5, y - r * 0.25)], fill=fill, width=width)
    elif name == "dots":
        for k in (-1, 0, 1):
            d.ellipse((x + k * 6 - 1.5, y - 1.5, x + k * 6 + 1.5, y + 1.5), fill=fill)
    else:  # pragma: no cover - a typo in this script
        raise ValueError(f"unknown icon {name!r}")


def _logo(d: ImageDraw.ImageDraw, x: float, y: float, *, fill, text: str, size: int = 20) -> None:
    _glyph(_Pen(d, 1.0), x + 13, y, 13, fill)
    _t(d, (x + 34, y), text, size, fill, anchor="lm", bold=True)


def _button(d, box, label, *, fill=BRAND_ORANGE, ink=(255, 255, 255), size=15, outline=None) -> None:
    d.rounded_rectangle(box, 6, fill=fill, outline=outline, width=1)
    _t(d, ((box[0] + box[2]) / 2, (box[1] + box[3]) / 2), label, size, ink, anchor="mm", bold=fill != (255, 255, 255))


def _field(d, box, label, value, *, placeholder=False, chevron=False) -> None:
    _t(d, (box[0], box[1] - 20), label, 13, _MUTED)
    d.rounded_rectangle(box, 5, fill=(255, 255, 255), outline=(200, 204, 204), width=1)
    _t(d, (box[0] + 12, (box[1] + box[3]) / 2), value, 15, _MUTED if placeholder else _INK, anchor="lm")
    if chevron:
        _icon(d, "down", box[2] - 18, (box[1] + box[3]) / 2, 14, _MUTED)


def _store_header(d, w, rng) -> None:
    d.rectangle((0, 0, w, 68), fill=(255, 255, 255))
    d.line([(0, 68), (w, 68)], fill=_RULE)
    _logo(d, 36, 34, fill=BRAND_GREEN, text="Fernridge Outfitters")
    x = 300
    for item in ("Packs", "Footwear", "Shelter", "Kitchen", "Lighting", "Sale"):
        _t(d, (x, 34), item, 15, BRAND_ORANGE if item == "Sale" else _INK, anchor="lm")
        x += _font(15).getlength(item) + 28
    d.rounded_rectangle((w - 430, 18, w - 170, 50), 16, fill=(244, 245, 243), outline=_RULE)
    _icon(d, "search", w - 410, 34, 14, _MUTED)
    _t(d, (w - 392, 34), "Search gear", 14, _MUTED, anchor="lm")
    _icon(d, "user", w - 120, 34, 20)
    _icon(d, "cart", w - 70, 34, 22)
    d.ellipse((w - 62, 14, w - 44, 32), fill=BRAND_ORANGE)
    _t(d, (w - 53, 23), str(int(rng.integers(1, 5))), 11, (255, 255, 255), anchor="mm", bold=True)


def _admin_frame(d, w, h, active: str) -> None:
    d.rectangle((0, 0, w, h), fill=_PAGE)
    d.rectangle((0, 0, 220, h), fill=(28, 50, 42))
    _logo(d, 22, 36, fill=(236, 240, 232), text="Fernridge", size=19)
    _t(d, (58, 58), "Shop admin", 12, (160, 184, 170))
    y = 110
    for icon, label in (("home", "Dashboard"), ("box", "Orders"), ("tag", "Products"), ("chart", "Inventory"),
                        ("people", "Customers"), ("truck", "Shipping"), ("gear", "Settings")):
        if label == active:
            d.rounded_rectangle((12, y - 18, 208, y + 18), 6, fill=(48, 82, 68))
            d.rectangle((12, y - 18, 15, y + 18), fill=BRAND_ORANGE)
        ink = (255, 255, 255) if label == active else (196, 212, 202)
        _icon(d, icon, 40, y, 16, ink)
        _t(d, (62, y), label, 15, ink, anchor="lm")
        y += 46
    d.rectangle((220, 0, w, 60), fill=(255, 255, 255))
    d.line([(220, 60), (w, 60)], fill=_RULE)
    d.rounded_rectangle((250, 14, 620, 46), 6, fill=(244, 245, 243), outline=_RULE)
    _icon(d, "search", 270, 30, 14, _MUTED)
    _t(d, (288, 30), "Search orders, products, customers", 14, _MUTED, anchor="lm")
    _icon(d, "bell", w - 110, 28, 18, _MUTED)
    d.ellipse((w - 98, 14, w - 88, 24), fill=(200, 60, 50))
    d.ellipse((w - 70, 12, w - 34, 48), fill=(214, 112, 44))
    _t(d, (w - 52, 30), "AV", 14, (255, 255, 255), anchor="mm", bold=True)


def _thumb(d, box, colour, kind_i: int) -> None:
    """A small product tile: tinted square with a simple silhouette."""
    x0, y0, x1, y1 = box
    d.rounded_rectangle(box, 6, fill=(238, 238, 234))
    c = tuple(int(v) for v in colour)
    cx, cy, s = (x0 + x1) / 2, (y0 + y1) / 2, (x1 - x0) / 2
    if kind_i % 3 == 0:
        d.rounded_rectangle((cx - s * 0.45, cy - s * 0.55, cx + s * 0.45, cy + s * 0.65), s * 0.25, fill=c)
        d.rounded_rectangle((cx - s * 0.3, cy + s * 0.05, cx + s * 0.3, cy + s * 0.55), s * 0.12,
                            fill=tuple(int(v * 0.8) for v in c))
    elif kind_i % 3 == 1:
        d.rounded_rectangle((cx - s * 0.22, cy - s * 0.55, cx + s * 0.22, cy + s * 0.7), s * 0.12, fill=c)
        d.rectangle((cx - s * 0.14, cy - s * 0.75, cx + s * 0.14, cy - s * 0.55), fill=(50, 50, 54))
    else:
        d.polygon([(cx - s * 0.7, cy + s * 0.5), (cx, cy - s * 0.55), (cx + s * 0.7, cy + s * 0.5)], fill=c)
        d.polygon([(cx - s * 0.2, cy + s * 0.5), (cx, cy + s * 0.05), (cx + s * 0.2, cy + s * 0.5)], fill=(50, 46, 42))


def _people(rng, n):
    return [f"{_FIRST[int(rng.integers(len(_FIRST)))]} {_LAST[int(rng.integers(len(_LAST)))]}" for _ in range(n)]


def screenshot_checkout(seed: int, size: tuple[int, int]) -> Image.Image:
    """The checkout page: steps, address and payment form, order summary with a big button."""
    rng = np.random.default_rng(seed)
    w, h = size
    im = Image.new("RGB", size, _PAGE)
    d = ImageDraw.Draw(im)
    _store_header(d, w, rng)
    x = 60
    for i, step in enumerate(("Cart", "Shipping", "Payment", "Review")):
        done, cur = i < 2, i == 2
        fill = BRAND_GREEN if done else (BRAND_ORANGE if cur else (210, 212, 210))
        d.ellipse((x, 92, x + 24, 116), fill=fill)
        if done:
            _icon(d, "check", x + 12, 104, 14, (255, 255, 255))
        else:
            _t(d, (x + 12, 104), str(i + 1), 13, (255, 255, 255), anchor="mm", bold=True)
        _t(d, (x + 32, 104), step, 14, _INK if (done or cur) else _MUTED, anchor="lm")
        if i < 3:
            d.line([(x + 100, 104), (x + 150, 104)], fill=(200, 202, 200), width=2)
        x += 170
    d.rounded_rectangle((40, 136, 740, 772), 8, fill=(255, 255, 255), outline=_RULE)
    _t(d, (64, 160), "Shipping address", 20, bold=True)
    name = _people(rng, 1)[0]
    _field(d, (64, 214, 390, 252), "Full name", name)
    _field(d, (410, 214, 716, 252), "Email", name.split()[0].lower() + "@example.org")
    street = f"{int(rng.integers(2, 180))} Alder Lane, Flat {int(rng.integers(1, 9))}"
    _field(d, (64, 290, 716, 328), "Street address", street)
    _field(d, (64, 366, 300, 404), "Town", "Kestrel Bay")
    _field(d, (320, 366, 480, 404), "Postcode", f"KB{int(rng.integers(1, 9))} {int(rng.integers(1, 9))}RT")
    _field(d, (500, 366, 716, 404), "Country", "Northmark", chevron=True)
    d.rounded_rectangle((64, 424, 82, 442), 3, fill=BRAND_GREEN)
    _icon(d, "check", 73, 433, 12, (255, 255, 255))
    _t(d, (92, 433), "Save this address for next time", 14, anchor="lm")
    d.line([(64, 464), (716, 464)], fill=_RULE)
    _t(d, (64, 484), "Delivery", 20, bold=True)
    options = (("Standard, 3 to 5 working days", "Free"), ("Express, next working day", "$9.00"))
    for i, (opt, price) in enumerate(options):
        y = 526 + i * 48
        sel = i == int(rng.integers(2))
        d.rounded_rectangle((64, y - 20, 716, y + 20), 6, fill=(250, 247, 242) if sel else (255, 255, 255),
                            outline=BRAND_ORANGE if sel else _RULE, width=2 if sel else 1)
        d.ellipse((80, y - 8, 96, y + 8), outline=BRAND_ORANGE if sel else (170, 170, 170), width=2)
        if sel:
            d.ellipse((84, y - 4, 92, y + 4), fill=BRAND_ORANGE)
        _icon(d, "truck", 122, y, 20, _MUTED)
        _t(d, (146, y), opt, 15, anchor="lm")
        _t(d, (700, y), price, 15, anchor="rm", bold=True)
    d.line([(64, 600), (716, 600)], fill=_RULE)
    _t(d, (64, 620), "Payment", 20, bold=True)
    _field(d, (64, 680, 440, 718), "Card number", f"**** **** **** {int(rng.integers(1000, 9999))}")
    _field(d, (460, 680, 580, 718), "Expiry", f"{int(rng.integers(1, 13)):02d} / {int(rng.integers(27, 31))}")
    _field(d, (600, 680, 716, 718), "Security code", "CVC", placeholder=True)
    _icon(d, "lock", 72, 748, 12, _MUTED)
    _t(d, (86, 748), "Payments are encrypted. We never store your full card number.", 12, _MUTED, anchor="lm")

    d.rounded_rectangle((770, 136, 1160, 660), 8, fill=(255, 255, 255), outline=_RULE)
    _t(d, (794, 160), "Order summary", 20, bold=True)
    picks = rng.choice(len(_GOODS), 3, replace=False)
    y, sub = 210, 0.0
    for gi in picks:
        g, _, price = _GOODS[gi]
        qty = int(rng.integers(1, 3))
        sub += qty * price
        _thumb(d, (794, y, 858, y + 64), _SWATCH[int(rng.integers(len(_SWATCH)))], int(gi))
        _t(d, (872, y + 14), g, 15, bold=False)
        _t(d, (872, y + 38), f"Qty {qty}", 13, _MUTED)
        _t(d, (1136, y + 14), _money(qty * price), 15, anchor="ra")
        y += 84
    d.line([(794, y), (1136, y)], fill=_RULE)
    tax = round(sub * 0.08, 2)
    for label, val in (("Subtotal", _money(sub)), ("Delivery", "Free"), ("Tax (8%)", _money(tax))):
        y += 30
        _t(d, (794, y), label, 14, _MUTED, anchor="lm")
        _t(d, (1136, y), val, 14, anchor="rm")
    y += 24
    d.line([(794, y), (1136, y)], fill=_RULE)
    y += 30
    _t(d, (794, y), "Total", 18, anchor="lm", bold=True)
    _t(d, (1136, y), _money(sub + tax), 18, anchor="rm", bold=True)
    _button(d, (794, 590, 1136, 636), "Place order", size=16)
    d.rounded_rectangle((770, 676, 1160, 740), 8, fill=(236, 243, 238))
    _icon(d, "truck", 800, 708, 22, BRAND_GREEN)
    _t(d, (824, 698), "Free returns within 60 days", 14, BRAND_GREEN, anchor="lm", bold=True)
    _t(d, (824, 720), "Worn it on a trail and it failed? We repair it.", 12, _MUTED, anchor="lm")
    return im


_STATUS = {"Paid": ((222, 242, 228), (34, 110, 60)), "Shipped": ((222, 234, 248), (40, 84, 150)),
           "Pending": ((252, 240, 214), (150, 100, 20)), "Refunded": ((236, 236, 236), (100, 100, 100))}


def _pill(d, x, y, label) -> None:
    bg, fg = _STATUS[label]
    tw = _font(12).getlength(label)
    d.rounded_rectangle((x, y - 11, x + tw + 22, y + 11), 11, fill=bg)
    d.ellipse((x + 7, y - 3, x + 13, y + 3), fill=fg)
    _t(d, (x + 16, y), label, 12, fg, anchor="lm")


def screenshot_orders(seed: int, size: tuple[int, int]) -> Image.Image:
    """Admin order list: filters, a zebra table with status pills, pagination."""
    rng = np.random.default_rng(seed)
    w, h = size
    im = Image.new("RGB", size, _PAGE)
    d = ImageDraw.Draw(im)
    _admin_frame(d, w, h, "Orders")
    _t(d, (250, 96), "Orders", 28, bold=True)
    total = int(rng.integers(180, 420))
    _t(d, (250, 134), f"{total} orders in the last 30 days", 13, _MUTED)
    _button(d, (w - 290, 82, w - 170, 116), "Export CSV", fill=(255, 255, 255), ink=_INK, size=14, outline=_RULE)
    _button(d, (w - 156, 82, w - 30, 116), "New order", size=14)
    x = 250
    for i, chip in enumerate(("All", "Paid", "Shipped", "Pending", "Refunded")):
        tw = _font(13).getlength(chip) + 28
        d.rounded_rectangle((x, 152, x + tw, 180), 14, fill=BRAND_GREEN if i == 0 else (255, 255, 255),
                            outline=None if i == 0 else _RULE)
        _t(d, (x + tw / 2, 166), chip, 13, (255, 255, 255) if i == 0 else _INK, anchor="mm")
        x += tw + 8
    top, row = 200, 36
    d.rounded_rectangle((250, top, w - 30, h - 50), 8, fill=(255, 255, 255), outline=_RULE)
    cols = [(270, ""), (300, "Order"), (400, "Date"), (520, "Customer"), (720, "Items"), (800, "Total"),
            (920, "Status"), (1060, "Carrier")]
    for cx, label in cols:
        _t(d, (cx, top + 22), label.upper(), 11, _MUTED, anchor="lm", bold=False)
    d.line([(250, top + 44), (w - 30, top + 44)], fill=_RULE)
    people = _people(rng, 14)
    first = int(rng.integers(10400, 10900))
    days = np.sort(rng.integers(1, 29, 14))[::-1]  # newest first, like the order numbers
    for i in range(14):
        y = top + 44 + i * row + row / 2
        if i % 2:
            d.rectangle((251, y - row / 2, w - 31, y + row / 2), fill=(250, 250, 248))
        d.rounded_rectangle((264, y - 7, 278, y + 7), 3, outline=(180, 184, 184))
        _t(d, (300, y), f"#{first - i}", 14, BRAND_GREEN, anchor="lm", bold=True)
        _t(d, (400, y), f"{int(days[i]):02d} Oct 2026", 14, anchor="lm")
        _t(d, (520, y), people[i], 14, anchor="lm")
        n = int(rng.integers(1, 6))
        _t(d, (720, y), str(n), 14, anchor="lm")
        _t(d, (880, y), _money(n * rng.uniform(18, 120)), 14, anchor="rm")
        status = list(_STATUS)[int(rng.choice(4, p=[0.4, 0.35, 0.17, 0.08]))]
        _pill(d, 920, y, status)
        _t(d, (1060, y), ("Post", "Courier", "Pickup")[int(rng.integers(3))], 14, _MUTED, anchor="lm")
        _icon(d, "dots", 1150, y, 12, _MUTED)
        d.line([(250, y + row / 2), (w - 30, y + row / 2)], fill=(238, 238, 236))
    yb = h - 24
    _t(d, (250, yb), f"Showing 1-14 of {total}", 13, _MUTED, anchor="lm")
    x = w - 30 - 8 * 34
    for label in ("<", "1", "2", "3", "4", "...", str(math.ceil(total / 14)), ">"):
        cur = label == "1"
        d.rounded_rectangle((x, yb - 14, x + 28, yb + 14), 5, fill=BRAND_GREEN if cur else (255, 255, 255),
                            outline=None if cur else _RULE)
        _t(d, (x + 14, yb), label, 13, (255, 255, 255) if cur else _INK, anchor="mm")
        x += 34
    return im


def _card(d, box, title=None) -> None:
    d.rounded_rectangle(box, 8, fill=(255, 255, 255), outline=_RULE)
    if title:
        _t(d, (box[0] + 20, box[1] + 24), title, 15, anchor="lm", bold=True)


def screenshot_dashboard(seed: int, size: tuple[int, int]) -> Image.Image:
    """Admin dashboard: four figure cards with sparklines, a weekly line chart, a bar chart, a top list."""
    rng = np.random.default_rng(seed)
    w, h = size
    im = Image.new("RGB", size, _PAGE)
    d = ImageDraw.Draw(im)
    _admin_frame(d, w, h, "Dashboard")
    _t(d, (250, 96), "Good morning, Ana", 26, bold=True)
    _t(d, (250, 132), "Here is how the shop did over the last 7 days.", 13, _MUTED)
    orders = int(rng.integers(240, 420))
    aov = rng.uniform(48, 72)
    figures = [("Revenue", _money(orders * aov)[:-3]), ("Orders", f"{orders}"),
               ("Conversion", f"{rng.uniform(1.8, 3.6):.1f}%"), ("Average order", _money(aov))]
    cw = (w - 250 - 30 - 3 * 20) / 4
    for i, (label, val) in enumerate(figures):
        x0 = 250 + i * (cw + 20)
        _card(d, (x0, 150, x0 + cw, 262))
        _t(d, (x0 + 18, 174), label, 13, _MUTED, anchor="lm")
        _t(d, (x0 + 18, 212), val, 26, anchor="lm", bold=True)
        delta = rng.uniform(-6, 12)
        up = delta >= 0
        _t(d, (x0 + 18, 244), f"{'+' if up else '-'}{abs(delta):.1f}% vs last week", 12,
           (34, 130, 70) if up else (190, 60, 50), anchor="lm")
        spark = np.cumsum(rng.normal(0.3 if up else -0.3, 1.0, 14))
        spark = (spark - spark.min()) / (np.ptp(spark) or 1)
        pts = [(x0 + cw - 96 + k * 6, 226 - 30 * v) for k, v in enumerate(spark)]
        d.line(pts, fill=BRAND_GREEN if up else (190, 60, 50), width=2, joint="curve")

    _card(d, (250, 282, 830, 560), "Sales this week")
    gx0, gx1, gy0, gy1 = 300, 810, 330, 520
    top = 4000 + 1000 * int(rng.integers(0, 3))
    for k in range(5):
        gy = gy1 - k * (gy1 - gy0) / 4
        d.line([(gx0, gy), (gx1, gy)], fill=(236, 238, 236))
        _t(d, (gx0 - 8, gy), f"{top * k // 4:,}", 11, _MUTED, anchor="rm")
    days = ["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"]
    for k, day in enumerate(days):
        _t(d, (gx0 + k * (gx1 - gx0) / 6, gy1 + 16), day, 11, _MUTED, anchor="mm")
    for series, col, width in ((0, (180, 186, 186), 2), (1, BRAND_ORANGE, 3)):
        weekly = np.array([0.8, 0.75, 0.8, 0.9, 1.1, 1.25, 1.1])  # weekends sell more
        vals = np.clip(rng.uniform(0.35, 0.8, 7) * (1 + 0.25 * series) * weekly, 0.05, 0.98)
        pts = [(gx0 + k * (gx1 - gx0) / 6, gy1 - v * (gy1 - gy0)) for k, v in enumerate(vals)]
        d.line(pts, fill=col, width=width, joint="curve")
        for px, py in pts:
            d.ellipse((px - 3.5, py - 3.5, px + 3.5, py + 3.5), fill=(255, 255, 255), outline=col, width=2)
    for k, (label, col) in enumerate((("This week", BRAND_ORANGE), ("Last week", (180, 186, 186)))):
        lx = 640 + k * 96
        d.rectangle((lx, 302, lx + 14, 310), fill=col)
        _t(d, (lx + 20, 306), label, 12, _MUTED, anchor="lm")

    _card(d, (850, 282, w - 30, 560), "Sales by class")
    classes = ["Packs", "Footwear", "Shelter", "Kitchen", "Lighting", "Clothing"]
    vals = rng.uniform(0.2, 1.0, len(classes))
    for k, (c, v) in enumerate(zip(classes, vals)):
        y = 336 + k * 36
        _t(d, (870, y), c, 13, anchor="lm")
        d.rounded_rectangle((950, y - 8, w - 50, y + 8), 4, fill=(240, 241, 239))
        d.rounded_rectangle((950, y - 8, 950 + v * (w - 50 - 950), y + 8), 4, fill=_SWATCH[k])
    _t(d, (870, 546), "Share of revenue, last 7 days", 11, _MUTED, anchor="lm")

    _card(d, (250, 580, w - 30, h - 24), "Top products")
    heads = [(270, "PRODUCT"), (640, "CLASS"), (800, "UNITS"), (920, "REVENUE"), (1060, "STOCK")]
    for x, label in heads:
        _t(d, (x, 632), label, 11, _MUTED, anchor="lm")
    picks = rng.choice(len(_GOODS), 3, replace=False)
    for k, gi in enumerate(picks):
        y = 666 + k * 34
        name, cls, price = _GOODS[gi]
        units = int(rng.integers(20, 140))
        _thumb(d, (270, y - 13, 296, y + 13), _SWATCH[k + 2], int(gi))
        _t(d, (306, y), name, 14, anchor="lm")
        _t(d, (640, y), cls, 14, _MUTED, anchor="lm")
        _t(d, (800, y), str(units), 14, anchor="lm")
        _t(d, (920, y), _money(units * price), 14, anchor="lm")
        stock = int(rng.integers(3, 90))
        _t(d, (1060, y), f"{stock} left", 14, (190, 60, 50) if stock < 15 else _INK, anchor="lm")
        d.line([(250, y + 17), (w - 30, y + 17)], fill=(240, 240, 238))
    return im


def _wrap(text: str, size: int, width: float) -> list[str]:
    lines, cur = [], ""
    for word in text.split():
        trial = f"{cur} {word}".strip()
        if _font(size).getlength(trial) > width and cur:
            lines.append(cur)
            cur = word
        else:
            cur = trial
    return lines + [cur] if cur else lines


def _star(d, cx, cy, r, fill) -> None:
    pts = []
    for k in range(10):
        a = -math.pi / 2 + k * math.pi / 5
        rr = r if k % 2 == 0 else r * 0.45
        pts.append((cx + rr * math.cos(a), cy + rr * math.sin(a)))
    d.polygon(pts, fill=fill)


def screenshot_product_page(seed: int, size: tuple[int, int]) -> Image.Image:
    """A product page: breadcrumb, a large product photo with thumbnails, title, price, options, copy."""
    rng = np.random.default_rng(seed)
    w, h = size
    im = Image.new("RGB", size, (255, 255, 255))
    d = ImageDraw.Draw(im)
    _store_header(d, w, rng)
    _t(d, (60, 92), "Home  /  Packs  /  Ridgeline 38L Pack", 13, _MUTED, anchor="lm")
    photo = product_backpack(seed, (800, 800)).resize((540, 540), Image.Resampling.LANCZOS)
    im.paste(photo, (60, 116))
    for k, crop in enumerate(((0, 0, 540, 540), (120, 40, 420, 340), (220, 250, 420, 450), (80, 280, 300, 500))):
        x0 = 60 + k * 96
        im.paste(photo.crop(crop).resize((84, 84), Image.Resampling.LANCZOS), (x0, 670))  # detail views
        d.rectangle((x0 - 1, 669, x0 + 84, 754), outline=BRAND_GREEN if k == 0 else _RULE, width=2 if k == 0 else 1)
    x = 660
    _t(d, (x, 130), "Ridgeline 38L Pack", 32, bold=True)
    rating = rng.uniform(4.1, 4.9)
    for k in range(5):
        _star(d, x + 10 + k * 22, 190, 9, (230, 160, 40) if k < round(rating) else (220, 220, 220))
    _t(d, (x + 120, 190), f"{rating:.1f}  ({int(rng.integers(40, 400))} reviews)", 13, _MUTED, anchor="lm")
    _t(d, (x, 220), "$129.00", 28, bold=True)
    _t(d, (x + 130, 236), "Free delivery over $80", 13, BRAND_GREEN, anchor="ls")
    _t(d, (x, 290), "Colour: Fern green", 14)
    for k in range(5):
        cx = x + 18 + k * 40
        if k == 0:
            d.ellipse((cx - 17, 336 - 17, cx + 17, 336 + 17), outline=_INK, width=2)
        c = tuple(int(v) for v in _SWATCH[k])
        d.ellipse((cx - 13, 336 - 13, cx + 13, 336 + 13), fill=c)
    _t(d, (x, 376), "Back length", 14)
    for k, label in enumerate(("S / M", "M / L", "L / XL")):
        bx = x + k * 94
        sel = k == 1
        d.rounded_rectangle((bx, 402, bx + 84, 440), 6, fill=(255, 255, 255), outline=_INK if sel else _RULE,
                            width=2 if sel else 1)
        _t(d, (bx + 42, 421), label, 14, _INK, anchor="mm", bold=sel)
    d.rounded_rectangle((x, 464, x + 120, 510), 6, outline=_RULE, width=1)
    _t(d, (x + 22, 487), "-", 18, _MUTED, anchor="mm")
    _t(d, (x + 60, 487), "1", 16, anchor="mm")
    _t(d, (x + 98, 487), "+", 18, _MUTED, anchor="mm")
    _button(d, (x + 136, 464, w - 60, 510), "Add to cart", size=16)
    copy = ("A 38 litre top-loader for long days and overnights. The lid lifts off to become a hip pack, the "
            "front pocket takes wet layers, and the ventilated back panel keeps the load close without the sweat. "
            "Ripstop body, recycled lining, repairable buckles.")
    y = 540
    for line in _wrap(copy, 14, w - 60 - x):
        _t(d, (x, y), line, 14, (70, 74, 78))
        y += 22
    y += 10
    for feat in ("Removable lid converts to a 4 litre hip pack", "Rain cover in the base pocket",
                 "Fits a 3 litre bladder, hose port on both sides", f"Weight {rng.uniform(1.1, 1.5):.2f} kg"):
        _icon(d, "check", x + 7, y + 8, 12, BRAND_GREEN)
        _t(d, (x + 24, y), feat, 14)
        y += 26
    d.line([(x, y + 12), (w - 60, y + 12)], fill=_RULE)
    _icon(d, "truck", x + 12, y + 42, 20, _MUTED)
    _t(d, (x + 34, y + 42), "Ships in 1-2 working days from our Kestrel Bay workshop", 13, _MUTED, anchor="lm")
    return im


def screenshot_inventory(seed: int, size: tuple[int, int]) -> Image.Image:
    """Admin inventory: tabs, a stock table with level bars, a low-stock notice."""
    rng = np.random.default_rng(seed)
    w, h = size
    im = Image.new("RGB", size, _PAGE)
    d = ImageDraw.Draw(im)
    _admin_frame(d, w, h, "Inventory")
    _t(d, (250, 96), "Inventory", 28, bold=True)
    x = 250
    for i, tab in enumerate(("All items", "Low stock", "Incoming", "Archived")):
        _t(d, (x, 146), tab, 14, BRAND_GREEN if i == 0 else _MUTED, anchor="lm", bold=i == 0)
        tw = _font(14).getlength(tab)
        if i == 0:
            d.rectangle((x, 162, x + tw, 165), fill=BRAND_GREEN)
        x += tw + 30
    d.line([(250, 166), (w - 30, 166)], fill=_RULE)
    order = rng.permutation(len(_GOODS))
    levels = [(int(rng.integers(0, 160)), int(rng.integers(10, 40))) for _ in order]
    low = sum(stock < reorder for stock, reorder in levels)
    d.rounded_rectangle((250, 184, w - 30, 226), 6, fill=(253, 243, 228), outline=(240, 200, 140))
    _icon(d, "bell", 272, 205, 16, (150, 100, 20))
    notice = f"{low} items are" if low != 1 else "1 item is"
    _t(d, (292, 205), f"{notice} below the reorder point. Suppliers have been emailed a draft order.", 14,
       (120, 80, 20), anchor="lm")
    top = 246
    d.rounded_rectangle((250, top, w - 30, h - 30), 8, fill=(255, 255, 255), outline=_RULE)
    for cx, label in ((270, "SKU"), (380, "PRODUCT"), (650, "CLASS"), (760, "ON HAND"), (990, "REORDER AT"),
                      (1090, "BIN")):
        _t(d, (cx, top + 22), label, 11, _MUTED, anchor="lm")
    d.line([(250, top + 44), (w - 30, top + 44)], fill=_RULE)
    for i, (gi, (stock, reorder)) in enumerate(zip(order, levels)):
        y = top + 44 + i * 39 + 19.5
        name, cls, _ = _GOODS[gi]
        _t(d, (270, y), f"FR-{1000 + 37 * int(gi):04d}", 13, _MUTED, anchor="lm")
        _t(d, (380, y), name, 14, anchor="lm")
        _t(d, (650, y), cls, 14, anchor="lm")
        frac = min(stock / 160, 1.0)
        col = (200, 64, 50) if stock < reorder else ((220, 160, 40) if stock < 2 * reorder else BRAND_GREEN)
        d.rounded_rectangle((760, y - 4, 920, y + 4), 4, fill=(238, 238, 236))
        if frac > 0:
            d.rounded_rectangle((760, y - 4, 760 + max(8, 160 * frac), y + 4), 4, fill=col)
        _t(d, (934, y), str(stock), 14, col if stock < reorder else _INK, anchor="lm", bold=stock < reorder)
        _t(d, (990, y), str(reorder), 14, anchor="lm")
        _t(d, (1090, y), f"{'ABCDE'[int(rng.integers(5))]}-{int(rng.integers(1, 30)):02d}", 14, _MUTED, anchor="lm")
        if i < len(order) - 1:
            d.line([(250, y + 19.5), (w - 30, y + 19.5)], fill=(240, 240, 238))
    return im


# ----------------------------------------------------------------------------------------------
# Illustrations: a few flat colours, hard edges (drawn at 2x and box-reduced for clean edges)
# ----------------------------------------------------------------------------------------------


def _flat_canvas(size, bg):
    w, h = size
    im = Image.new("RGB", (2 * w, 2 * h), bg)
    return im, _Pen(ImageDraw.Draw(im), 2.0)


def _shade(c, f: float):
    return tuple(int(np.clip(v * f, 0, 255)) for v in c)


def _pine(pen: _Pen, x, foot, hgt, lit, dark, trunk) -> None:
    """A flat pine: three tiers, the right half in shadow."""
    pen.rect((x - hgt * 0.04, foot - hgt * 0.15, x + hgt * 0.04, foot), trunk)
    for k in range(3):
        top = foot - hgt + k * hgt * 0.24
        bot = foot - hgt * 0.12 - (2 - k) * hgt * 0.2
        half = hgt * (0.18 + 0.08 * k)
        pen.poly([(x, top), (x - half, bot), (x, bot)], lit)
        pen.poly([(x, top), (x + half, bot), (x, bot)], dark)


def _flat_icon(pen: _Pen, kind: str, cx, cy, s, main, dark, light) -> None:
    """Flat pictograms sized to a box of about 2s, used on badges and the packing list."""
    if kind == "mountain":
        pen.poly([(cx - s, cy + 0.6 * s), (cx - 0.2 * s, cy - 0.7 * s), (cx + 0.6 * s, cy + 0.6 * s)], main)
        pen.poly([(cx - 0.45 * s, cy - 0.3 * s), (cx - 0.2 * s, cy - 0.7 * s), (cx + 0.05 * s, cy - 0.3 * s),
                  (cx - 0.1 * s, cy - 0.2 * s), (cx - 0.25 * s, cy - 0.32 * s)], light)
        pen.poly([(cx + 0.1 * s, cy + 0.6 * s), (cx + 0.5 * s, cy - 0.15 * s), (cx + s, cy + 0.6 * s)], dark)
    elif kind == "tree":
        _pine(pen, cx, cy + 0.8 * s, 1.6 * s, main, dark, light)
    elif kind == "tent":
        pen.poly([(cx - s, cy + 0.6 * s), (cx, cy - 0.7 * s), (cx + s, cy + 0.6 * s)], main)
        pen.poly([(cx, cy - 0.7 * s), (cx + s, cy + 0.6 * s), (cx, cy + 0.6 * s)], dark)
        pen.poly([(cx - 0.3 * s, cy + 0.6 * s), (cx, cy - 0.05 * s), (cx + 0.3 * s, cy + 0.6 * s)], light)
    elif kind == "compass":
        pen.ellipse((cx - s, cy - s, cx + s, cy + s), dark)
        pen.ellipse((cx - 0.8 * s, cy - 0.8 * s, cx + 0.8 * s, cy + 0.8 * s), light)
        pen.poly([(cx, cy - 0.7 * s), (cx + 0.18 * s, cy), (cx - 0.18 * s, cy)], main)
        pen.poly([(cx, cy + 0.7 * s), (cx + 0.18 * s, cy), (cx - 0.18 * s, cy)], dark)
    elif kind == "flame":
        pen.poly(_spline([(cx, cy - s), (cx + 0.55 * s, cy - 0.1 * s), (cx + 0.5 * s, cy + 0.55 * s),
                          (cx, cy + 0.8 * s), (cx - 0.5 * s, cy + 0.55 * s), (cx - 0.45 * s, cy - 0.2 * s),
                          (cx - 0.2 * s, cy + 0.05 * s)]), main)
        pen.poly(_spline([(cx, cy - 0.2 * s), (cx + 0.28 * s, cy + 0.35 * s), (cx, cy + 0.75 * s),
                          (cx - 0.28 * s, cy + 0.35 * s)]), light)
        pen.rrect((cx - 0.8 * s, cy + 0.72 * s, cx + 0.8 * s, cy + 0.95 * s), 0.1 * s, dark)
    elif kind == "wave":
        for k in range(3):
            y = cy - 0.5 * s + k * 0.45 * s
            pts = [(cx - s + t * 2 * s, y + 0.15 * s * math.sin(t * 4 * math.pi)) for t in np.linspace(0, 1, 40)]
            pen.line(pts, 0.16 * s, (main, dark, main)[k])
        pen.ellipse((cx + 0.35 * s, cy - s, cx + 0.75 * s, cy - 0.6 * s), light)
    elif kind == "backpack":
        pen.rrect((cx - 0.65 * s, cy - 0.8 * s, cx + 0.65 * s, cy + s), 0.3 * s, main)
        pen.rrect((cx - 0.65 * s, cy - 0.8 * s, cx + 0.65 * s, cy - 0.2 * s), 0.3 * s, dark)
        pen.rrect((cx - 0.4 * s, cy + 0.15 * s, cx + 0.4 * s, cy + 0.8 * s), 0.12 * s, dark)
        pen.rect((cx - 0.08 * s, cy - 0.35 * s, cx + 0.08 * s, cy - 0.1 * s), light)
    elif kind == "bottle":
        pen.rrect((cx - 0.38 * s, cy - 0.6 * s, cx + 0.38 * s, cy + s), 0.15 * s, main)
        pen.rect((cx - 0.38 * s, cy - 0.05 * s, cx + 0.38 * s, cy + 0.35 * s), light)
        pen.rrect((cx - 0.22 * s, cy - s, cx + 0.22 * s, cy - 0.55 * s), 0.06 * s, dark)
    elif kind == "lantern":
        pen.arc((cx - 0.45 * s, cy - 1.1 * s, cx + 0.45 * s, cy - 0.2 * s), 180, 360, 0.1 * s, dark)
        pen.rrect((cx - 0.4 * s, cy - 0.4 * s, cx + 0.4 * s, cy + 0.6 * s), 0.12 * s, light)
        pen.ellipse((cx - 0.15 * s, cy - 0.1 * s, cx + 0.15 * s, cy + 0.35 * s), (255, 250, 230))
        pen.poly([(cx - 0.5 * s, cy - 0.35 * s), (cx + 0.5 * s, cy - 0.35 * s), (cx + 0.3 * s, cy - 0.65 * s),
                  (cx - 0.3 * s, cy - 0.65 * s)], main)
        pen.rrect((cx - 0.5 * s, cy + 0.55 * s, cx + 0.5 * s, cy + 0.95 * s), 0.08 * s, main)
    elif kind == "boot":
        pen.poly([(cx - 0.6 * s, cy - s), (cx - 0.05 * s, cy - s), (cx + 0.1 * s, cy - 0.1 * s),
                  (cx + 0.9 * s, cy + 0.35 * s), (cx + 0.95 * s, cy + 0.7 * s), (cx - 0.65 * s, cy + 0.7 * s)], main)
        pen.rect((cx - 0.7 * s, cy + 0.7 * s, cx + 1.0 * s, cy + 0.95 * s), dark)
        for k in range(3):
            pen.line([(cx - 0.2 * s + 0.12 * k * s, cy - 0.75 * s + 0.28 * k * s),
                      (cx + 0.1 * s + 0.12 * k * s, cy - 0.75 * s + 0.28 * k * s)], 0.08 * s, light)
    elif kind == "mug":
        pen.ellipse((cx + 0.25 * s, cy - 0.45 * s, cx + 0.95 * s, cy + 0.45 * s), dark, width=0.18 * s)
        pen.rrect((cx - 0.7 * s, cy - 0.65 * s, cx + 0.5 * s, cy + 0.8 * s), 0.12 * s, main)
        pen.rect((cx - 0.7 * s, cy - 0.65 * s, cx + 0.5 * s, cy - 0.5 * s), dark)
        pen.line([(cx - 0.3 * s, cy - 0.95 * s), (cx - 0.2 * s, cy - 0.75 * s)], 0.07 * s, light)
        pen.line([(cx + 0.05 * s, cy - 1.0 * s), (cx + 0.15 * s, cy - 0.75 * s)], 0.07 * s, light)
    elif kind == "map":
        pen.poly([(cx - s, cy - 0.7 * s), (cx - 0.33 * s, cy - 0.9 * s), (cx + 0.33 * s, cy - 0.7 * s),
                  (cx + s, cy - 0.9 * s), (cx + s, cy + 0.7 * s), (cx + 0.33 * s, cy + 0.9 * s),
                  (cx - 0.33 * s, cy + 0.7 * s), (cx - s, cy + 0.9 * s)], light)
        pen.poly([(cx - 0.33 * s, cy - 0.9 * s), (cx + 0.33 * s, cy - 0.7 * s), (cx + 0.33 * s, cy + 0.9 * s),
                  (cx - 0.33 * s, cy + 0.7 * s)], _shade(light, 0.88))
        pen.dashed([(cx - 0.8 * s, cy + 0.5 * s), (cx - 0.2 * s, cy - 0.1 * s), (cx + 0.3 * s, cy + 0.2 * s),
                    (cx + 0.7 * s, cy - 0.4 * s)], 0.08 * s, 0.15 * s, 0.1 * s, main)
        pen.ellipse((cx + 0.6 * s, cy - 0.55 * s, cx + 0.82 * s, cy - 0.33 * s), dark)
    else:  # pragma: no cover - a typo in this script
        raise ValueError(f"unknown pictogram {kind!r}")


def illustration_campsite(seed: int, size: tuple[int, int]) -> Image.Image:
    """A campsite at dusk or night: halo around the moon, peaks, pines, a tent and a campfire."""
    rng = np.random.default_rng(seed)
    w, h = size
    night = bool(rng.integers(2))
    sky = [(22, 34, 66), (34, 50, 92), (52, 70, 118)] if night else [(238, 150, 110), (246, 186, 124), (252, 216, 150)]
    im, pen = _flat_canvas(size, sky[0])
    mx, my = rng.uniform(0.55, 0.8) * w, rng.uniform(0.15, 0.25) * h
    for r, c in ((230, sky[1]), (150, sky[2])):
        pen.ellipse((mx - r, my - r, mx + r, my + r), c)
    moon = (242, 232, 200) if night else (255, 240, 196)
    pen.ellipse((mx - 48, my - 48, mx + 48, my + 48), moon)
    if night:
        for x, y in zip(rng.uniform(0, w, 40), rng.uniform(0, 0.45 * h, 40)):
            r = rng.uniform(1.2, 2.6)
            pen.ellipse((x - r, y - r, x + r, y + r), (236, 236, 220))
    far = (56, 70, 112) if night else (190, 110, 120)
    peaks = np.sort(rng.uniform(0, w, 6))
    pts = [(0, 0.62 * h)]
    for px in peaks:
        top = rng.uniform(0.3, 0.45) * h
        pts += [(px - 60, 0.55 * h), (px, top), (px + 60, 0.55 * h)]
        pen.poly([(px, top), (px - 22, top + 26), (px - 8, top + 20), (px + 4, top + 30), (px + 22, top + 26)],
                 (226, 230, 240) if night else (250, 226, 210))
    poly_far = pts + [(w, 0.62 * h), (w, h), (0, h)]
    pen.poly(poly_far, far)
    for px in peaks:  # redraw caps over the range
        top = min(y for x, y in pts if x == px)
        pen.poly([(px, top), (px - 22, top + 26), (px - 8, top + 20), (px + 4, top + 30), (px + 22, top + 26)],
                 (226, 230, 240) if night else (250, 226, 210))
    mid = (40, 54, 86) if night else (140, 80, 100)
    pen.poly(_spline([(-50, 0.66 * h), (0.25 * w, 0.6 * h), (0.55 * w, 0.67 * h), (0.8 * w, 0.61 * h),
                      (w + 50, 0.66 * h)], closed=False) + [(w + 50, h), (-50, h)], mid)
    ground = (30, 46, 52) if night else (92, 70, 84)
    pen.poly(_spline([(-50, 0.78 * h), (0.4 * w, 0.74 * h), (w + 50, 0.77 * h)], closed=False)
             + [(w + 50, h), (-50, h)], ground)
    trees = ((30, 70, 66), (22, 50, 50), (60, 44, 40)) if night else ((60, 92, 70), (42, 66, 56), (80, 56, 50))
    lit, dark, trunk = trees
    for x in sorted(rng.uniform(0, w, 14)):
        if 0.28 * w < x < 0.82 * w:
            continue  # keep the clearing free for the tent and the fire
        foot = 0.76 * h + rng.uniform(0, 0.12) * h
        _pine(pen, x, foot, rng.uniform(120, 230), lit, dark, trunk)
    tent, tent_d = (214, 112, 44), (168, 80, 32)
    tx, base = rng.uniform(0.36, 0.44) * w, 0.86 * h
    pen.ellipse((tx - 150, base - 14, tx + 150, base + 14), _shade(ground, 0.75))
    pen.poly([(tx - 130, base), (tx, base - 190), (tx + 130, base)], tent)
    pen.poly([(tx, base - 190), (tx + 130, base), (tx, base)], tent_d)
    pen.poly([(tx - 46, base), (tx, base - 110), (tx + 46, base)], (34, 28, 30))
    pen.line([(tx - 130, base), (tx - 180, base + 16)], 2, _shade(ground, 2.2))
    pen.line([(tx + 130, base), (tx + 180, base + 16)], 2, _shade(ground, 2.2))
    fx, fy = tx + rng.uniform(200, 260), base + 10
    pen.ellipse((fx - 110, fy - 20, fx + 110, fy + 20), _shade(ground, 1.5))
    pen.poly([(fx - 54, fy + 2), (fx - 46, fy - 10), (fx + 52, fy + 10), (fx + 44, fy + 22)], (110, 70, 48))
    pen.poly([(fx + 54, fy + 2), (fx + 46, fy - 10), (fx - 52, fy + 10), (fx - 44, fy + 22)], (90, 56, 40))
    pen.poly([(fx - 36, fy), (fx - 28, fy - 58), (fx - 10, fy - 36), (fx, fy - 96), (fx + 14, fy - 42),
              (fx + 30, fy - 64), (fx + 36, fy)], (240, 110, 40))
    pen.poly([(fx - 18, fy), (fx - 10, fy - 34), (fx, fy - 54), (fx + 10, fy - 30), (fx + 18, fy)], (252, 200, 70))
    return im.reduce(2)


def illustration_trail_map(seed: int, size: tuple[int, int]) -> Image.Image:
    """A hiking map: tinted elevation bands with contour lines, a lake, a dashed loop trail, labels."""
    rng = np.random.default_rng(seed)
    w, h = size
    W, H = 2 * w, 2 * h
    yy, xx = np.mgrid[0:H, 0:W].astype(float) / 2
    hills = [(rng.uniform(0.1, 0.9) * w, rng.uniform(0.12, 0.88) * h, rng.uniform(45, 120), rng.uniform(0.4, 1.0))
             for _ in range(9)]
    height = sum(a * np.exp(-((xx - x) ** 2 + (yy - y) ** 2) / (2 * s * s)) for x, y, s, a in hills)
    height += 0.1 * _noise(rng, (H, W), beta=3.4)
    levels = 10
    q = np.clip(((height - height.min()) / np.ptp(height) * levels).astype(int), 0, levels - 1)
    tints = np.array([(204, 224, 182), (194, 218, 172), (184, 210, 162), (176, 204, 152), (198, 206, 150),
                      (214, 204, 150), (222, 196, 146), (214, 182, 138), (230, 214, 190), (244, 238, 228)], float)
    rgb = tints[q]
    edge = np.zeros((H, W), bool)
    edge[:, 1:] |= q[:, 1:] != q[:, :-1]
    edge[1:, :] |= q[1:, :] != q[:-1, :]
    index = edge & (np.minimum(q, np.roll(q, 1, axis=1)) % 5 == 4)  # every fifth line is drawn heavier
    rgb[edge] = (150, 120, 92)
    rgb[ndimage.binary_dilation(index)] = (126, 96, 70)
    # The lake sits in the lowest ground away from the border, its shore wobbling with the terrain.
    low = np.where((xx > 0.25 * w) & (xx < 0.8 * w) & (yy > 0.3 * h) & (yy < 0.75 * h), height, np.inf)
    ly, lx = (v / 2 for v in np.unravel_index(np.argmin(low), low.shape))
    wob = 14 * _noise(rng, (H, W), beta=3.4)
    lake = np.hypot(xx - lx, (yy - ly) * 1.5) + wob < 58
    rgb[ndimage.binary_dilation(lake, iterations=3)] = (70, 130, 170)
    rgb[lake] = (150, 196, 222)
    im = Image.fromarray(rgb.astype(np.uint8), "RGB")
    pen = _Pen(ImageDraw.Draw(im), 2.0)
    names = ["Larch Peak", "Cairn Hill", "Owl Knoll"]
    peaks = sorted(hills, key=lambda t: -t[3])[:3]
    sx, sy = 0.32 * w, 0.9 * h  # the car park, clear of the legend
    # Visit the start, the peaks and the lake shore in order of angle around their centre, so the
    # loop does not cross itself.
    stops = [(sx, sy)] + [(p[0], p[1]) for p in peaks] + [(lx + 60, ly + 50)]
    mx, my = np.mean(stops, axis=0)
    stops.sort(key=lambda p: math.atan2(p[1] - my, p[0] - mx))
    route = _spline(stops, n=20)
    route.append(route[0])
    pen.line(route, 7, (255, 255, 255))
    pen.dashed(route, 3.5, 12, 7, (200, 40, 40))
    for (x, y, _, a), name in zip(peaks, names):
        pen.poly([(x, y - 8), (x - 8, y + 6), (x + 8, y + 6)], (60, 50, 44))
        elev = int(900 + 1100 * a)
        pen.text((x + 12, y), f"{name}  {elev:,} m", 13, (60, 50, 44), anchor="lm", stroke=0.3)
    pen.text((lx, ly), "Tarn Lake", 14, (40, 90, 130), anchor="mm", stroke=0.3)
    pen.rrect((sx - 11, sy - 11, sx + 11, sy + 11), 3, (40, 90, 160))
    pen.text((sx, sy), "P", 14, (255, 255, 255), stroke=0.5)
    cx, cy = route[len(route) * 2 // 3]
    _flat_icon(pen, "tent", cx, cy - 14, 11, BRAND_ORANGE, (170, 80, 30), (60, 40, 30))
    pen.rrect((20, 20, 300, 92), 8, (255, 255, 255))
    pen.text((36, 42), "Fernridge Loop", 20, (34, 38, 42), anchor="lm", stroke=0.5)
    pen.text((36, 70), f"{rng.uniform(6, 12):.1f} km  ·  {int(rng.integers(380, 820))} m ascent  ·  moderate", 12,
             (90, 94, 98), anchor="lm")
    nx, ny = w - 50, 60
    pen.poly([(nx, ny - 30), (nx - 12, ny + 10), (nx, ny), (nx + 12, ny + 10)], (34, 38, 42))
    pen.text((nx, ny + 26), "N", 14, (34, 38, 42), stroke=0.4)
    bx, by = w - 220, h - 40
    pen.rect((bx - 10, by - 28, w - 20, by + 22), (255, 255, 255))
    for k in range(4):
        pen.rect((bx + 40 * k, by - 4, bx + 40 * (k + 1), by + 4), (34, 38, 42) if k % 2 == 0 else (255, 255, 255))
    pen.rrect((bx, by - 4, bx + 160, by + 4), 0, (34, 38, 42), width=1)
    pen.text((bx, by - 16), "0", 11, (34, 38, 42))
    pen.text((bx + 160, by - 16), "1 km", 11, (34, 38, 42))
    lx0, ly0 = 20, h - 110
    pen.rrect((lx0, ly0, lx0 + 190, h - 20), 8, (255, 255, 255))
    pen.dashed([(lx0 + 14, ly0 + 22), (lx0 + 50, ly0 + 22)], 3.5, 10, 6, (200, 40, 40))
    pen.text((lx0 + 60, ly0 + 22), "Marked trail", 12, (34, 38, 42), anchor="lm")
    pen.line([(lx0 + 14, ly0 + 46), (lx0 + 50, ly0 + 46)], 1, (150, 120, 92))
    pen.text((lx0 + 60, ly0 + 46), "Contour, 50 m", 12, (34, 38, 42), anchor="lm")
    _flat_icon(pen, "tent", lx0 + 32, ly0 + 70, 9, BRAND_ORANGE, (170, 80, 30), (60, 40, 30))
    pen.text((lx0 + 60, ly0 + 70), "Camp site", 12, (34, 38, 42), anchor="lm")
    return im.reduce(2)


def illustration_badges(seed: int, size: tuple[int, int]) -> Image.Image:
    """Six trail-club badges in flat colours: circle, shield, hexagon, scalloped, square, pennant."""
    rng = np.random.default_rng(seed)
    w, h = size
    im, pen = _flat_canvas(size, (244, 236, 220))
    pen.text((w / 2, 44), "FERNRIDGE TRAIL CLUB", 26, (38, 60, 52), stroke=0.6)
    pen.text((w / 2, 76), "Earn them on the trail, wear them in town", 14, (110, 100, 90))
    palette = [((38, 86, 64), (24, 58, 44), (236, 226, 200)), ((214, 112, 44), (160, 74, 28), (252, 232, 200)),
               ((42, 72, 120), (26, 46, 84), (222, 232, 240)), ((170, 52, 46), (118, 32, 30), (248, 226, 214)),
               ((190, 146, 52), (130, 96, 30), (250, 240, 210)), ((60, 112, 120), (36, 76, 84), (222, 240, 236))]
    order = rng.permutation(6)
    icons = ["mountain", "tree", "tent", "compass", "flame", "wave"]
    labels = ["SUMMIT", "FOREST", "BASECAMP", "NAVIGATOR", "FIRESIDE", "LAKESIDE"]
    for i in range(6):
        cx, cy = (i % 3 + 0.5) * w / 3, 110 + (i // 3 + 0.5) * (h - 120) / 2
        main, dark, light = palette[order[i]]
        r = 112
        shape = i
        if shape == 0:
            pen.ellipse((cx - r, cy - r, cx + r, cy + r), dark)
            pen.ellipse((cx - r + 12, cy - r + 12, cx + r - 12, cy + r - 12), light)
            pen.ellipse((cx - r + 22, cy - r + 22, cx + r - 22, cy + r - 22), main)
        elif shape == 1:
            pts = [(cx - r, cy - r), (cx + r, cy - r), (cx + r, cy + 0.1 * r)] + _quad(
                (cx + r, cy + 0.1 * r), (cx + r * 0.9, cy + 0.8 * r), (cx, cy + 1.1 * r))[1:] + _quad(
                (cx, cy + 1.1 * r), (cx - r * 0.9, cy + 0.8 * r), (cx - r, cy + 0.1 * r))[1:]
            pen.poly(pts, dark)
            inner = [(cx + (x - cx) * 0.86, cy + (y - cy) * 0.86) for x, y in pts]
            pen.poly(inner, main)
        elif shape == 2:
            hexa = [(cx + r * math.cos(math.radians(30 + 60 * k)), cy + r * math.sin(math.radians(30 + 60 * k)))
                    for k in range(6)]
            pen.poly(hexa, dark)
            pen.poly([(cx + (x - cx) * 0.88, cy + (y - cy) * 0.88) for x, y in hexa], light)
            pen.poly([(cx + (x - cx) * 0.78, cy + (y - cy) * 0.78) for x, y in hexa], main)
        elif shape == 3:
            scallop = [(cx + (r if k % 2 == 0 else r * 0.9) * math.cos(k * math.pi / 18),
                        cy + (r if k % 2 == 0 else r * 0.9) * math.sin(k * math.pi / 18)) for k in range(36)]
            pen.poly(scallop, dark)
            pen.ellipse((cx - r * 0.8, cy - r * 0.8, cx + r * 0.8, cy + r * 0.8), main)
        elif shape == 4:
            pen.rrect((cx - r * 0.95, cy - r * 0.95, cx + r * 0.95, cy + r * 0.95), 30, dark)
            pen.rrect((cx - r * 0.82, cy - r * 0.82, cx + r * 0.82, cy + r * 0.82), 22, main)
        else:
            pen.poly([(cx - r, cy - r), (cx + r, cy - r), (cx + r, cy + 0.6 * r), (cx, cy + 1.05 * r),
                      (cx - r, cy + 0.6 * r)], dark)
            pen.poly([(cx - r * 0.86, cy - r * 0.86), (cx + r * 0.86, cy - r * 0.86), (cx + r * 0.86, cy + 0.52 * r),
                      (cx, cy + 0.88 * r), (cx - r * 0.86, cy + 0.52 * r)], main)
        _flat_icon(pen, icons[order[i]], cx, cy - 18, 46, light, dark, _shade(light, 0.8))
        pen.poly([(cx - r - 14, cy + 38), (cx + r + 14, cy + 38), (cx + r + 2, cy + 58), (cx + r + 14, cy + 78),
                  (cx - r - 14, cy + 78), (cx - r - 2, cy + 58)], light)
        pen.text((cx, cy + 58), labels[order[i]], 17, dark, stroke=0.5)
        for k in range(3):
            sx = cx - 24 + 24 * k
            _star_pen(pen, sx, cy - r + 40 if shape != 3 else cy - r + 34, 6, light)
    return im.reduce(2)


def _star_pen(pen: _Pen, cx, cy, r, fill) -> None:
    pts = []
    for k in range(10):
        a = -math.pi / 2 + k * math.pi / 5
        rr = r if k % 2 == 0 else r * 0.45
        pts.append((cx + rr * math.cos(a), cy + rr * math.sin(a)))
    pen.poly(pts, fill)


def illustration_packing(seed: int, size: tuple[int, int]) -> Image.Image:
    """A packing-list spot illustration: eight flat gear pictograms on tiles with ticks."""
    rng = np.random.default_rng(seed)
    w, h = size
    bg = [(232, 240, 234), (242, 236, 226), (230, 236, 244)][int(rng.integers(3))]
    im, pen = _flat_canvas(size, bg)
    pen.text((60, 64), "Packing list: one night out", 30, (38, 60, 52), anchor="lm", stroke=0.6)
    pen.text((60, 100), "Tick it off before you leave the car park.", 15, (100, 104, 100), anchor="lm")
    kinds = ["backpack", "bottle", "lantern", "compass", "boot", "mug", "tent", "map"]
    names = ["Pack", "Water", "Light", "Compass", "Boots", "Mug", "Shelter", "Map"]
    order = rng.permutation(8)
    ticked = rng.random(8) < 0.6
    colours = [((38, 86, 64), (24, 58, 44), (236, 226, 200)), ((214, 112, 44), (150, 70, 26), (252, 232, 200)),
               ((42, 72, 120), (26, 46, 84), (210, 224, 240)), ((190, 146, 52), (120, 88, 28), (250, 240, 210))]
    tw, th = 180, 240
    for i in range(8):
        x0 = 60 + (i % 4) * (tw + 20)
        y0 = 140 + (i // 4) * (th + 26)
        pen.rrect((x0 + 6, y0 + 8, x0 + tw + 6, y0 + th + 8), 18, _shade(bg, 0.9))
        pen.rrect((x0, y0, x0 + tw, y0 + th), 18, (255, 255, 255))
        main, dark, light = colours[(i + int(order[0])) % 4]
        pen.ellipse((x0 + tw / 2 - 62, y0 + 30, x0 + tw / 2 + 62, y0 + 154), light)
        _flat_icon(pen, kinds[order[i]], x0 + tw / 2, y0 + 92, 44, main, dark, _shade(light, 0.85))
        pen.text((x0 + 24, y0 + 196), names[order[i]], 18, (40, 44, 46), anchor="lm", stroke=0.4)
        bx = x0 + tw - 44
        pen.rrect((bx, y0 + 182, bx + 26, y0 + 208), 6, (38, 86, 64) if ticked[i] else (255, 255, 255))
        if ticked[i]:
            pen.line([(bx + 6, y0 + 195), (bx + 11, y0 + 201), (bx + 20, y0 + 189)], 3, (255, 255, 255))
        else:
            pen.rrect((bx, y0 + 182, bx + 26, y0 + 208), 6, (180, 184, 180), width=2)
    return im.reduce(2)


def illustration_poster(seed: int, size: tuple[int, int]) -> Image.Image:
    """A flat sale poster: banded sky, sun, layered hills with pines, birds and a headline."""
    rng = np.random.default_rng(seed)
    w, h = size
    bands = [(250, 224, 180), (246, 200, 150), (240, 172, 120), (228, 140, 100)]
    im, pen = _flat_canvas(size, bands[0])
    for k, c in enumerate(bands[1:], start=1):
        pen.rect((0, k * 0.12 * h, w, h), c)
    sx = rng.uniform(0.55, 0.8) * w
    pen.ellipse((sx - 80, 0.44 * h - 80, sx + 80, 0.44 * h + 80), (255, 236, 190))
    hills = [(0.5, (196, 104, 86)), (0.6, (150, 76, 74)), (0.7, (104, 56, 60)), (0.82, (60, 38, 46))]
    for i, (base, col) in enumerate(hills):
        prof = _profile(rng, 12, beta=2.0)
        pts = [(-40 + k * (w + 80) / 11, (base - 0.05 * prof[k]) * h) for k in range(12)]
        curve = _spline(pts, closed=False, n=10)
        pen.poly(curve + [(w + 40, h), (-40, h)], col)
        if i >= 2:
            for x in rng.uniform(0, w, 9 + 4 * i):
                y = np.interp(x, [p[0] for p in curve], [p[1] for p in curve]) + 6
                _pine(pen, x, y, rng.uniform(40, 70) * (i - 1), col, _shade(col, 0.8), _shade(col, 0.7))
    for bx, by in zip(rng.uniform(0.15, 0.5, 5) * w, rng.uniform(0.3, 0.45, 5) * h):
        pen.line([(bx - 12, by - 6), (bx, by), (bx + 12, by - 6)], 2.5, (120, 60, 60))
    pen.text((60, 92), "Autumn Trail Days", 64, (255, 255, 255), anchor="lm", stroke=1.0)
    pen.text((62, 150), "Up to 30% off packs and shelters  ·  1 to 14 November", 22, (120, 56, 50), anchor="lm")
    pen.rrect((60, h - 110, 300, h - 56), 27, (255, 255, 255))
    pen.text((180, h - 83), "Shop the sale", 22, (60, 38, 46), stroke=0.5)
    return im.reduce(2)


# ----------------------------------------------------------------------------------------------
# The sample set
# ----------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Spec:
    """One demo image: where it goes, how big it is, how it is drawn and how it is saved."""

    klass: str
    name: str
    size: tuple[int, int]  # (width, height) in pixels
    render: Callable[[int, tuple[int, int]], Image.Image]
    seed: int
    fmt: str = "JPEG"  # "JPEG" or "PNG"
    quality: int = 92
    subsampling: str = "4:2:0"

    @property
    def relpath(self) -> str:
        return f"{self.klass}/{self.name}.{'jpg' if self.fmt == 'JPEG' else 'png'}"


_P, _B, _S, _I = (800, 800), (1600, 600), (1200, 800), (900, 700)
SPECS: tuple[Spec, ...] = (
    Spec("product", "backpack", _P, product_backpack, 11),
    Spec("product", "boots", _P, product_boots, 12),
    Spec("product", "tent", _P, product_tent, 13),
    Spec("product", "bottle", _P, product_bottle, 14),
    Spec("product", "lantern", _P, product_lantern, 15),
    Spec("product", "mug", _P, product_mug, 16),
    Spec("banner", "alpine-ridge", _B, banner_alpine, 21),
    Spec("banner", "lake-morning", _B, banner_lake, 22),
    Spec("banner", "fern-forest", _B, banner_forest, 23),
    Spec("banner", "sunset-ridges", _B, banner_sunset, 24),
    Spec("banner", "meadow-trail", _B, banner_meadow, 25),
    # Screenshots arrive as high-quality 4:4:4 JPEG: what a site's CMS is usually handed.
    Spec("screenshot", "checkout", _S, screenshot_checkout, 31, quality=95, subsampling="4:4:4"),
    Spec("screenshot", "order-table", _S, screenshot_orders, 32, quality=95, subsampling="4:4:4"),
    Spec("screenshot", "admin-dashboard", _S, screenshot_dashboard, 33, quality=95, subsampling="4:4:4"),
    Spec("screenshot", "product-page", _S, screenshot_product_page, 34, quality=95, subsampling="4:4:4"),
    Spec("screenshot", "inventory", _S, screenshot_inventory, 35, quality=95, subsampling="4:4:4"),
    # Flat art is often kept as PNG; two arrive as 4:4:4 JPEG, as mixed folders do.
    Spec("illustration", "campsite", _I, illustration_campsite, 41, fmt="PNG"),
    Spec("illustration", "trail-map", _I, illustration_trail_map, 42, fmt="PNG"),
    Spec("illustration", "badges", _I, illustration_badges, 43, fmt="PNG"),
    Spec("illustration", "packing-list", _I, illustration_packing, 44, quality=93, subsampling="4:4:4"),
    Spec("illustration", "autumn-poster", _I, illustration_poster, 45, quality=92, subsampling="4:4:4"),
    Spec("thumbnail", "backpack-thumb", (320, 320), thumbnail(product_backpack, (80, 84, 720, 724)), 51),
    Spec("thumbnail", "boots-thumb", (320, 320), thumbnail(product_boots, (60, 100, 740, 780)), 52),
    Spec("thumbnail", "bottle-thumb", (320, 320), thumbnail(product_bottle, (80, 70, 740, 730)), 53),
    Spec("thumbnail", "mug-thumb", (320, 320), thumbnail(product_mug, (160, 240, 660, 740)), 54),
)
CLASSES: tuple[str, ...] = tuple(dict.fromkeys(s.klass for s in SPECS))


def render(spec: Spec) -> Image.Image:
    """Draw one image; the same spec always gives the same pixels (fixed seed)."""
    im = spec.render(spec.seed, spec.size)
    if im.size != spec.size or im.mode != "RGB":  # a drawing bug, not a user error
        raise RuntimeError(f"{spec.relpath}: drew {im.mode} {im.size}, expected RGB {spec.size}")
    return im


def select(only: list[str] | None) -> list[Spec]:
    """The specs named by ``only`` (class names or ``class/name``); all when ``only`` is empty."""
    if not only:
        return list(SPECS)
    chosen = []
    for key in only:
        hits = [s for s in SPECS if key in (s.klass, f"{s.klass}/{s.name}", s.relpath)]
        if not hits:
            allowed = ", ".join(CLASSES)
            raise ValueError(f"--only {key!r} names no image; use a class ({allowed}) or class/name")
        chosen += [s for s in hits if s not in chosen]
    return chosen


def write(spec: Spec, out: Path) -> Path:
    """Render ``spec`` and save it under ``out``; no metadata is written (no EXIF, no text chunks)."""
    path = out / spec.relpath
    path.parent.mkdir(parents=True, exist_ok=True)
    im = render(spec)
    if spec.fmt == "PNG":
        im.save(path, "PNG", optimize=True)
    else:
        im.save(path, "JPEG", quality=spec.quality, subsampling=spec.subsampling, optimize=True)
    return path


def main(argv: list[str] | None = None) -> list[Path]:
    parser = argparse.ArgumentParser(description="Draw the Fernridge Outfitters demo sample set.")
    parser.add_argument("--out", type=Path, default=DEFAULT_OUT, help="output folder (default: demo_images/)")
    parser.add_argument("--only", action="append", metavar="CLASS[/NAME]",
                        help="draw only this class or image; repeatable")
    args = parser.parse_args(argv)
    try:
        specs = select(args.only)
    except ValueError as exc:
        parser.error(str(exc))
    written = []
    for spec in specs:
        path = write(spec, args.out)
        written.append(path)
        print(f"{spec.relpath:40s} {spec.size[0]:>5d}x{spec.size[1]:<5d} {path.stat().st_size / 1024:7.1f} kB")
    total = sum(p.stat().st_size for p in written)
    print(f"{len(written)} images, {total / 1024:.0f} kB, in {args.out}")
    known = {s.relpath for s in SPECS}
    strays = sorted(str(p.relative_to(args.out)) for c in CLASSES if (args.out / c).is_dir()
                    for p in (args.out / c).iterdir() if p.is_file() and str(p.relative_to(args.out)) not in known)
    for stray in strays:  # left alone: it may be someone's own file
        print(f"note: {stray} is not drawn by this script", file=sys.stderr)
    return written


if __name__ == "__main__":
    main()
