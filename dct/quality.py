"""SSIM and PSNR, with reference statistics computed once and reused for every setting.

SSIM follows Wang, Bovik, Sheikh & Simoncelli, "Image quality assessment: from error visibility to
structural similarity", IEEE Trans. Image Processing 13(4), 2004, doi:10.1109/TIP.2003.819861,
with the paper's settings: an 11x11 circular-symmetric Gaussian window with sigma 1.5, K1 = 0.01,
K2 = 0.03 and L = 255 (section III-C). For each pixel, with local statistics taken under the window,

.. math::

    \\mathrm{SSIM}(x, y) = \\frac{(2\\mu_x\\mu_y + C_1)(2\\sigma_{xy} + C_2)}
                               {(\\mu_x^2 + \\mu_y^2 + C_1)(\\sigma_x^2 + \\sigma_y^2 + C_2)},
    \\qquad C_1 = (K_1 L)^2,\\ C_2 = (K_2 L)^2          \\quad\\text{(eq. 13)}

and the image's score is the mean of the map (eq. 17). The conventions match
``skimage.metrics.structural_similarity(gaussian_weights=True, sigma=1.5, use_sample_covariance=False,
data_range=255)``: the filter truncates at 3.5 sigma (radius 5), borders are mirrored (scipy's
"reflect"), and the mean excludes a 5-pixel border.

Speed: the reference image's mean and variance depend only on the reference, so a
:class:`ReferenceStats` computes them once; each setting then needs only the three filtered images
that involve the distorted image (mean, second moment, cross moment). The separable Gaussian runs in
OpenCV (``cv2.sepFilter2D`` on float32 with ``BORDER_REFLECT``, which mirrors the edge sample as
scipy's "reflect" does), over row strips with a 5-row halo, so temporary memory stays bounded by a
strip for any image size. Second moments are taken on level-shifted samples (minus 128) to keep
float32 cancellation small. OpenCV's own thread pool is left to the caller (``dct.threads``): a
sweep runs one image per core.
"""

from __future__ import annotations

import math
from functools import lru_cache

import cv2
import numpy as np

from .jit import kernel

K1 = 0.01
K2 = 0.03
L = 255.0
C1 = (K1 * L) ** 2
C2 = (K2 * L) ** 2
SIGMA = 1.5
TRUNCATE = 3.5
RADIUS = int(TRUNCATE * SIGMA + 0.5)  # 5, as scipy.ndimage computes it
STRIP = 256  # rows per strip (a multiple of LOCAL_TILE and of every step)
LOCAL_TILE = 16  # side of the tiles whose mean SSIM is the "local" SSIM
LOCAL_PERCENTILE = 5.0  # the local floor looks at the worst 5 % of tiles
KEEP_STATS_PIXELS = 4_000_000  # planes up to this keep their reference statistics between comparisons


@lru_cache(maxsize=None)
def gaussian_weights(sigma: float = SIGMA, radius: int = RADIUS) -> np.ndarray:
    """Normalized 1-D Gaussian taps, shape (2*radius+1,), float64 (as scipy.ndimage builds them)."""
    x = np.arange(-radius, radius + 1, dtype=np.float64)
    w = np.exp(-0.5 * (x / sigma) ** 2)
    return w / w.sum()


def _rows_with_halo(plane: np.ndarray, start: int, stop: int) -> np.ndarray:
    """Rows start-r .. stop+r of a plane, mirrored ("reflect") past its top and bottom edges."""
    h = plane.shape[-2]
    lo, hi = start - RADIUS, stop + RADIUS
    core = plane[..., max(lo, 0) : min(hi, h), :]
    top, bottom = max(0, -lo), max(0, hi - h)
    if top or bottom:
        pad = [(0, 0)] * (core.ndim - 2) + [(top, bottom), (0, 0)]
        core = np.pad(core, pad, mode="symmetric")
    return core


def _filter(rows: np.ndarray) -> np.ndarray:
    """Gaussian-filter a strip that carries an r-row halo; returns the strip's own rows, float32.

    Rows come from the plane itself (or its mirror at the top and bottom), so the halo makes the
    vertical border mode irrelevant; columns are mirrored by ``BORDER_REFLECT``.
    """
    w = gaussian_weights()
    out = cv2.sepFilter2D(rows, cv2.CV_32F, w, w, borderType=cv2.BORDER_REFLECT)
    return out[RADIUS:-RADIUS]


def gaussian_filter(image: np.ndarray) -> np.ndarray:
    """The SSIM window filter on a 2-D image (sigma 1.5, radius 5, mirrored borders), float32."""
    plane = np.asarray(image, dtype=np.float32)
    if plane.ndim != 2:
        raise ValueError(f"image must be a 2-D plane, got shape {plane.shape!r}")
    out = np.empty(plane.shape, dtype=np.float32)
    for s in range(0, plane.shape[0], STRIP):
        e = min(s + STRIP, plane.shape[0])
        out[s:e] = _filter(np.ascontiguousarray(_rows_with_halo(plane, s, e)))
    return out


class ReferenceStats:
    """Local mean and variance of a reference plane, for SSIM against many distorted versions.

    Parameters
    ----------
    reference : ndarray, shape (H, W)
        Samples on the 0..255 scale (uint8 or float).
    step : int
        1 computes the SSIM map at every pixel. 2 evaluates eq. (13) at every other row and column
        only and averages those samples: the 11x11 window makes the map smooth at that scale, so the
        mean moves by well under 1e-3 (tests/test_quality.py) for a quarter of the per-pixel work.
        Eightfold uses 2 for the chroma planes; luma SSIM, its map and the local statistic always use 1.
    """

    def __init__(self, reference: np.ndarray, *, step: int = 1, keep_stats: bool | None = None):
        ref = np.asarray(reference)
        if ref.ndim != 2:
            raise ValueError(f"reference must be a 2-D plane, got shape {ref.shape!r}")
        if min(ref.shape) < 2 * RADIUS + 1:
            raise ValueError(
                f"SSIM needs a plane of at least {2 * RADIUS + 1}x{2 * RADIUS + 1} pixels for its 11x11 "
                f"window, got {ref.shape[1]}x{ref.shape[0]}"
            )
        if step not in (1, 2, 4):
            raise ValueError(f"step must be 1, 2 or 4, got {step!r}")
        self.shape = ref.shape
        # Small planes are cheap, and sampling would leave too few interior pixels: use them all.
        self.step = step = step if min(ref.shape) >= 64 else 1
        # The plane itself is kept by reference (no copy, uint8 stays uint8); float32 strips are made
        # on the fly.
        self.plane = ref if ref.dtype in (np.float32, np.uint8) else ref.astype(np.float32)
        # Large planes recompute their mean and variance strip by strip in every comparison (two
        # more filters of five) instead of keeping 8 bytes per pixel: the same numbers, bounded memory.
        self.keep_stats = ref.size <= KEEP_STATS_PIXELS if keep_stats is None else bool(keep_stats)
        self.mean = self.var = None
        if self.keep_stats:
            sampled = (-(-ref.shape[0] // step), -(-ref.shape[1] // step))
            self.mean = np.empty(sampled, dtype=np.float32)  # mu_x at the sampled pixels
            self.var = np.empty(sampled, dtype=np.float32)  # sigma_x^2
            for s, e in self._strips():
                lo, hi = s // step, -(-e // step)
                self.mean[lo:hi], self.var[lo:hi] = self._strip_stats(s, e)

    def _strip_stats(self, s: int, e: int) -> tuple[np.ndarray, np.ndarray]:
        """mu_x and sigma_x^2 at the sampled pixels of rows s..e."""
        step = self.step
        xs = _rows_with_halo(self.plane, s, e).astype(np.float32) - 128.0
        ux = _filter(xs)[::step, ::step]
        xx = _filter(xs * xs)[::step, ::step]
        return ux + 128.0, xx - ux * ux

    def _strips(self):
        h = self.shape[0]
        for s in range(0, h, STRIP):
            yield s, min(s + STRIP, h)

    def compare(self, distorted: np.ndarray, *, want_map: bool = False, want_local: bool = True,
                at: np.ndarray | None = None) -> "SsimResult":
        """SSIM of a distorted plane against this reference.

        Parameters
        ----------
        distorted : ndarray, shape (H, W), on the 0..255 scale
        want_map : bool
            Also return the full SSIM map (H, W), float32 (``step`` 1 only).
        want_local : bool
            Compute the local statistic (False leaves it NaN and skips the tile means).
        at : ndarray of int, sorted, optional
            Flat pixel indices whose map values to return (``values_at``, float32): what a caller
            reads of the map without keeping the whole map (``step`` 1 only).

        Returns
        -------
        SsimResult
            The mean of the map over the interior, the local statistic (``step`` 1 only: the
            LOCAL_PERCENTILE of 16x16 tile means of the full-resolution map, whose tile means are
            kept in ``tile_means``), PSNR, and the map when asked for.
        """
        y = np.asarray(distorted)  # converted to float32 strip by strip
        if y.dtype not in (np.uint8, np.float32):
            y = y.astype(np.float32)
        if y.shape != self.shape:
            raise ValueError(f"distorted plane has shape {y.shape!r}, the reference {self.shape!r}")
        step = self.step
        if (want_map or at is not None) and step != 1:
            raise ValueError("the SSIM map needs step=1")
        gathered = []
        if at is not None:
            at = np.asarray(at)
            bounds = np.searchsorted(at, [s * self.shape[1] for s, _ in self._strips()] + [y.size])
        h, w = self.shape
        ssim_map = np.empty(self.shape, dtype=np.float32) if want_map else None
        # Interior samples (the mean excludes a RADIUS-wide border, as scikit-image crops).
        first = -(-RADIUS // step)
        col0, col1 = first, -(-(w - RADIUS) // step)
        total, count = 0.0, 0
        tiles = []
        sq_err = 0.0
        for number, (s, e) in enumerate(self._strips()):
            # Eq. (13) in the error e = y - x (see _ssim_formula): filter e, e^2 and (x - 128) e.
            es, ee, xe, own = _error_moments(self.plane, y, s, e)
            sq_err += own  # the strip's own rows
            ue = _filter(es)[::step, ::step]
            ee = _filter(ee)[::step, ::step]
            sxe = _filter(xe)[::step, ::step]
            lo, hi = s // step, -(-e // step)
            if self.keep_stats:
                ux, var_x = self.mean[lo:hi], self.var[lo:hi]
            else:
                ux, var_x = self._strip_stats(s, e)
            strip = _ssim_formula(ux, var_x, ue, ee, sxe)  # eq. (13) at the sampled pixels of rows s..e
            if ssim_map is not None:
                ssim_map[s:e] = strip
            if at is not None:
                gathered.append(strip.reshape(-1)[at[bounds[number] : bounds[number + 1]] - s * w])
            r0, r1 = max(lo, first), min(hi, -(-(h - RADIUS) // step))
            if r1 > r0:
                inner = strip[r0 - lo : r1 - lo, col0:col1]
                total += float(inner.sum(dtype=np.float64))
                count += inner.size
            if step == 1 and want_local:
                tiles.append(_tile_means(strip))
        tile_means = np.concatenate(tiles, axis=0) if tiles else None
        return SsimResult(
            ssim=total / count,
            local=float(np.percentile(tile_means, LOCAL_PERCENTILE)) if tile_means is not None else math.nan,
            psnr=psnr_from_mse(sq_err / (h * w)),
            ssim_map=ssim_map,
            tile_means=tile_means,
            values_at=np.concatenate(gathered) if at is not None else None,
        )


@kernel
def _error_moments(x, y, start, stop):
    """e = y - x, e^2 and (x - 128) e over rows start-r .. stop+r of two planes, mirrored past their
    top and bottom as :func:`_rows_with_halo` mirrors them; float32, plus the sum of e^2 over the
    strip's own rows (float64), in one pass."""
    h, w = x.shape
    lo, hi = start - RADIUS, stop + RADIUS
    es = np.empty((hi - lo, w), np.float32)
    ee = np.empty((hi - lo, w), np.float32)
    xe = np.empty((hi - lo, w), np.float32)
    shift = np.float32(128.0)
    own = 0.0
    for i in range(hi - lo):
        src = lo + i
        src = -1 - src if src < 0 else (2 * h - 1 - src if src >= h else src)  # "reflect"
        xr, yr, e1, e2, e3 = x[src], y[src], es[i], ee[i], xe[i]
        for j in range(w):  # along a contiguous row: the form the compiler vectorizes
            xv = np.float32(xr[j])
            d = np.float32(yr[j]) - xv
            e1[j] = d
            e2[j] = d * d
            e3[j] = (xv - shift) * d
        if RADIUS <= i < RADIUS + stop - start:
            own += _row_sum(e2)
    return es, ee, xe, own


@kernel
def _row_sum(row):
    """Sum of a float32 row in float64, in eight interleaved partial sums: independent lanes the
    compiler can vectorize, where one running sum would wait on every addition."""
    lanes = np.zeros(8, np.float64)
    n = row.size - row.size % 8
    for j in range(0, n, 8):
        for t in range(8):
            lanes[t] += row[j + t]
    total = 0.0
    for j in range(n, row.size):
        total += row[j]
    return total + lanes.sum()


@kernel
def _ssim_formula(ux, var_x, ue, ee, sxe):
    """Eq. (13) per pixel from the filtered moments, in float32.

    Rewritten in the error e = y - x, which is small: with sigma_xy = sigma_x^2 + sigma_xe and
    sigma_y^2 = sigma_x^2 + 2 sigma_xe + sigma_e^2, the luminance factor is n1 / (n1 + mu_e^2) with
    n1 = 2 mu_x mu_y + C1, and the contrast-structure factor is n2 / (n2 + sigma_e^2) with
    n2 = 2 sigma_x^2 + 2 sigma_xe + C2. Filtering e, e^2 and (x - 128) e avoids the float32
    cancellation of filtering y^2 and x y directly. ``ee`` holds the filtered e^2 and ``sxe`` the
    filtered (x - 128) e; the reference's mean is ``ux`` and its variance ``var_x``.
    """
    out = np.empty(ux.shape, np.float32)
    mean_x, vx, mean_e, e2, xe, o = ux.ravel(), var_x.ravel(), ue.ravel(), ee.ravel(), sxe.ravel(), out.ravel()
    shift, two = np.float32(128.0), np.float32(2.0)
    c1, c2 = np.float32(C1), np.float32(C2)
    for k in range(o.size):
        mx, me = mean_x[k], mean_e[k]
        cov_xe = xe[k] - (mx - shift) * me  # sigma_xe
        var_e = e2[k] - me * me  # sigma_e^2
        n1 = (mx + me) * mx * two + c1
        n2 = (vx[k] + cov_xe) * two + c2
        o[k] = (n1 * n2) / ((me * me + n1) * (var_e + n2))
    return out


def _tile_means(strip: np.ndarray) -> np.ndarray:
    """Mean SSIM of LOCAL_TILE-sized tiles of a strip (partial edge tiles use their own pixels)."""
    h, w = strip.shape
    t = LOCAL_TILE
    ty, tx = -(-h // t), -(-w // t)
    full_rows, full_cols = h // t, w // t
    # Sums down each tile row, then across: whole tiles by reshaping, the partial edge ones apart.
    rows = np.empty((ty, w), dtype=np.float64)
    rows[:full_rows] = strip[: full_rows * t].reshape(full_rows, t, w).sum(axis=1, dtype=np.float64)
    if full_rows < ty:
        rows[-1] = strip[full_rows * t :].sum(axis=0, dtype=np.float64)
    sums = np.empty((ty, tx), dtype=np.float64)
    sums[:, :full_cols] = rows[:, : full_cols * t].reshape(ty, full_cols, t).sum(axis=2)
    if full_cols < tx:
        sums[:, -1] = rows[:, full_cols * t :].sum(axis=1)
    counts_down = np.minimum(t, h - np.arange(ty) * t)
    counts_across = np.minimum(t, w - np.arange(tx) * t)
    return sums / np.outer(counts_down, counts_across)


class SsimResult:
    """SSIM of one distorted plane: mean score, local floor statistic, PSNR and optionally the map."""

    __slots__ = ("ssim", "local", "psnr", "ssim_map", "tile_means", "values_at")

    def __init__(self, *, ssim, local, psnr, ssim_map, tile_means, values_at=None):
        self.values_at = values_at
        self.ssim = ssim
        self.local = local
        self.psnr = psnr
        self.ssim_map = ssim_map
        self.tile_means = tile_means


def psnr_from_mse(mse: float) -> float:
    """PSNR in dB for 8-bit data (peak 255); infinite when the planes are identical."""
    return math.inf if mse <= 0 else 10.0 * math.log10(L * L / mse)


def ssim(reference: np.ndarray, distorted: np.ndarray, *, want_map: bool = False) -> SsimResult:
    """SSIM of two planes on the 0..255 scale (see the module docstring for the conventions)."""
    return ReferenceStats(reference).compare(distorted, want_map=want_map)


def worst_regions(ssim_map: np.ndarray, *, count: int = 3, size: int = 96) -> list[tuple[int, int, int, int, float]]:
    """The ``count`` non-overlapping size x size windows with the lowest mean SSIM.

    Parameters
    ----------
    ssim_map : ndarray, shape (H, W)
    count : int
    size : int
        Window side in pixels (clipped to the image).

    Returns
    -------
    list of (top, left, height, width, mean_ssim), worst first.
    """
    if count < 1 or size < 1:
        raise ValueError(f"count and size must be positive, got count={count!r}, size={size!r}")
    m = np.asarray(ssim_map, dtype=np.float64)
    h, w = m.shape
    sh, sw = min(size, h), min(size, w)
    integral = np.zeros((h + 1, w + 1))
    integral[1:, 1:] = m.cumsum(0).cumsum(1)
    # Candidate windows on a grid of a quarter window, scored by their mean.
    step_y, step_x = max(1, sh // 4), max(1, sw // 4)
    tops = np.unique(np.r_[np.arange(0, h - sh + 1, step_y), h - sh])
    lefts = np.unique(np.r_[np.arange(0, w - sw + 1, step_x), w - sw])
    t, l = np.meshgrid(tops, lefts, indexing="ij")
    sums = integral[t + sh, l + sw] - integral[t, l + sw] - integral[t + sh, l] + integral[t, l]
    means = (sums / (sh * sw)).ravel()
    t, l = t.ravel(), l.ravel()
    chosen: list[tuple[int, int, int, int, float]] = []
    for idx in np.argsort(means, kind="stable"):
        top, left = int(t[idx]), int(l[idx])
        if all(abs(top - ct) >= sh or abs(left - cl) >= sw for ct, cl, *_ in chosen):
            chosen.append((top, left, sh, sw, float(means[idx])))
            if len(chosen) == count:
                break
    return chosen
