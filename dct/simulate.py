"""Simulate baseline JPEG settings on an image: estimated file size, SSIM and the reconstruction.

The path for one setting (ITU-T T.81 baseline sequential, as libjpeg implements it):

1. RGB -> YCbCr (T.871), chroma downsampled for 4:2:2 / 4:2:0, planes padded by edge replication to
   whole blocks and MCUs, level shift by -128 (T.81 A.3.1);
2. forward DCT of every 8x8 block (``Y = C X C^T``);
3. quantization ``Sq = round(S / Q)`` with ties away from zero (T.81 A.3.4, as libjpeg rounds);
4. symbol statistics and Huffman code lengths -> entropy-coded size (``dct.entropy``);
5. dequantization and inverse DCT (``X = C^T Y C``), rounding and clamping to 8-bit samples,
   triangle-filter chroma upsampling and YCbCr -> RGB, as a decoder shows the file;
6. SSIM of the decoded luma against the original luma, and of each decoded, upsampled chroma plane
   against the original full-resolution chroma (luma SSIM cannot see subsampling damage).

:class:`PreparedImage` does steps 1-2 once per image (luma once, chroma once per subsampling mode)
and keeps the reference statistics for SSIM, so a sweep over many settings only repeats 3-6.
The luma plane does not depend on the subsampling mode, so its results are shared across modes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Iterable

import numpy as np

from . import color, damage, entropy, quality
from .tables import SAMPLING_FACTORS, ZIGZAG, Setting, check_subsampling, check_table, quant_tables
from .transform import BLOCK, forward_dct_plane, inverse_dct_blocks

_ZZ = tuple(int(i) for i in ZIGZAG)
# Quantization ties are exact in libjpeg's integer DCT (a flat block's DC lands on k + 1/2); the float
# DCT lands a few ulps either side of them, so a small bias restores libjpeg's round-half-up.
_TIE_BIAS = 1e-4
MIN_SIDE = 2 * quality.RADIUS + 1  # SSIM's 11x11 window must fit
# Chroma SSIM samples its (smooth) map at every other pixel: a quarter of the work; see quality.py.
CHROMA_SSIM_STEP = 2


def _check_pixels(rgb) -> np.ndarray:
    if not isinstance(rgb, np.ndarray):
        raise ValueError(f"rgb must be a numpy array of uint8, got {type(rgb).__name__}")
    if rgb.dtype != np.uint8:
        raise ValueError(f"rgb must have dtype uint8 (8-bit samples), got {rgb.dtype}")
    if not (rgb.ndim == 2 or (rgb.ndim == 3 and rgb.shape[2] == 3)):
        raise ValueError(f"rgb must have shape (H, W, 3) or (H, W) for grayscale, got {rgb.shape!r}")
    h, w = rgb.shape[:2]
    if h == 0 or w == 0:
        raise ValueError(f"rgb is empty: shape {rgb.shape!r}")
    if h < MIN_SIDE or w < MIN_SIDE:
        raise ValueError(
            f"rgb must be at least {MIN_SIDE}x{MIN_SIDE} pixels (the SSIM window), got {w}x{h}"
        )
    return rgb


def _ceil_div(a: int, b: int) -> int:
    return -(-a // b)


def _quantize(coefficients: np.ndarray, table_zigzag: np.ndarray) -> np.ndarray:
    """Round coefficients / Q to integers, ties away from zero. Returns int32, same shape."""
    scaled = coefficients * (1.0 / table_zigzag.astype(np.float32))
    scaled += np.copysign(np.float32(0.5 + _TIE_BIAS), scaled)
    return scaled.astype(np.int32)  # the cast truncates toward zero


def _coding_order(qz: np.ndarray, h: int, v: int) -> np.ndarray:
    """Arrange one component's quantized blocks in interleaved-scan coding order.

    Parameters
    ----------
    qz : ndarray, shape (nby, nbx, 64), int32 — the component's real blocks.
    h, v : int — the component's sampling factors (its blocks per MCU across and down).

    Returns
    -------
    ndarray, shape (N, 64): blocks MCU by MCU, and within an MCU in raster order. Where the image does
    not fill the last MCU, libjpeg adds dummy blocks whose AC is zero and whose DC repeats a neighbour
    (the last real block of the row to the right; the block above at the MCU's right for a bottom row).
    """
    nby, nbx, _ = qz.shape
    if h == 1 and v == 1:
        return qz.reshape(-1, 64)
    nmy, nmx = _ceil_div(nby, v), _ceil_div(nbx, h)
    full = np.zeros((nmy * v, nmx * h, 64), dtype=qz.dtype)
    full[:nby, :nbx] = qz
    if nmx * h > nbx:
        full[:nby, nbx:, 0] = qz[:, -1:, 0]
    if nmy * v > nby:
        full[nby:, :, 0] = np.repeat(full[nby - 1, h - 1 :: h, 0], h)[None, :]
    return full.reshape(nmy, v, nmx, h, 64).transpose(0, 2, 1, 3, 4).reshape(-1, 64)


@dataclass
class _Plane:
    """One component transformed once: its zigzag coefficients and what reconstruction needs."""

    coefficients: np.ndarray  # (nby, nbx, 64) float32, zigzag order
    height: int  # rows of real samples in this component
    width: int


def _transform(plane: np.ndarray, rows: int, cols: int) -> _Plane:
    """Level-shift and DCT a padded plane; keep the real sample extent for reconstruction."""
    return _Plane(forward_dct_plane(plane - 128.0, order=_ZZ), rows, cols)


def _reconstruct(coded: np.ndarray, table_zigzag: np.ndarray, rows: int, cols: int) -> np.ndarray:
    """Dequantize, inverse DCT, round and clamp to 8-bit samples; crop to rows x cols. float32."""
    deq = coded.astype(np.float32) * table_zigzag.astype(np.float32)
    plane = inverse_dct_blocks(deq, order=_ZZ)[:rows, :cols]
    plane += 128.0
    np.rint(plane, out=plane)
    return np.clip(plane, 0.0, 255.0, out=plane)


@dataclass
class _LumaResult:
    ssim: quality.SsimResult
    recon: np.ndarray | None
    damage: damage.DamageResult = field(default_factory=lambda: damage.DamageResult(1.0, 0.0))


@dataclass
class _ChromaResult:
    stats: entropy.SymbolStats
    ssim_cb: quality.SsimResult
    ssim_cr: quality.SsimResult
    recon: tuple[np.ndarray, np.ndarray] | None


@dataclass
class SweepPoint:
    """What one setting costs and how it looks, for one image (no arrays: cheap to keep and ship)."""

    setting: Setting | None  # None when explicit tables were simulated
    estimated_bytes: int  # whole file, optimal Huffman tables (libjpeg optimize=True)
    standard_bytes: int  # whole file, the standard Annex K Huffman tables
    ssim: float  # luma
    ssim_cb: float | None  # None for grayscale
    ssim_cr: float | None
    ssim_local: float  # low percentile of 16x16-tile mean luma SSIM (quality.LOCAL_PERCENTILE)
    psnr: float  # luma, dB
    edge_ssim: float = 1.0  # dct.damage: low percentile of luma SSIM next to strong edges
    blocking: float = 0.0  # dct.damage: extra error step at block boundaries in smooth areas, levels

    def as_dict(self) -> dict:
        d = self.setting.as_dict() if self.setting is not None else {}
        d.update(
            estimated_bytes=self.estimated_bytes,
            standard_bytes=self.standard_bytes,
            ssim=self.ssim,
            ssim_cb=self.ssim_cb,
            ssim_cr=self.ssim_cr,
            ssim_local=self.ssim_local,
            psnr=None if math.isinf(self.psnr) else self.psnr,
            edge_ssim=self.edge_ssim,
            blocking=self.blocking,
        )
        return d

    @classmethod
    def from_dict(cls, d: dict) -> "SweepPoint":
        return cls(
            setting=Setting.from_dict(d),
            estimated_bytes=int(d["estimated_bytes"]),
            standard_bytes=int(d["standard_bytes"]),
            ssim=float(d["ssim"]),
            ssim_cb=None if d.get("ssim_cb") is None else float(d["ssim_cb"]),
            ssim_cr=None if d.get("ssim_cr") is None else float(d["ssim_cr"]),
            ssim_local=float(d["ssim_local"]),
            psnr=math.inf if d.get("psnr") is None else float(d["psnr"]),
            edge_ssim=float(d.get("edge_ssim", 1.0)),
            blocking=float(d.get("blocking", 0.0)),
        )


@dataclass
class Simulation(SweepPoint):
    """One setting simulated on one image, with the arrays a reviewer looks at."""

    ssim_map: np.ndarray = field(default=None, repr=False)  # (H, W) float32, luma
    reconstructed: np.ndarray = field(default=None, repr=False)  # (H, W, 3) or (H, W) uint8
    tables: tuple[np.ndarray, np.ndarray] = field(default=None, repr=False)  # natural order


class PreparedImage:
    """An image converted and transformed once, ready to be simulated at many settings.

    Parameters
    ----------
    rgb : ndarray, shape (H, W, 3) or (H, W), uint8
        H x W images are grayscale and are coded as one-component JPEG files, as libjpeg writes them.
    """

    def __init__(self, rgb: np.ndarray):
        rgb = _check_pixels(rgb)
        self.height, self.width = rgb.shape[:2]
        self.grayscale = rgb.ndim == 2
        if self.grayscale:
            self._planes = (rgb.astype(np.float32),)
        else:
            ycc = color.rgb_to_ycbcr(rgb)
            self._planes = (ycc[0], ycc[1], ycc[2])
        self._luma: _Plane | None = None
        self._chroma: dict[str, tuple[_Plane, _Plane]] = {}
        self._luma_ref: quality.ReferenceStats | None = None
        self._chroma_ref: tuple[quality.ReferenceStats, quality.ReferenceStats] | None = None
        self._damage_ref: damage.EdgeReference | None = None
        self._luma_cache: dict[bytes, _LumaResult] = {}
        self._chroma_cache: dict[tuple[str, bytes], _ChromaResult] = {}

    # -- transforms, done once ---------------------------------------------------------------

    def _luma_plane(self) -> _Plane:
        if self._luma is None:
            hb, wb = _ceil_div(self.height, BLOCK) * BLOCK, _ceil_div(self.width, BLOCK) * BLOCK
            padded = color.pad_edges(self._planes[0], hb, wb)
            self._luma = _transform(padded, self.height, self.width)
        return self._luma

    def _chroma_planes(self, subsampling: str) -> tuple[_Plane, _Plane]:
        if subsampling not in self._chroma:
            h, v = SAMPLING_FACTORS[subsampling]
            full_h = _ceil_div(self.height, BLOCK * v) * BLOCK * v
            full_w = _ceil_div(self.width, BLOCK * h) * BLOCK * h
            rows, cols = _ceil_div(self.height, v), _ceil_div(self.width, h)
            planes = []
            for p in self._planes[1:]:
                small = color.downsample(color.pad_edges(p, full_h, full_w), h, v)
                planes.append(_transform(small, rows, cols))
            self._chroma[subsampling] = (planes[0], planes[1])
        return self._chroma[subsampling]

    def _luma_reference(self) -> quality.ReferenceStats:
        if self._luma_ref is None:
            self._luma_ref = quality.ReferenceStats(self._planes[0])
        return self._luma_ref

    def _damage_reference(self) -> damage.EdgeReference:
        if self._damage_ref is None:
            self._damage_ref = damage.EdgeReference(self._planes[0])
        return self._damage_ref

    def _chroma_reference(self) -> tuple[quality.ReferenceStats, quality.ReferenceStats]:
        if self._chroma_ref is None:
            self._chroma_ref = (
                quality.ReferenceStats(self._planes[1], step=CHROMA_SSIM_STEP),
                quality.ReferenceStats(self._planes[2], step=CHROMA_SSIM_STEP),
            )
        return self._chroma_ref

    # -- per setting -------------------------------------------------------------------------

    def _run_luma(self, table: np.ndarray, subsampling: str, want_arrays: bool) -> tuple[_LumaResult, np.ndarray]:
        tz = table.reshape(64)[ZIGZAG]
        # Dummy blocks depend on the MCU shape, so the symbol statistics are per mode; the
        # reconstruction and its SSIM are not, and are cached across modes.
        key = tz.tobytes()
        plane = self._luma_plane()
        coded = _quantize(plane.coefficients, tz)
        h, v = (1, 1) if self.grayscale else SAMPLING_FACTORS[subsampling]
        stats = entropy.block_symbol_stats(_coding_order(coded, h, v))
        cached = self._luma_cache.get(key)
        if cached is None or (want_arrays and cached.recon is None):
            recon = _reconstruct(coded, tz, plane.height, plane.width)
            # The visible-damage statistics (dct.damage) read the luma planes and the SSIM map.
            result = self._luma_reference().compare(recon, want_map=True)
            seen = self._damage_reference().measure(recon, result.ssim_map)
            if not want_arrays:
                result.ssim_map = None
            cached = _LumaResult(ssim=result, recon=recon if want_arrays else None, damage=seen)
            self._luma_cache[key] = cached
        return cached, stats

    def _run_chroma(self, table: np.ndarray, subsampling: str, want_arrays: bool) -> _ChromaResult:
        tz = table.reshape(64)[ZIGZAG]
        key = (subsampling, tz.tobytes())
        cached = self._chroma_cache.get(key)
        if cached is not None and (cached.recon is not None or not want_arrays):
            return cached
        h, v = SAMPLING_FACTORS[subsampling]
        cb_plane, cr_plane = self._chroma_planes(subsampling)
        stats = entropy.SymbolStats(np.zeros(16, np.int64), np.zeros(256, np.int64), 0)
        recons = []
        for p in (cb_plane, cr_plane):
            coded = _quantize(p.coefficients, tz)
            stats = stats + entropy.block_symbol_stats(coded.reshape(-1, 64))
            small = _reconstruct(coded, tz, p.height, p.width)
            full = color.upsample(small, h, v, self.height, self.width)
            recons.append(np.rint(full))
        ref_cb, ref_cr = self._chroma_reference()
        result = _ChromaResult(
            stats=stats,
            ssim_cb=ref_cb.compare(recons[0]),
            ssim_cr=ref_cr.compare(recons[1]),
            recon=(recons[0], recons[1]) if want_arrays else None,
        )
        self._chroma_cache[key] = result
        return result

    def evaluate(
        self,
        setting: Setting | None = None,
        *,
        tables: tuple[np.ndarray, np.ndarray] | None = None,
        subsampling: str | None = None,
        want_arrays: bool = False,
    ) -> SweepPoint | Simulation:
        """Simulate one setting (or explicit tables with a subsampling mode)."""
        if tables is None:
            if setting is None:
                raise ValueError("give a Setting or explicit tables")
            luma_t, chroma_t = setting.tables()
            subsampling = setting.subsampling
        else:
            luma_t = check_table(tables[0], "luma table")
            chroma_t = check_table(tables[1], "chroma table")
            subsampling = check_subsampling(subsampling or "4:2:0")
        luma, luma_stats = self._run_luma(luma_t, subsampling, want_arrays)
        if self.grayscale:
            groups = [(luma_stats, True)]
            chroma = None
        else:
            chroma = self._run_chroma(chroma_t, subsampling, want_arrays)
            groups = [(luma_stats, True), (chroma.stats, False)]
        n_components = 1 if self.grayscale else 3
        n_qtables = 1 if self.grayscale else 2
        optimal = entropy.file_size(groups, components=n_components, quant_tables=n_qtables, optimal=True)
        standard = entropy.file_size(groups, components=n_components, quant_tables=n_qtables, optimal=False)
        fields = dict(
            setting=setting,
            estimated_bytes=optimal.total,
            standard_bytes=standard.total,
            ssim=luma.ssim.ssim,
            ssim_cb=None if chroma is None else chroma.ssim_cb.ssim,
            ssim_cr=None if chroma is None else chroma.ssim_cr.ssim,
            ssim_local=luma.ssim.local,
            psnr=luma.ssim.psnr,
            edge_ssim=luma.damage.edge_ssim,
            blocking=luma.damage.blocking,
        )
        if not want_arrays:
            return SweepPoint(**fields)
        if self.grayscale:
            recon = luma.recon.astype(np.uint8)
        else:
            recon = color.ycbcr_to_rgb(luma.recon, *chroma.recon)
        return Simulation(**fields, ssim_map=luma.ssim.ssim_map, reconstructed=recon, tables=(luma_t, chroma_t))


def simulate(
    rgb: np.ndarray,
    quality: int | None,
    subsampling: str = "4:2:0",
    cutoff: int = 64,
    *,
    tables: tuple[np.ndarray, np.ndarray] | None = None,
) -> Simulation:
    """Simulate one JPEG setting on an image.

    Parameters
    ----------
    rgb : ndarray, shape (H, W, 3) or (H, W), uint8
        At least 11 x 11 pixels. A 2-D array is grayscale and is coded with one component.
    quality : int or None
        IJG quality factor 1..100 (None only with explicit ``tables``).
    subsampling : {"4:4:4", "4:2:2", "4:2:0"}
        Ignored for grayscale.
    cutoff : int
        Zigzag cutoff K, 1..64 (see :func:`dct.tables.quant_tables`).
    tables : (luma, chroma), optional
        Explicit 8x8 baseline quantization tables (natural order, entries 1..255) instead of quality
        and cutoff.

    Returns
    -------
    Simulation
        ``estimated_bytes`` (int, whole file with optimal Huffman tables), ``standard_bytes``,
        ``ssim`` (luma), ``ssim_cb``, ``ssim_cr``, ``ssim_local``, ``psnr``, ``edge_ssim`` and
        ``blocking`` (:mod:`dct.damage`), ``ssim_map`` (H x W float32),
        ``reconstructed`` (uint8, the shape of ``rgb``) and ``tables``.
    """
    _check_pixels(rgb)
    check_subsampling(subsampling)
    if tables is None:
        setting = Setting(quality, cutoff, subsampling)
        return PreparedImage(rgb).evaluate(setting, want_arrays=True)
    return PreparedImage(rgb).evaluate(tables=tables, subsampling=subsampling, want_arrays=True)


def sweep(rgb: np.ndarray | PreparedImage, settings: Iterable[Setting]) -> list[SweepPoint]:
    """Evaluate many settings on one image, transforming it only once per subsampling mode.

    Parameters
    ----------
    rgb : ndarray (H, W, 3) or (H, W) uint8, or a PreparedImage
    settings : iterable of Setting

    Returns
    -------
    list of SweepPoint, in the order of ``settings``.
    """
    prepared = rgb if isinstance(rgb, PreparedImage) else PreparedImage(rgb)
    settings = list(settings)
    for s in settings:
        if not isinstance(s, Setting):
            raise ValueError(f"settings must be dct.Setting objects, got {s!r}")
    return [prepared.evaluate(s) for s in settings]


__all__ = ["PreparedImage", "Simulation", "SweepPoint", "quant_tables", "simulate", "sweep"]
