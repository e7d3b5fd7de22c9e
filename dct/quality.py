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
:class:`ReferenceStats` computes them once (OpenCV's ``cv2.sepFilter2D`` on float32 with
``BORDER_REFLECT``, which mirrors the edge sample as scipy's "reflect" does). Each setting then needs
only the three filtered images that involve the distorted image; a compiled loop (``dct.jit``)
makes them row by row from the error, filters them and applies eq. (13) in one pass
(:func:`_ssim_rows`): over the whole plane where its statistics are kept, over row strips where
they are recomputed, so temporary memory stays bounded for any image size. Second
moments are taken on level-shifted samples (minus 128) to keep float32 cancellation small. OpenCV's
own thread pool is left to the caller (``dct.threads``): a sweep runs one image per core.
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
STRIP = 256  # rows per strip (a multiple of LOCAL_TILE)
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
    """

    def __init__(self, reference: np.ndarray, *, keep_stats: bool | None = None):
        ref = np.asarray(reference)
        if ref.ndim != 2:
            raise ValueError(f"reference must be a 2-D plane, got shape {ref.shape!r}")
        if min(ref.shape) < 2 * RADIUS + 1:
            raise ValueError(
                f"SSIM needs a plane of at least {2 * RADIUS + 1}x{2 * RADIUS + 1} pixels for its 11x11 "
                f"window, got {ref.shape[1]}x{ref.shape[0]}"
            )
        self.shape = ref.shape
        # The plane itself is kept as given when contiguous (no copy; uint8 stays uint8).
        self.plane = np.ascontiguousarray(ref if ref.dtype in (np.float32, np.uint8) else ref.astype(np.float32))
        # Large planes recompute their mean and variance strip by strip in every comparison (two
        # more filters) instead of keeping 8 bytes per pixel: the same numbers, bounded memory.
        self.keep_stats = ref.size <= KEEP_STATS_PIXELS if keep_stats is None else bool(keep_stats)
        self.mean = self.var = None
        if self.keep_stats:
            self.mean = np.empty(ref.shape, dtype=np.float32)  # mu_x
            self.var = np.empty(ref.shape, dtype=np.float32)  # sigma_x^2
            for s in range(0, ref.shape[0], STRIP):  # strip by strip: bounded temporaries
                e = min(s + STRIP, ref.shape[0])
                self.mean[s:e], self.var[s:e] = self._strip_stats(s, e)

    def _strip_stats(self, s: int, e: int) -> tuple[np.ndarray, np.ndarray]:
        """mu_x and sigma_x^2 of rows s..e."""
        xs = _rows_with_halo(self.plane, s, e).astype(np.float32) - 128.0
        ux = _filter(xs)
        xx = _filter(xs * xs)
        return ux + 128.0, xx - ux * ux

    def _strips(self):
        """Row ranges compared in one call: the whole plane when its statistics are kept (the
        window's halo is then filtered once), strips of STRIP rows when they are recomputed."""
        h = self.shape[0]
        step = h if self.keep_stats else STRIP
        for s in range(0, h, step):
            yield s, min(s + step, h)

    def compare(self, distorted: np.ndarray, *, want_map: bool = False, want_local: bool = True,
                at: np.ndarray | None = None) -> "SsimResult":
        """SSIM of a distorted plane against this reference.

        Parameters
        ----------
        distorted : ndarray, shape (H, W), on the 0..255 scale
        want_map : bool
            Also return the full SSIM map (H, W), float32.
        want_local : bool
            Compute the local statistic (False leaves it NaN and skips the tile means).
        at : ndarray of int, sorted, optional
            Flat pixel indices whose map values to return (``values_at``, float32): what a caller
            reads of the map without keeping the whole map.

        Returns
        -------
        SsimResult
            The mean of the map over the interior, the local statistic (the LOCAL_PERCENTILE of
            16x16 tile means of the map, whose tile means are kept in ``tile_means``), PSNR, and
            the map when asked for.
        """
        y = np.asarray(distorted)
        if y.dtype not in (np.uint8, np.float32):
            y = y.astype(np.float32)
        y = np.ascontiguousarray(y)
        if y.shape != self.shape:
            raise ValueError(f"distorted plane has shape {y.shape!r}, the reference {self.shape!r}")
        h, w = self.shape
        if at is not None:
            at = np.asarray(at, dtype=np.int64)
            bounds = np.searchsorted(at, [s * w for s, _ in self._strips()] + [y.size])
        ssim_map = np.empty(self.shape, dtype=np.float32) if want_map else None
        taps = gaussian_weights().astype(np.float32)  # 2 * RADIUS + 1 = 11, as _ssim_rows unrolls them
        total = sq_err = 0.0
        tiles, gathered = [], []
        row_buffer = np.empty((1, w), dtype=np.float32)
        t = LOCAL_TILE
        for number, (s, e) in enumerate(self._strips()):
            ux, var_x = (self.mean[s:e], self.var[s:e]) if self.keep_stats else self._strip_stats(s, e)
            # Without a map, each row of it is made in a scratch row; the kernel takes what is asked of
            # it there (the values at ``at``, the tile sums) before the next row is made.
            strip = ssim_map[s:e] if ssim_map is not None else row_buffer
            picks = at[bounds[number] : bounds[number + 1]] - s * w if at is not None else _NO_PICKS
            values = np.empty(picks.size, dtype=np.float32)
            sums = np.zeros((-(-(e - s) // t), -(-w // t)) if want_local else (0, 0), dtype=np.float64)
            squared, interior = _ssim_rows(self.plane, y, s, e, ux, var_x, taps, strip, picks, values, sums)
            sq_err += squared
            total += interior
            gathered.append(values)
            if want_local:  # tile sums to means; the partial tiles at the edges over their own pixels
                down = np.minimum(t, (e - s) - np.arange(sums.shape[0]) * t)
                across = np.minimum(t, w - np.arange(sums.shape[1]) * t)
                tiles.append(sums / np.outer(down, across))
        count = (h - 2 * RADIUS) * (w - 2 * RADIUS)  # the mean's interior, cropped as scikit-image crops
        tile_means = np.concatenate(tiles, axis=0) if tiles else None
        return SsimResult(
            ssim=total / count,
            local=float(np.percentile(tile_means, LOCAL_PERCENTILE)) if tile_means is not None else math.nan,
            psnr=psnr_from_mse(sq_err / (h * w)),
            ssim_map=ssim_map,
            tile_means=tile_means,
            values_at=np.concatenate(gathered) if at is not None else None,
        )


_NO_PICKS = np.zeros(0, dtype=np.int64)


@kernel
def _ssim_rows(x, y, start, stop, ux, var_x, taps, out, picks, values, tile_sums):
    """Eq. (13) for rows start..stop of the map, into ``out``; returns the sum of e^2 over those rows
    and the sum of the map over their interior (a RADIUS-wide border left out), both float64. An
    ``out`` of one row is a scratch row: every row of the map is written there and dropped once the
    rest is taken from it, so no full-size map is written unless it is wanted. From each row:

    * ``values`` receives the map at ``picks`` (sorted flat indices into rows start..stop);
    * ``tile_sums`` (LOCAL_TILE-row bands by LOCAL_TILE-column tiles, float64; shape (0, 0) for
      none) receives each tile's sum: each band's rows are summed down every column in order, then
      each tile's columns added in order.

    One pass per row, in float32: the moments of the error e = y - x (e, e^2 and (x - 128) e) are
    made for each input row once, kept in a ring of the 2r + 2 rows that two neighbouring output
    rows' windows span, filtered down the columns for both rows at once and then along each row (the
    separable Gaussian ``taps``, mirrored past every edge as scipy's "reflect" and OpenCV's
    ``BORDER_REFLECT`` mirror), and eq. (13) is applied at once.
    Nothing full-size is made, and each loop runs along a contiguous row, which the compiler
    vectorizes.

    In e, with sigma_xy = sigma_x^2 + sigma_xe and sigma_y^2 = sigma_x^2 + 2 sigma_xe + sigma_e^2,
    the luminance factor is n1 / (n1 + mu_e^2) with n1 = 2 mu_x mu_y + C1 and the contrast-structure
    factor is n2 / (n2 + sigma_e^2) with n2 = 2 sigma_x^2 + 2 sigma_xe + C2. Filtering e, e^2 and
    (x - 128) e avoids the float32 cancellation of filtering y^2 and x y directly; ``ux`` and
    ``var_x`` are the reference's mean and variance for the same rows.
    """
    h, w = x.shape
    r = RADIUS  # 5: the passes below write the 11 taps out
    span = 2 * r + 2  # the window's rows and one more: output rows are filtered down two at a time
    ring = np.empty((span, 3, w), np.float32)  # moments of input rows, by row modulo span
    column = np.empty((2, 3, w + 2 * r), np.float32)  # two rows filtered down the columns, mirrored at both ends
    shift = np.float32(128.0)
    t0, t1, t2, t3, t4, t5 = taps[0], taps[1], taps[2], taps[3], taps[4], taps[5]
    squared = interior = 0.0
    count = stop - start
    picked = 0  # how many of ``picks`` are taken
    down = np.zeros(w if tile_sums.shape[0] else 0, np.float64)  # the band's column sums, for tiles
    arrived = start - r  # the next input row to bring into the ring (mirrored past the edges)
    n = 0
    while n < count:  # output rows start + n and, but for a last odd one, start + n + 1
        pair = n + 1 < count
        while arrived <= start + n + r + (1 if pair else 0):
            src = -1 - arrived if arrived < 0 else (2 * h - 1 - arrived if arrived >= h else arrived)
            slot = (arrived + span) % span
            err, err2, cross = ring[slot, 0], ring[slot, 1], ring[slot, 2]
            xr, yr = x[src], y[src]
            for j in range(w):
                xv = np.float32(xr[j])
                d = np.float32(yr[j]) - xv
                err[j] = d
                err2[j] = d * d
                cross[j] = (xv - shift) * d
            if start <= arrived < stop:
                squared += _row_sum(err2)
            arrived += 1
        i = start + n  # every row of its window (and of the next row's, for a pair) is in the ring
        for c in range(3):
            # The window's 11 taps written out (radius 5, fixed by the paper's settings), so that
            # each pass is one loop over the row, indexed only by its own counter: the form that
            # vectorizes. Two output rows share ten of their input rows, loaded once for both.
            u0, u1, u2, u3, u4 = (ring[(i - 5 + span) % span, c], ring[(i - 4 + span) % span, c],
                                  ring[(i - 3 + span) % span, c], ring[(i - 2 + span) % span, c],
                                  ring[(i - 1 + span) % span, c])
            mid = ring[(i + span) % span, c]
            d4, d3, d2, d1, d0 = (ring[(i + 1) % span, c], ring[(i + 2) % span, c], ring[(i + 3) % span, c],
                                  ring[(i + 4) % span, c], ring[(i + 5) % span, c])
            below = ring[(i + 6) % span, c]
            first, second = column[0, c, 5 : 5 + w], column[1, c, 5 : 5 + w]
            if pair:
                for j in range(w):  # down the columns, rows i and i + 1
                    first[j] = (t5 * mid[j] + t0 * (u0[j] + d0[j]) + t1 * (u1[j] + d1[j]) + t2 * (u2[j] + d2[j])
                                + t3 * (u3[j] + d3[j]) + t4 * (u4[j] + d4[j]))
                    second[j] = (t5 * d4[j] + t0 * (u1[j] + below[j]) + t1 * (u2[j] + d0[j]) + t2 * (u3[j] + d1[j])
                                 + t3 * (u4[j] + d2[j]) + t4 * (mid[j] + d3[j]))
            else:
                for j in range(w):
                    first[j] = (t5 * mid[j] + t0 * (u0[j] + d0[j]) + t1 * (u1[j] + d1[j]) + t2 * (u2[j] + d2[j])
                                + t3 * (u3[j] + d3[j]) + t4 * (u4[j] + d4[j]))
        for k in range(2 if pair else 1):
            m = n + k
            for c in range(3):
                col = column[k, c]
                for e in range(5):  # mirror the ends for the pass along the row
                    col[4 - e] = col[5 + e]
                    col[5 + w + e] = col[4 + w - e]
            o = out[m if out.shape[0] > 1 else 0]
            _along_row(column[k, 0], column[k, 1], column[k, 2], ux[m], var_x[m], taps, o)
            if r <= start + m < h - r:
                interior += _row_sum(o[r : w - r])
            while picked < picks.size and picks[picked] < (m + 1) * w:
                values[picked] = o[picks[picked] - m * w]
                picked += 1
            if tile_sums.shape[0]:
                for j in range(w):
                    down[j] += o[j]
                if (m + 1) % LOCAL_TILE == 0 or m + 1 == count:  # a band of tiles is complete
                    band = tile_sums[m // LOCAL_TILE]
                    for tx in range(band.size):
                        tile = 0.0
                        for j in range(tx * LOCAL_TILE, min(tx * LOCAL_TILE + LOCAL_TILE, w)):
                            tile += down[j]
                        band[tx] = tile
                    down[:] = 0.0
        n += 2 if pair else 1
    return squared, interior


@kernel(inline=True)
def _along_row(a0, a1, a2, mean_x, vx, taps, o):
    """Along one row: the three moments filtered at once, and eq. (13) on them straight away."""
    shift, two = np.float32(128.0), np.float32(2.0)
    c1, c2 = np.float32(C1), np.float32(C2)
    t0, t1, t2, t3, t4, t5 = taps[0], taps[1], taps[2], taps[3], taps[4], taps[5]
    for j in range(o.size):
        mean_e = (t5 * a0[j + 5] + t0 * (a0[j] + a0[j + 10]) + t1 * (a0[j + 1] + a0[j + 9])
                  + t2 * (a0[j + 2] + a0[j + 8]) + t3 * (a0[j + 3] + a0[j + 7]) + t4 * (a0[j + 4] + a0[j + 6]))
        e2 = (t5 * a1[j + 5] + t0 * (a1[j] + a1[j + 10]) + t1 * (a1[j + 1] + a1[j + 9])
              + t2 * (a1[j + 2] + a1[j + 8]) + t3 * (a1[j + 3] + a1[j + 7]) + t4 * (a1[j + 4] + a1[j + 6]))
        xe = (t5 * a2[j + 5] + t0 * (a2[j] + a2[j + 10]) + t1 * (a2[j + 1] + a2[j + 9])
              + t2 * (a2[j + 2] + a2[j + 8]) + t3 * (a2[j + 3] + a2[j + 7]) + t4 * (a2[j + 4] + a2[j + 6]))
        mx = mean_x[j]
        cov_xe = xe - (mx - shift) * mean_e  # sigma_xe
        var_e = e2 - mean_e * mean_e  # sigma_e^2
        n1 = (mx + mean_e) * mx * two + c1
        n2 = (vx[j] + cov_xe) * two + c2
        o[j] = (n1 * n2) / ((mean_e * mean_e + n1) * (var_e + n2))


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
