"""Visible damage next to sharp edges and in smooth areas: what a mean SSIM and a tile floor miss.

Why: a page of text is mostly empty background, so its mean SSIM stays high while every glyph
rings; a 16x16-tile floor averages a thin stroke with the flat paper around it. At the same time
fine grain in a photo is smoothed by JPEG and SSIM punishes that heavily, although nobody sees it.
This module therefore looks only where coding damage is visible: at *strong edges* of the
reference (text, line art, UI borders) and in *smooth areas* (gradients, skies), where block
boundaries show. Texture (grain, foliage, fur) is neither, and moves neither statistic.

Two statistics per setting, both from arrays the sweep already has:

``edge_ssim``
    A low percentile (:data:`EDGE_PERCENTILE`) of the SSIM map of Wang et al. (2004) [1]_,
    restricted to the neighbourhood of strong edges. Blur, halos and ringing lower it; flat paper
    and texture are left out, so neither an empty page nor smoothed grain can hide or cause it.
``blocking``
    In smooth areas of the reference away from edges, the mean absolute step of the coding error
    ``e = y - x`` across 8x8 block boundaries minus its mean step inside blocks, in 8-bit levels:
    how much more the error jumps where blocks meet than where it does not (0 for no blocking).

Reference side (once per image, :class:`EdgeReference`): the reference luma is smoothed with a
Gaussian of sigma :data:`EDGE_SMOOTH_SIGMA` (so grain does not count as edges), its 3x3
morphological gradient (max - min, in levels) is thresholded at :data:`EDGE_STRENGTH`, and the
edge mask is dilated by :data:`EDGE_RADIUS` for the edge neighbourhood. Smooth pixels have a raw
5x5 range of at most :data:`FLAT_RANGE` levels and lie more than :data:`HALO_RADIUS` pixels from an
edge. The thresholds and the defaults of the budget check (:data:`DEFAULT_EDGE_FLOOR`,
:data:`DEFAULT_BLOCKING_LIMIT`) were calibrated on the labelled crops in ``tests/damage_set``
(README, "The visible-damage check").

Notes
-----
Also weighed, and left out because they did not separate the labelled set: the RMS coding error in
flat pixels next to edges ("ringing energy": JPEG leaves 6-8 levels of invisible ripple there even
at quality 80, more than in some visibly damaged crops), and a multi-scale SSIM term [2]_, which
like the single-scale mean averages over the whole image and so still cannot see a ringing
heading on a mostly empty page.

References
----------
.. [1] Z. Wang, A. C. Bovik, H. R. Sheikh and E. P. Simoncelli, "Image quality assessment: from
   error visibility to structural similarity", IEEE Trans. Image Processing 13(4), 600-612, 2004,
   doi:10.1109/TIP.2003.819861.
.. [2] Z. Wang, E. P. Simoncelli and A. C. Bovik, "Multiscale structural similarity for image
   quality assessment", Proc. 37th Asilomar Conf. Signals, Systems and Computers, 2003,
   doi:10.1109/ACSSC.2003.1292216.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np

from .jit import kernel

EDGE_SMOOTH_SIGMA = 1.0  # px; grain of sigma 10 levels keeps a 3x3 range of ~3 after it
EDGE_STRENGTH = 64.0  # levels of 3x3 range after smoothing: a step of about 75 levels or more
EDGE_RADIUS = 1  # px: the edge neighbourhood is the edge mask dilated by this much
HALO_RADIUS = 4  # px: smooth areas start this far from an edge (ringing there is edge_ssim's job)
FLAT_RANGE = 8.0  # levels: a raw 5x5 range at most this is "smooth" (block steps show on it)
BLOCK = 8  # the DCT block side (ITU-T T.81)
EDGE_PERCENTILE = 2.0
_BAND_ROWS = 256  # rows per band of the masks and of the pair counts
MIN_PIXELS = 48  # fewer edge pixels (or smooth boundary pairs) than this: the statistic is neutral
# Budget defaults, calibrated on tests/damage_set (README, "The visible-damage check").
DEFAULT_EDGE_FLOOR = 0.92
DEFAULT_BLOCKING_LIMIT = 0.67  # recalibrated on the bit-exact engine (was 0.65 on the estimating one)


def _disk(radius: int) -> np.ndarray:
    return cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * radius + 1, 2 * radius + 1))


def _plane(a, name: str) -> np.ndarray:
    arr = np.asarray(a)
    if arr.ndim != 2:
        raise ValueError(f"{name} must be a 2-D luma plane, got shape {arr.shape!r}")
    if arr.size == 0:
        raise ValueError(f"{name} is empty")
    return arr.astype(np.float32, copy=False)


@dataclass(frozen=True)
class DamageResult:
    """The two statistics for one distorted plane (see the module docstring)."""

    edge_ssim: float  # 1.0 when the image has no strong edges
    blocking: float  # levels; 0.0 when the image has no smooth area


@dataclass(frozen=True)
class DamageSpot:
    """Where a check is worst: a window of the image and the statistic's mean there."""

    check: str  # "edge" or "blocking"
    top: int
    left: int
    height: int
    width: int
    value: float


@kernel
def _smooth_steps(distorted, reference, smooth):
    """Sums of |step| of the coding error e = distorted - reference between neighbours that are both
    smooth: (pairs across a block boundary, pairs inside a block). For 8-bit planes, where every step
    is a whole number: each row's sums are exact in int32 (at most 510 per pair) and so do not
    depend on the order of the additions, which lets every loop run in vector lanes.

    Per row, all horizontal pairs are summed, then those straddling a boundary (columns 8k+7 and
    8k+8) apart; the vertical pairs to the next row all count as across when the row ends a block
    row."""
    h, w = smooth.shape
    i32 = np.int32
    across = inside = 0
    err, err_below = np.empty(w, np.int32), np.empty(w, np.int32)
    mask, mask_below = np.empty(w, np.int32), np.empty(w, np.int32)
    for j in range(w):
        err[j] = i32(i32(distorted[0, j]) - i32(reference[0, j]))
        mask[j] = i32(smooth[0, j])
    for i in range(h):
        # Each step is kept where both pixels are smooth by and-ing with -1 (and dropped with 0);
        # the row sums wrap to 32 bits like every step, so the loops stay in 32-bit lanes.
        along = i32(0)
        for j in range(w - 1):
            along = i32(along + (i32(abs(i32(err[j + 1] - err[j]))) & -i32(mask[j] & mask[j + 1])))
        along_across = i32(0)
        for j in range(BLOCK - 1, w - 1, BLOCK):
            along_across = i32(along_across + (i32(abs(i32(err[j + 1] - err[j]))) & -i32(mask[j] & mask[j + 1])))
        down = i32(0)
        if i + 1 < h:
            d, r, m = distorted[i + 1], reference[i + 1], smooth[i + 1]
            for j in range(w):
                err_below[j] = i32(i32(d[j]) - i32(r[j]))
                mask_below[j] = i32(m[j])
            for j in range(w):
                down = i32(down + (i32(abs(i32(err_below[j] - err[j]))) & -i32(mask[j] & mask_below[j])))
        across += along_across
        inside += along - along_across
        if i % BLOCK == BLOCK - 1:
            across += down
        else:
            inside += down
        err, err_below = err_below, err
        mask, mask_below = mask_below, mask
    return float(across), float(inside)


def _boundary_masks(shape: tuple[int, int]) -> tuple[np.ndarray, np.ndarray]:
    """Which horizontal (H, W-1) and vertical (H-1, W) neighbour pairs straddle a block boundary."""
    h, w = shape
    across_cols = np.broadcast_to((np.arange(w - 1) % BLOCK) == BLOCK - 1, (h, w - 1))
    across_rows = np.broadcast_to(((np.arange(h - 1) % BLOCK) == BLOCK - 1)[:, None], (h - 1, w))
    return across_cols, across_rows


def _masks(ref: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The strong-edge neighbourhood and the smooth area of a reference luma plane (float32)."""
    smooth = cv2.GaussianBlur(ref, (0, 0), EDGE_SMOOTH_SIGMA, borderType=cv2.BORDER_REFLECT)
    square3 = np.ones((3, 3), np.uint8)
    strength = cv2.dilate(smooth, square3) - cv2.erode(smooth, square3)
    core = (strength >= EDGE_STRENGTH).astype(np.uint8)
    edges = cv2.dilate(core, _disk(EDGE_RADIUS)).astype(bool)
    near = cv2.dilate(core, _disk(HALO_RADIUS)).astype(bool)
    square5 = np.ones((5, 5), np.uint8)
    flat = (cv2.dilate(ref, square5) - cv2.erode(ref, square5)) <= FLAT_RANGE
    return edges, flat & ~near


# Rows on each side of a band that the masks read: the blur's 4 sigma, the 3x3 range, the halo disk.
_MASK_HALO = 4 * int(math.ceil(EDGE_SMOOTH_SIGMA)) + 1 + max(EDGE_RADIUS, HALO_RADIUS) + 2


def _across_cols(w: int) -> np.ndarray:
    """Which column pairs (c, c+1) straddle a block boundary."""
    return (np.arange(w - 1) % BLOCK) == BLOCK - 1


def _across_rows(r0: int, r1: int, h: int) -> np.ndarray:
    """Which row pairs (r, r+1), r in r0..min(r1, h-1), straddle a block boundary."""
    return (np.arange(r0, min(r1, h - 1)) % BLOCK) == BLOCK - 1


class EdgeReference:
    """Edge and smooth-area masks of a reference luma plane, reused for every setting.

    Parameters
    ----------
    reference : ndarray, shape (H, W)
        Luma on the 0..255 scale (uint8 or float).

    Attributes
    ----------
    edges : ndarray, shape (H, W), bool
        The strong-edge neighbourhood.
    smooth : ndarray, shape (H, W), bool
        Smooth reference pixels more than ``HALO_RADIUS`` from a strong edge.
    """

    def __init__(self, reference: np.ndarray):
        ref = _plane(reference, "reference")
        self.shape = h, w = ref.shape
        raw = np.asarray(reference)
        # Kept as given when 8-bit (a quarter of float32's memory); the blocking sums read it as it is.
        self.plane = raw if raw.dtype == np.uint8 else ref
        self.edges = np.empty(self.shape, dtype=bool)
        self.smooth = np.empty(self.shape, dtype=bool)
        # Band by band of rows with a halo wider than the filters reach, so the float32 temporaries
        # stay bounded on large images; the masks are those of one pass over the whole plane.
        for r0 in range(0, h, _BAND_ROWS):
            r1 = min(r0 + _BAND_ROWS, h)
            lo, hi = max(r0 - _MASK_HALO, 0), min(r1 + _MASK_HALO, h)
            edges, smooth = _masks(np.asarray(self.plane[lo:hi], dtype=np.float32))
            self.edges[r0:r1], self.smooth[r0:r1] = edges[r0 - lo : r1 - lo], smooth[r0 - lo : r1 - lo]
        self._edge_idx = np.flatnonzero(self.edges).astype(np.int32)  # int32: half the memory
        # How many neighbour pairs with both pixels smooth straddle a block boundary, and how many
        # lie inside a block (the pairs themselves are taken from the mask band by band).
        across = inside = 0
        for r0, r1, pair_cols, pair_rows in self._smooth_pairs():
            b = int(pair_cols[:, _across_cols(w)].sum()) + int(pair_rows[_across_rows(r0, r1, h)].sum())
            across += b
            inside += int(pair_cols.sum()) + int(pair_rows.sum()) - b
        self._pair_counts = (across, inside)
        self._boundary_count = across

    def _smooth_pairs(self):
        """(r0, r1, column pairs (r1-r0, W-1), row pairs (rows r0.. of the (H-1, W) pairs)), bool,
        where both pixels are smooth; band by band of rows."""
        h = self.shape[0]
        for r0 in range(0, h, _BAND_ROWS):
            r1 = min(r0 + _BAND_ROWS, h)
            s = self.smooth[r0 : min(r1 + 1, h)]
            yield r0, r1, s[: r1 - r0, 1:] & s[: r1 - r0, :-1], s[1:] & s[:-1]

    def _steps(self, distorted: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """|step| of the coding error between horizontal and vertical neighbours, float32."""
        d = _plane(distorted, "distorted")
        if d.shape != self.shape:
            raise ValueError(f"distorted plane has shape {d.shape!r}, the reference {self.shape!r}")
        err = d - self.plane
        return np.abs(np.diff(err, axis=1)), np.abs(np.diff(err, axis=0))

    @property
    def edge_index(self) -> np.ndarray:
        """Flat indices of the strong-edge neighbourhood, sorted: where :meth:`measure` reads the
        SSIM map (``dct.quality.ReferenceStats.compare(at=...)`` gathers just these)."""
        return self._edge_idx

    def measure(self, distorted: np.ndarray, ssim_map: np.ndarray) -> DamageResult:
        """Edge SSIM and blocking of a distorted plane.

        Parameters
        ----------
        distorted : ndarray, shape (H, W)
            The decoded luma, 0..255.
        ssim_map : ndarray, shape (H, W), or shape (E,)
            The SSIM map of ``distorted`` against the reference (``dct.quality``, ``want_map=True``),
            or only its values at :attr:`edge_index`.

        Returns
        -------
        DamageResult
        """
        m = np.asarray(ssim_map)
        gathered = m.ndim == 1
        if m.shape != (self._edge_idx.shape if gathered else self.shape):
            raise ValueError(f"ssim_map has shape {m.shape!r}, the reference {self.shape!r}")
        edge_ssim = 1.0
        if self._edge_idx.size >= MIN_PIXELS:
            values = (m if gathered else m.reshape(-1)[self._edge_idx]).astype(np.float64)
            edge_ssim = min(1.0, float(np.percentile(values, EDGE_PERCENTILE)))
        blocking = 0.0
        if self._boundary_count >= MIN_PIXELS:
            blocking = self._blocking(distorted)
        return DamageResult(edge_ssim=edge_ssim, blocking=blocking)

    def _blocking(self, distorted: np.ndarray) -> float:
        """Mean error step across block boundaries minus inside blocks, over smooth pixel pairs."""
        d = np.asarray(distorted)
        if d.shape != self.shape:
            raise ValueError(f"distorted plane has shape {d.shape!r}, the reference {self.shape!r}")
        if d.dtype == np.uint8 and self.plane.dtype == np.uint8:
            b_sum, i_sum = _smooth_steps(d, self.plane, self.smooth)
        else:
            b_sum, i_sum = self._smooth_step_sums(d)
        b_n, i_n = self._pair_counts
        return b_sum / b_n - (i_sum / i_n if i_n else 0.0)

    def _smooth_step_sums(self, distorted: np.ndarray) -> tuple[float, float]:
        """:func:`_smooth_steps` for planes that are not both 8-bit (steps of any real size), in
        float32 band by band."""
        h, w = self.shape
        across_cols = _across_cols(w)
        across = total = 0.0
        for r0, r1, pair_cols, pair_rows in self._smooth_pairs():
            rows = slice(r0, min(r1 + 1, h))
            err = np.asarray(distorted[rows], np.float32) - np.asarray(self.plane[rows], np.float32)
            steps_cols = np.abs(np.diff(err[: r1 - r0], axis=1)) * pair_cols
            steps_rows = np.abs(np.diff(err, axis=0)) * pair_rows
            across += float(steps_cols[:, across_cols].sum(dtype=np.float64))
            across += float(steps_rows[_across_rows(r0, r1, h)].sum(dtype=np.float64))
            total += float(steps_cols.sum(dtype=np.float64)) + float(steps_rows.sum(dtype=np.float64))
        return across, total - across

    def _boundary_pairs(self) -> tuple[np.ndarray, np.ndarray]:
        """Flat indices of the smooth pairs across block boundaries: columns (H, W-1), rows (H-1, W)."""
        h, w = self.shape
        across_cols, across_rows = _boundary_masks(self.shape)
        pair_cols = self.smooth[:, 1:] & self.smooth[:, :-1]
        pair_rows = self.smooth[1:, :] & self.smooth[:-1, :]
        return np.flatnonzero(pair_cols & across_cols), np.flatnonzero(pair_rows & across_rows)

    def worst_spot(self, distorted: np.ndarray, ssim_map: np.ndarray, check: str, *, size: int = 64) -> DamageSpot | None:
        """The size x size window where ``check`` ("edge" or "blocking") is worst, or None.

        "edge": the window whose edge pixels have the lowest mean SSIM; "blocking": the window
        whose smooth block-boundary pixels have the largest mean error step. Windows with fewer
        than 8 such pixels are skipped.
        """
        if check not in ("edge", "blocking"):
            raise ValueError(f"check must be 'edge' or 'blocking', got {check!r}")
        if isinstance(size, bool) or not isinstance(size, int) or size < 1:
            raise ValueError(f"size must be a positive integer, got {size!r}")
        h, w = self.shape
        sh, sw = min(size, h), min(size, w)
        if check == "edge":
            mask, values = self.edges, np.asarray(ssim_map, dtype=np.float64)
        else:
            steps_cols, steps_rows = self._steps(distorted)
            values = np.zeros(self.shape)
            mask = np.zeros(self.shape, dtype=bool)
            b_cols, b_rows = self._boundary_pairs()
            vc = np.zeros((h, w - 1)); vc.reshape(-1)[b_cols] = steps_cols.reshape(-1)[b_cols]
            vr = np.zeros((h - 1, w)); vr.reshape(-1)[b_rows] = steps_rows.reshape(-1)[b_rows]
            values[:, :-1] += vc
            values[:-1, :] += vr
            mc = np.zeros((h, w - 1), bool); mc.reshape(-1)[b_cols] = True
            mr = np.zeros((h - 1, w), bool); mr.reshape(-1)[b_rows] = True
            mask[:, :-1] |= mc
            mask[:-1, :] |= mr
        counts = _window_sums(mask.astype(np.float64), sh, sw)
        sums = _window_sums(np.where(mask, values, 0.0), sh, sw)
        ok = counts >= 8
        if not ok.any():
            return None
        means = np.where(ok, sums / np.maximum(counts, 1), np.inf if check == "edge" else -np.inf)
        flat = int(np.argmin(means) if check == "edge" else np.argmax(means))
        row, col = np.unravel_index(flat, means.shape)
        step = _grid_step(sh, sw)
        return DamageSpot(check, int(row) * step, int(col) * step, sh, sw, float(means.reshape(-1)[flat]))


def _grid_step(sh: int, sw: int) -> int:
    return max(1, min(sh, sw) // 4)


def _window_sums(a: np.ndarray, sh: int, sw: int) -> np.ndarray:
    """Sums of ``a`` over sh x sw windows whose corners lie on a grid of a quarter window."""
    h, w = a.shape
    integral = np.zeros((h + 1, w + 1))
    integral[1:, 1:] = a.cumsum(0).cumsum(1)
    step = _grid_step(sh, sw)
    tops = np.arange(0, h - sh + 1, step)
    lefts = np.arange(0, w - sw + 1, step)
    t, l = np.meshgrid(tops, lefts, indexing="ij")
    return integral[t + sh, l + sw] - integral[t, l + sw] - integral[t + sh, l] + integral[t, l]


def failures(result: DamageResult, *, edge_floor: float, blocking_limit: float) -> list[str]:
    """Which checks fail: "edge" when ``edge_ssim < edge_floor``, "blocking" when ``blocking >
    blocking_limit``; a floor or limit of 0 turns that check off."""
    out = []
    if edge_floor > 0 and result.edge_ssim + 1e-12 < edge_floor:
        out.append("edge")
    if blocking_limit > 0 and result.blocking > blocking_limit + 1e-12:
        out.append("blocking")
    return out
