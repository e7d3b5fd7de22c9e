"""Predictions in the coefficient domain: a setting's SSIM and bytes without decoding, for a whole grid.

The 8x8 DCT is orthonormal, so it preserves energy (Parseval). For a block with original coefficients
``c`` and dequantized ones ``d = Q * q`` (orthonormal scale; ``q`` from libjpeg's own quantizer), with
no inverse transform and no filtering:

* the block mean is ``c[0] / 8`` (level shift added back), and the decoded one ``d[0] / 8``;
* the variance is ``sum(c[1:]**2) / 64``, the decoded variance ``sum(d[1:]**2) / 64`` and the
  covariance ``sum(c[1:] * d[1:]) / 64``;

hence each block's SSIM (eq. 13 of Wang et al. 2004 with the block as the window) and its squared
error. Their mean tracks the image's Gaussian-window SSIM closely, with an offset that depends on the
image; ``dct.search`` measures that offset with exact evaluations and uses predictions only to decide
where to look, never as a result.

Structure that makes a whole grid cheap:

* a zigzag cutoff K only replaces the table entries at positions >= K by 255, so per-position sums
  for the quality's table and for the all-255 table, accumulated along the zigzag, give every cutoff
  from one quantization per quality;
* luma does not depend on the subsampling mode, so it is predicted once per quality;
* bytes come from the same quantized values: a nonzero coefficient costs its magnitude bits plus a
  Huffman-coded (run, size) symbol, each block an end-of-block code. ``bits ~ a * nonzeros +
  magnitude_bits + b * blocks`` with ``a`` and ``b`` fitted per image to exact sizes of the sample.

The predictions run on a sample of MCU rows (every k-th 16-pixel band), so their cost does not grow
with the image beyond ``SAMPLE_BLOCKS`` luma blocks.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .quality import C1, C2
from .simulate import PreparedImage, quantize, reciprocal_divisors
from .tables import ZIGZAG, quant_tables

SAMPLE_BLOCKS = 512  # luma blocks the forecasts look at, at most (1 MP: one 16-pixel band in 16)
_FULL = np.full(64, 255, dtype=np.int32)  # the table a cutoff leaves past position K


def _band_rows(n_mcu_rows: int, limit_rows: int) -> np.ndarray:
    """MCU rows to sample: every k-th, spread over the image, at most ``limit_rows``."""
    step = max(1, -(-n_mcu_rows // max(1, limit_rows)))
    return np.arange(step // 2, n_mcu_rows, step)


@dataclass
class Sample:
    """Zigzag DCT blocks (libjpeg's x8 scale) of the sampled bands, per component, and the share
    of the image they cover."""

    luma: np.ndarray  # (n, 64) int32
    chroma: dict  # {subsampling: (cb (m, 64), cr (m, 64))}
    fraction: float  # sampled luma blocks / all luma blocks


def sample_blocks(prepared: PreparedImage, subsamplings, limit: int = SAMPLE_BLOCKS) -> Sample:
    """The sampled bands' coefficients: 16-pixel bands, so 4:2:0 chroma rows line up with luma."""
    luma = prepared.dct_coefficients("4:4:4")[0]
    nby, nbx, _ = luma.shape
    mcu_rows = -(-nby // 2)
    rows = _band_rows(mcu_rows, max(1, limit // max(1, 2 * nbx)))
    luma_rows = np.concatenate([2 * rows, 2 * rows + 1])
    luma_rows = np.sort(luma_rows[luma_rows < nby])
    chroma = {}
    if not prepared.grayscale:
        for s in subsamplings:
            _, cb, cr = prepared.dct_coefficients(s)
            picked = np.sort(rows[rows < cb.shape[0]]) if cb.shape[0] < nby else luma_rows
            chroma[s] = (cb[picked].reshape(-1, 64), cr[picked].reshape(-1, 64))
    return Sample(luma[luma_rows].reshape(-1, 64), chroma, luma_rows.size / nby)


def block_moments(original: np.ndarray, decoded: np.ndarray):
    """Per-block mean, variance of each, and covariance from orthonormal DCT coefficients of
    level-shifted 8x8 blocks, shape (n, 64) (zigzag or natural: DC first either way).

    Returns ``(mean_x, var_x, mean_y, var_y, cov)``, each (n,), on the 0..255 scale: Parseval turns
    the pixel sums into coefficient sums (the DC basis function is 1/8 everywhere).
    """
    x = np.asarray(original, dtype=np.float64)
    y = np.asarray(decoded, dtype=np.float64)
    return (x[:, 0] / 8.0 + 128.0, (x[:, 1:] ** 2).sum(1) / 64.0, y[:, 0] / 8.0 + 128.0,
            (y[:, 1:] ** 2).sum(1) / 64.0, (x[:, 1:] * y[:, 1:]).sum(1) / 64.0)


def block_ssim(original: np.ndarray, decoded: np.ndarray) -> np.ndarray:
    """Each block's SSIM (eq. 13, the block as the window) from its coefficients, shape (n,)."""
    mx, vx, my, vy, cov = block_moments(original, decoded)
    return ((2 * mx * my + C1) * (2 * cov + C2)) / ((mx**2 + my**2 + C1) * (vx + vy + C2))


@dataclass
class PlanePrediction:
    """One component's predictions for qualities x cutoffs, from its sampled blocks."""

    ssim: np.ndarray  # (nq, nk) mean block SSIM (or (nf, nk) at the ``fine`` qualities)
    nonzeros: np.ndarray  # (nq, nk) nonzero quantized coefficients in the sample (DC and AC)
    magnitude_bits: np.ndarray  # (nq, nk) sum of the bit lengths of those nonzero values
    blocks: int


def _cutoff_masks(cutoffs) -> np.ndarray:
    """(64, nk) float32: 1 where a zigzag position is inside cutoff K (position < K)."""
    pos = np.arange(64)[:, None]
    return (pos < np.asarray(list(cutoffs))[None, :]).astype(np.float32)


def _quantize_many(blocks: np.ndarray, tables: np.ndarray) -> np.ndarray:
    """libjpeg's quantization (``dct.simulate.quantize``) of the blocks by each table: (nq, n, 64)."""
    return np.stack([quantize(blocks, t) for t in tables])


def _terms(blocks: np.ndarray, tables: np.ndarray):
    """Per-position terms of every table at once: (nq, n, 64) covariance, decoded energy, nonzero,
    magnitude bits; and the decoded DC (nq, n). Orthonormal scale (libjpeg's x8 output / 8)."""
    q = _quantize_many(blocks, tables)
    c = blocks.astype(np.float32) / 8.0
    d = q.astype(np.float32) * tables[:, None, :].astype(np.float32)
    nonzero = (q != 0).astype(np.float32)
    bits = np.frexp(np.abs(q).astype(np.float32))[1].astype(np.float32)  # bit length (0 for 0)
    cov = c[None] * d
    energy = d * d
    cov[..., 0] = 0.0  # DC enters through the means, not the (co)variances
    energy[..., 0] = 0.0
    return d[..., 0], cov, energy, nonzero, bits


def _fine_ssim(blocks, mu_x, cs, fine) -> np.ndarray:
    """Block SSIM at every fine quality: the luminance term exactly (it depends only on the DC
    quantizer, which is where the dips come from: a flat dark area whose mean the DC step cannot
    reproduce), the contrast-structure term interpolated between the bracketing coarse qualities."""
    dc_steps, lower, upper, weight = fine
    parts = [reciprocal_divisors(np.full(64, int(qd), np.int32)) for qd in dc_steps]
    fq, c, r = (np.array([p[i][0] for p in parts], dtype=np.int64)[:, None] for i in range(3))
    mag = ((np.abs(blocks[None, :, 0]).astype(np.int64) + c) * fq) >> r
    dc = np.where(blocks[None, :, 0] < 0, -mag, mag) * np.asarray(dc_steps, dtype=np.float64)[:, None]
    mu_y = np.clip(dc / 8.0 + 128.0, 0.0, 255.0)
    lum = (2 * mu_x * mu_y + C1) / (mu_x**2 + mu_y**2 + C1)  # (nf, n)
    n = blocks.shape[0]
    low = np.einsum("fn,fnk->fk", lum, cs[lower]) / n
    high = np.einsum("fn,fnk->fk", lum, cs[upper]) / n
    return (1 - weight)[:, None] * low + weight[:, None] * high


def predict_plane(blocks: np.ndarray, tables_zigzag: np.ndarray, cutoffs, fine=None) -> PlanePrediction:
    """Predictions for one component.

    Parameters
    ----------
    blocks : ndarray, shape (n, 64), int32 — zigzag, libjpeg's x8 scale.
    tables_zigzag : ndarray, shape (nq, 64) — the full (cutoff 64) table of each quality, zigzag.
    cutoffs : sequence of int, 1..64.
    fine : (dc_steps, lower, upper, weight), optional
        Return the SSIM at these finer qualities instead (see :func:`_fine_ssim`): each one's DC
        table entry and its bracketing rows of ``tables_zigzag`` with the interpolation weight.
        Counts stay at the coarse qualities.
    """
    blocks = np.asarray(blocks, dtype=np.int32)
    tables = np.asarray(tables_zigzag, dtype=np.int32)
    nq, n = tables.shape[0], blocks.shape[0]
    inside = _cutoff_masks(cutoffs)  # positions < K use the quality's table, the rest 255
    outside = 1.0 - inside
    if n == 0:
        shape = (nq, inside.shape[1])
        return PlanePrediction(np.ones(shape), np.zeros(shape), np.zeros(shape), 0)
    c = blocks.astype(np.float32) / 8.0
    mu_x = c[:, 0] / 8.0 + 128.0
    var_x = (c[:, 1:] ** 2).sum(axis=1) / 64.0
    _, cov255, en255, nz255, bits255 = _terms(blocks, _FULL[None, :])
    dc, cov, energy, nonzero, bits = _terms(blocks, tables)
    # Sums over the positions inside the cutoff (this table) and past it (the all-255 table).
    cov_k = cov @ inside + (cov255 @ outside)  # (nq, n, nk)
    en_k = energy @ inside + (en255 @ outside)
    mu_y = np.clip(dc / 8.0 + 128.0, 0.0, 255.0)  # a flat block's decode clamps as its mean does
    lum = (2 * mu_x * mu_y + C1) / (mu_x**2 + mu_y**2 + C1)  # (nq, n)
    cs = (2 * cov_k / 64.0 + C2) / (var_x[None, :, None] + en_k / 64.0 + C2)
    ssim = (lum[..., None] * cs).mean(axis=1, dtype=np.float64)
    if fine is not None:
        ssim = _fine_ssim(blocks, mu_x, cs, fine)
    nz = nonzero.sum(axis=1) @ inside + (nz255.sum(axis=1) @ outside)
    mb = bits.sum(axis=1) @ inside + (bits255.sum(axis=1) @ outside)
    return PlanePrediction(ssim, nz.astype(np.float64), mb.astype(np.float64), n)


def quality_tables_zigzag(qualities) -> tuple[np.ndarray, np.ndarray]:
    """The luma and chroma tables (no cutoff) of each quality, zigzag order: two (nq, 64) arrays."""
    pairs = [quant_tables(int(q), 64) for q in qualities]
    luma = np.stack([p[0].reshape(64)[ZIGZAG] for p in pairs]).astype(np.int32)
    chroma = np.stack([p[1].reshape(64)[ZIGZAG] for p in pairs]).astype(np.int32)
    return luma, chroma


@dataclass
class Forecast:
    """One image's forecast over a grid at one width (from ``dct.predict.forecast``)."""

    qualities: tuple[int, ...]  # the qualities forecast (the grid's coarse ones); others interpolate
    cutoffs: tuple[int, ...]
    subsamplings: tuple[str, ...]
    luma: np.ndarray  # (nq, nk) forecast luma SSIM
    chroma: dict  # {subsampling: (cb (nq, nk), cr (nq, nk))}; empty for grayscale
    bits: dict  # {subsampling: (nq, nk)} forecast entropy-coded bits of the whole image
    header_bytes: int  # markers and tables, roughly
    size_qualities: tuple[int, ...] = ()  # where ``bits`` was forecast (default: ``qualities``)
    # :meth:`point`'s answers, kept: search rounds ask for the same points again
    _points: dict = field(default_factory=dict, repr=False, compare=False)

    def as_dict(self) -> dict:
        return {
            "qualities": list(self.qualities),
            "cutoffs": list(self.cutoffs),
            "subsamplings": list(self.subsamplings),
            "luma": self.luma.tolist(),
            "chroma": {s: [cb.tolist(), cr.tolist()] for s, (cb, cr) in self.chroma.items()},
            "bits": {s: b.tolist() for s, b in self.bits.items()},
            "header_bytes": self.header_bytes,
            "size_qualities": list(self.size_qualities),
        }

    @classmethod
    def from_dict(cls, d: dict) -> "Forecast":
        return cls(
            tuple(d["qualities"]), tuple(d["cutoffs"]), tuple(d["subsamplings"]), np.asarray(d["luma"]),
            {s: (np.asarray(v[0]), np.asarray(v[1])) for s, v in d["chroma"].items()},
            {s: np.asarray(b) for s, b in d["bits"].items()}, int(d["header_bytes"]),
            tuple(d.get("size_qualities", ())),
        )

    def column(self, cutoff: int, subsampling: str, qualities) -> tuple[np.ndarray, np.ndarray | None, np.ndarray | None, np.ndarray]:
        """Forecast luma, Cb, Cr SSIM and bytes along ``qualities`` for one combo (interpolated)."""
        j = self.cutoffs.index(cutoff)
        qs = np.asarray(qualities, dtype=float)
        at = np.asarray(self.qualities, dtype=float)
        luma = np.interp(qs, at, self.luma[:, j])
        cb = cr = None
        if self.chroma:
            cb = np.interp(qs, at, self.chroma[subsampling][0][:, j])
            cr = np.interp(qs, at, self.chroma[subsampling][1][:, j])
        size_at = np.asarray(self.size_qualities or self.qualities, dtype=float)
        size = self.header_bytes + np.interp(qs, size_at, self.bits[subsampling][:, j]) / 8.0
        return luma, cb, cr, size

    def point(self, setting) -> tuple[float, float | None, float | None, float]:
        """:meth:`column` at one setting, as floats: luma, Cb, Cr SSIM and bytes."""
        if setting not in self._points:
            col = self.column(setting.cutoff, setting.subsampling, [setting.quality])
            self._points[setting] = tuple(None if c is None else float(c[0]) for c in col)
        return self._points[setting]


SYMBOL_BITS = 4.5  # a (run, size) Huffman code, on average: the proxy's shape, not its scale
EOB_BITS = 3.0
HEADER_BYTES = 620  # markers, two quantization tables and four Huffman tables, roughly
ANCHORS = 2  # coarse qualities per combo whose sample is entropy-coded exactly, to scale the proxy


def _proxy_bits(p: PlanePrediction) -> np.ndarray:
    return SYMBOL_BITS * p.nonzeros + p.magnitude_bits + EOB_BITS * p.blocks


def sample_bits(sample: Sample, quality: int, cutoff: int, subsampling: str, *, luma_cache: dict | None = None) -> float:
    """Entropy-coded bits of the sample's blocks at one setting, optimal Huffman tables (no stuffing).

    The sample's bands are coded as one scan of their own (luma then chroma per band, not libjpeg's
    MCU interleaving, which changes only the DC differences at band edges). Luma and chroma have
    tables of their own, so their bits add up; ``luma_cache`` keeps the luma part, which does not
    depend on the subsampling mode, between calls."""
    luma_t, chroma_t = (t.reshape(64)[ZIGZAG] for t in quant_tables(quality, cutoff))
    key = (quality, cutoff)
    if luma_cache is not None and key in luma_cache:
        total = luma_cache[key]
    else:
        total = _group_bits([quantize(sample.luma, luma_t)])
        if luma_cache is not None:
            luma_cache[key] = total
    if sample.chroma:
        total += _group_bits([quantize(b, chroma_t) for b in sample.chroma[subsampling]])
    return float(total)


def _group_bits(blocks: list[np.ndarray]) -> int:
    """Bits of one table pair's blocks coded as one scan: optimal DC and AC codes plus magnitude bits."""
    from . import entropy

    stacked = np.concatenate(blocks)
    scan = entropy.scan_symbols(stacked, np.zeros(stacked.shape[0], np.int8), (0,))
    total = int(scan.extra_bits.sum())
    for table in (0, 1):
        counts = scan.counts(table)
        total += entropy.coded_bits(counts, entropy.optimal_code_lengths(counts))
    return total


def forecast(prepared: PreparedImage, grid) -> "Forecast":
    """Forecast luma and chroma SSIM and bytes for every cutoff and subsampling of ``grid`` at its
    coarse qualities (:class:`Forecast` interpolates between them).

    Bytes: the proxy (nonzeros and magnitude bits) gives the shape along quality; at ``ANCHORS``
    qualities per combo the sample is entropy-coded exactly, and the ratio between the two,
    interpolated along quality, scales the proxy. Sample bits are scaled to the whole image."""
    qualities = list(grid.coarse_qualities())
    fine_qualities = list(grid.sorted_qualities)
    subsamplings = tuple(grid.subsamplings)
    sample = sample_blocks(prepared, () if prepared.grayscale else subsamplings)
    luma_tables, chroma_tables = quality_tables_zigzag(qualities)
    fine_luma, fine_chroma = quality_tables_zigzag(fine_qualities)
    upper = np.clip(np.searchsorted(qualities, fine_qualities), 1, len(qualities) - 1) if len(qualities) > 1 \
        else np.zeros(len(fine_qualities), int)
    lower = np.maximum(upper - 1, 0)
    span = np.array(qualities, float)[upper] - np.array(qualities, float)[lower]
    weight = np.clip((np.array(fine_qualities, float) - np.array(qualities, float)[lower]) / np.where(span > 0, span, 1), 0, 1)
    luma_fine = (fine_luma[:, 0], lower, upper, weight)
    chroma_fine = (fine_chroma[:, 0], lower, upper, weight)
    luma = predict_plane(sample.luma, luma_tables, grid.cutoffs, fine=luma_fine)
    anchors = sorted({qualities[round(i * (len(qualities) - 1) / max(1, ANCHORS - 1))] for i in range(ANCHORS)})
    chroma, total_bits, luma_bits = {}, {}, {}
    for s in subsamplings:
        proxy = _proxy_bits(luma)
        if not prepared.grayscale:
            cb, cr = (predict_plane(x, chroma_tables, grid.cutoffs, fine=chroma_fine) for x in sample.chroma[s])
            # Subsampling's own loss adds to quantization's: 1 - SSIM ~ (1 - S_mode) + (1 - S_quant).
            ceiling = prepared.subsampling_ssim(s)
            chroma[s] = (cb.ssim - (1 - ceiling[0]), cr.ssim - (1 - ceiling[1]))
            proxy = proxy + _proxy_bits(cb) + _proxy_bits(cr)
        scaled = np.empty_like(proxy)
        for j, k in enumerate(grid.cutoffs):
            at = [qualities.index(q) for q in anchors]
            ratio = [sample_bits(sample, q, k, s, luma_cache=luma_bits) / max(proxy[i, j], 1.0)
                     for q, i in zip(anchors, at)]
            scaled[:, j] = proxy[:, j] * np.interp(qualities, anchors, ratio)
        total_bits[s] = scaled / sample.fraction
    return Forecast(tuple(fine_qualities), tuple(grid.cutoffs), subsamplings, luma.ssim, chroma, total_bits,
                    HEADER_BYTES, tuple(qualities))
