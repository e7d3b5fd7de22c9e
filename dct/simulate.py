"""Simulate baseline JPEG settings on an image: the exact file size, SSIM and the decoded pixels.

The path for one setting is libjpeg-turbo's, step for step (as Pillow links it), so the numbers are
the encoder's own answer rather than an estimate:

1. RGB -> YCbCr in libjpeg's fixed point, chroma downsampled with its alternating bias, planes
   extended to whole blocks and MCUs as its encoder extends them (``dct.color``);
2. forward DCT of every 8x8 block with libjpeg's accurate integer DCT (``dct.integer_dct``);
3. quantization by libjpeg's reciprocal multiplication (its rounding, ties included);
4. the scan's symbols in coding order, Huffman tables built as libjpeg builds them, and the bits
   assembled to count 0xFF stuffing: the file size byte for byte (``dct.entropy``);
5. dequantization, the integer inverse DCT with its rounding and clamping, "fancy" chroma upsampling
   and fixed-point YCbCr -> RGB: the pixels a browser shows;
6. SSIM of the luma of the decoded RGB against the luma of the original (what a viewer, or a
   re-encoding check, sees), and of each decoded, upsampled chroma plane against the original
   full-resolution chroma (luma SSIM cannot see subsampling damage).

The definition ``Y = C X C^T`` (``dct.transform``) stays the reference the integer DCT is tested
against. :class:`PreparedImage` does steps 1-2 once per image (luma once, chroma once per subsampling
mode) and keeps the reference statistics for SSIM; a sweep over many settings repeats 3-6, sharing
the luma quantization and inverse DCT across subsampling modes and the chroma work across luma tables.
"""

from __future__ import annotations

import math
from collections import OrderedDict
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Iterable

import numpy as np

from . import color, damage, entropy, quality
from .integer_dct import forward_dct_islow, inverse_dct_islow_plane
from .jit import kernel
from .tables import SAMPLING_FACTORS, ZIGZAG, Setting, check_subsampling, check_table, quant_tables
from .transform import BLOCK

MIN_SIDE = 2 * quality.RADIUS + 1  # SSIM's 11x11 window must fit
# libjpeg's DCTELEM is 16 bits wide in SIMD builds (what Pillow's wheels ship); its reciprocal
# quantizer's shift depends on that width.
_DCTELEM_BITS = 16


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


@lru_cache(maxsize=4096)
def _reciprocals(table_bytes: bytes) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    d = 8 * np.frombuffer(table_bytes, dtype=np.int32).astype(np.int64)
    fq = np.empty(d.size, np.int32)
    c = np.empty(d.size, np.int32)
    r = np.empty(d.size, np.int32)
    for i, di in enumerate(d.tolist()):
        b = di.bit_length() - 1
        ri = _DCTELEM_BITS + b
        fqi, fri = divmod(1 << ri, di)
        ci = di // 2
        if fri == 0:  # a power of two: the reciprocal would not fit, so halve it
            fqi >>= 1
            ri -= 1
        elif fri <= di // 2:
            ci += 1
        else:
            fqi += 1
        fq[i], c[i], r[i] = fqi, ci, ri
    return fq, c, r


def reciprocal_divisors(table: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """libjpeg-turbo's reciprocal quantizer for a table (``compute_reciprocal`` in jcdctmgr.c).

    The divisor of the integer DCT's output is ``d = 8 * Q``. Instead of dividing, libjpeg multiplies
    by ``fq ~ 2**r / d`` after adding a correction ``c ~ d / 2``: ``q = ((|t| + c) * fq) >> r``, with
    the sign restored; ``r`` is 16 (the SIMD builds' DCTELEM width) plus ``floor(log2 d)``. The
    correction absorbs the reciprocal's rounding. Every product fits in 32 bits: ``|t| + c < 2**14``
    (8-bit samples) and ``fq < 2**16``.

    Returns
    -------
    fq, c, r : ndarray, shape (64,), int32 — in the table's order.
    """
    return _reciprocals(np.ascontiguousarray(np.asarray(table, dtype=np.int32).reshape(64)).tobytes())


def quantize(coefficients: np.ndarray, table: np.ndarray) -> np.ndarray:
    """Quantize libjpeg-scaled DCT coefficients the way libjpeg-turbo does.

    Parameters
    ----------
    coefficients : ndarray, shape (..., 64), integer — on the integer DCT's x8 scale.
    table : ndarray, shape (8, 8) or (64,) — quantization table entries 1..255, in the same order as
        the coefficients' last axis (natural, or both zigzag).

    Returns
    -------
    ndarray, same shape, int16 (libjpeg's JCOEF: 8-bit samples give values within +-1024).
    """
    fq, c, r = reciprocal_divisors(table)
    t = np.asarray(coefficients)
    if t.shape[-1] != 64:
        raise ValueError(f"coefficients must have 64 per block on the last axis, got shape {t.shape!r}")
    out = np.empty(t.shape, dtype=np.int16)
    _quantize(np.ascontiguousarray(t).reshape(-1, 64), fq, c, r, out.reshape(-1, 64))
    return out


@kernel
def _quantize(coefficients, fq, c, r, out):
    """((|t| + c) * fq) >> r with t's sign restored, in int32 as libjpeg computes it.

    Every step wraps to 32 bits and the shift is masked to below 32 (r is at most 26, so the mask
    changes nothing): that lets the compiler keep the loop in 32-bit vector lanes. The sign is taken
    off and put back with the two's-complement identity |t| = (t ^ s) - s for s = t >> 31."""
    i32 = np.int32
    for b in range(coefficients.shape[0]):
        for k in range(64):
            t = i32(coefficients[b, k])
            sign = i32(t >> 31)  # -1 for negative t, else 0
            q = i32(i32(i32(i32(i32(t ^ sign) - sign) + c[k]) * fq[k]) >> i32(r[k] & 31))
            out[b, k] = i32(q ^ sign) - sign


def _scan(luma_q: np.ndarray, chroma_q: tuple[np.ndarray, np.ndarray] | None, subsampling: str) -> entropy.Scan:
    """The file's single scan: blocks interleaved MCU by MCU (Y blocks, then Cb, then Cr), zigzag;
    one component's real blocks in raster order for grayscale."""
    if chroma_q is None:
        y = luma_q.reshape(-1, 64)
        return entropy.scan_symbols(y, np.zeros(y.shape[0], np.int8), (0,))
    h, v = SAMPLING_FACTORS[subsampling]
    return entropy.scan_interleaved(luma_q, chroma_q[0], chroma_q[1], h, v)


def _blocks(plane: np.ndarray) -> np.ndarray:
    """Level-shift and integer-DCT a plane whose sides are multiples of 8: (nby, nbx, 64) int16, zigzag."""
    h, w = plane.shape
    b = plane.reshape(h // BLOCK, BLOCK, w // BLOCK, BLOCK).transpose(0, 2, 1, 3).astype(np.int16) - np.int16(128)
    coef = forward_dct_islow(b).reshape(h // BLOCK, w // BLOCK, 64)
    # int16, as libjpeg's DCTELEM: 8-bit samples give |coefficient| <= 8192 on the x8 scale.
    return np.take(coef, ZIGZAG, axis=-1).astype(np.int16)


def _nbytes(value) -> int:
    if isinstance(value, np.ndarray):
        return value.nbytes
    if isinstance(value, (tuple, list)):
        return sum(_nbytes(v) for v in value)
    if isinstance(value, _ChromaDecode):
        return _nbytes(value.planes)
    if isinstance(value, quality.SsimResult):
        return _nbytes(value.values_at) + _nbytes(value.tile_means)
    return 0


class _Recent:
    """A small cache of the most recently used entries, bounded in count and in bytes (a large image
    keeps fewer entries, so a sweep's memory stays bounded)."""

    def __init__(self, size: int, max_bytes: int = 24 << 20):
        self.size = size
        self.max_bytes = max_bytes
        self._items: OrderedDict = OrderedDict()  # key -> (value, its bytes when stored)
        self._bytes = 0

    def get(self, key, make):
        if key in self._items:
            self._items.move_to_end(key)
            return self._items[key][0]
        value = make()
        size = _nbytes(value)
        if size > self.max_bytes:
            return value  # too large to keep: recomputed when asked again
        self._items[key] = (value, size)
        self._bytes += size
        while len(self._items) > self.size or self._bytes > self.max_bytes:
            self._bytes -= self._items.popitem(last=False)[1][1]
        return value


@dataclass
class _ChromaDecode:
    planes: tuple[np.ndarray, np.ndarray]  # upsampled Cb, Cr, (H, W) uint8
    ssim: tuple[float, float] | None = None  # Cb, Cr SSIM, once asked for


@dataclass
class SweepPoint:
    """What one setting costs and how it looks, for one image (no arrays: cheap to keep and ship)."""

    setting: Setting | None  # None when explicit tables were simulated
    estimated_bytes: int  # whole file, optimal Huffman tables (libjpeg optimize=True), byte exact
    # Whole file with the standard Annex K Huffman tables, byte exact; None where not asked for
    # (sweeps leave it out: no decision reads it, and it is a second full bit assembly).
    standard_bytes: int | None
    ssim: float  # luma of the decoded RGB against the original's luma
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
            standard_bytes=None if d.get("standard_bytes") is None else int(d["standard_bytes"]),
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
            self._planes = (rgb,)
        else:
            ycc = color.rgb_to_ycbcr(rgb)
            self._planes = (ycc[0], ycc[1], ycc[2])
        self._luma: np.ndarray | None = None
        self._chroma: dict[str, tuple[np.ndarray, np.ndarray]] = {}
        self._luma_ref: quality.ReferenceStats | None = None
        self._chroma_ref: tuple[quality.ReferenceStats, quality.ReferenceStats] | None = None
        # Per-table work shared between settings (luma across subsampling modes, chroma across luma
        # tables). Sweeps visit a table's settings together, so a few recent entries suffice and memory
        # stays bounded on large images.
        self._luma_q = _Recent(4)
        self._chroma_q = _Recent(4)
        self._luma_planes = _Recent(2)
        self._chroma_planes = _Recent(2)
        self._luma_ssims = _Recent(2)  # (seen luma, SsimResult, chroma) per setting: luma_ssim() then evaluate()
        self._damage_ref: damage.EdgeReference | None = None

    def __getstate__(self) -> dict:
        # The transforms and reference statistics travel; the per-table caches start empty again.
        state = dict(self.__dict__)
        for name in ("_luma_q", "_chroma_q", "_luma_planes", "_chroma_planes", "_luma_ssims"):
            state[name] = _Recent(state[name].size)
        return state

    # -- transforms, done once ---------------------------------------------------------------

    def _luma_blocks(self) -> np.ndarray:
        if self._luma is None:
            hb, wb = _ceil_div(self.height, BLOCK) * BLOCK, _ceil_div(self.width, BLOCK) * BLOCK
            self._luma = _blocks(color.pad_edges(self._planes[0], hb, wb))
        return self._luma

    def _chroma_blocks(self, subsampling: str) -> tuple[np.ndarray, np.ndarray]:
        if subsampling not in self._chroma:
            h, v = SAMPLING_FACTORS[subsampling]
            down = _ceil_div(_ceil_div(self.height, v), BLOCK)
            across = _ceil_div(_ceil_div(self.width, h), BLOCK)
            cb, cr = (_blocks(color.downsample_component(p, h, v, down, across)) for p in self._planes[1:])
            self._chroma[subsampling] = (cb, cr)
        return self._chroma[subsampling]

    def dct_coefficients(self, subsampling: str = "4:2:0") -> tuple[np.ndarray, ...]:
        """The unquantized DCT of every block, per component (Y, or Y, Cb, Cr for colour).

        Returns
        -------
        tuple of ndarray, shape (nby, nbx, 64), int16
            Zigzag order, on libjpeg's scale: 8 times the orthonormal ``C X C^T`` of the
            level-shifted block, rounded by its integer DCT. Chroma blocks are those of the mode's
            downsampled planes.
        """
        luma = self._luma_blocks()
        if self.grayscale:
            return (luma,)
        cb, cr = self._chroma_blocks(check_subsampling(subsampling))
        return (luma, cb, cr)

    def subsampling_ssim(self, subsampling: str) -> tuple[float, float]:
        """Cb and Cr SSIM of the mode's chroma round trip alone (downsample, upsample; no coding):
        the ceiling that quantization then lowers. (1.0, 1.0) for 4:4:4."""
        h, v = SAMPLING_FACTORS[check_subsampling(subsampling)]
        if h == 1 and v == 1 or self.grayscale:
            return 1.0, 1.0
        rows, cols = _ceil_div(self.height, v), _ceil_div(self.width, h)
        down = _ceil_div(rows, BLOCK)
        across = _ceil_div(cols, BLOCK)
        refs = self._chroma_reference()
        out = []
        for plane, ref in zip(self._planes[1:], refs):
            small = color.downsample_component(plane, h, v, down, across)[:rows, :cols]
            out.append(ref.compare(color.upsample(small, h, v, self.height, self.width)).ssim)
        return out[0], out[1]

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
                quality.ReferenceStats(self._planes[1]),
                quality.ReferenceStats(self._planes[2]),
            )
        return self._chroma_ref

    # -- per setting -------------------------------------------------------------------------

    def _quantized_luma(self, table: np.ndarray) -> np.ndarray:
        return self._luma_q.get(table.tobytes(), lambda: quantize(self._luma_blocks(), table.reshape(64)[ZIGZAG]))

    def _quantized_chroma(self, table: np.ndarray, subsampling: str) -> tuple[np.ndarray, np.ndarray]:
        tz = table.reshape(64)[ZIGZAG]
        return self._chroma_q.get(
            (subsampling, table.tobytes()), lambda: tuple(quantize(b, tz) for b in self._chroma_blocks(subsampling))
        )

    def _decode_luma(self, table: np.ndarray) -> np.ndarray:
        # The luma blocks, their quantization and inverse DCT do not depend on the subsampling mode.
        return self._luma_planes.get(
            table.tobytes(), lambda: inverse_dct_islow_plane(self._quantized_luma(table), table, self.height, self.width)
        )

    def _decode_chroma(self, table: np.ndarray, subsampling: str) -> _ChromaDecode:
        def decode() -> _ChromaDecode:
            h, v = SAMPLING_FACTORS[subsampling]
            rows, cols = _ceil_div(self.height, v), _ceil_div(self.width, h)
            planes = [color.upsample(inverse_dct_islow_plane(q, table, rows, cols), h, v, self.height, self.width)
                      for q in self._quantized_chroma(table, subsampling)]
            return _ChromaDecode((planes[0], planes[1]))

        return self._chroma_planes.get((subsampling, table.tobytes()), decode)

    def _chroma_ssim(self, chroma: _ChromaDecode) -> tuple[float, float]:
        if chroma.ssim is None:
            ref_cb, ref_cr = self._chroma_reference()
            chroma.ssim = (ref_cb.compare(chroma.planes[0], want_local=False).ssim,
                           ref_cr.compare(chroma.planes[1], want_local=False).ssim)
        return chroma.ssim

    def _luma_ssim(self, luma_t: np.ndarray, chroma_t: np.ndarray, subsampling: str):
        """(seen luma, its SSIM with the local statistic and the map's values next to edges, the
        chroma decode or None), so that evaluate() needs no second chroma decode."""
        key = (luma_t.tobytes(), chroma_t.tobytes(), subsampling)

        def compare():
            luma = self._decode_luma(luma_t)
            chroma = None if self.grayscale else self._decode_chroma(chroma_t, subsampling)
            # The luma a viewer sees: of the decoded RGB, by one table lookup without the RGB image.
            seen = luma if chroma is None else color.decoded_luma(luma, *chroma.planes)
            return seen, self._luma_reference().compare(seen, at=self._damage_reference().edge_index), chroma

        return self._luma_ssims.get(key, compare)

    def luma_ssim(self, setting: Setting) -> float:
        """The exact luma SSIM of one setting, alone: no sizing, no chroma SSIM, no damage checks.

        The cheap part of :meth:`evaluate` (which then reuses it): enough to see that a setting
        fails its luma target clearly.
        """
        luma_t, chroma_t = setting.tables()
        return self._luma_ssim(luma_t, chroma_t, setting.subsampling)[1].ssim

    def _scan(self, luma_t: np.ndarray, chroma_t: np.ndarray, subsampling: str) -> entropy.Scan:
        chroma_q = None if self.grayscale else self._quantized_chroma(chroma_t, subsampling)
        return _scan(self._quantized_luma(luma_t), chroma_q, subsampling)

    def _file_size(self, scan: entropy.Scan, optimal: bool) -> entropy.FileSize:
        return entropy.file_size(scan, components=1 if self.grayscale else 3,
                                 quant_tables=1 if self.grayscale else 2, optimal=optimal)

    def size_breakdown(self, setting: Setting, *, optimal: bool = True) -> entropy.FileSize:
        """The file's exact size in parts (headers, entropy-coded bytes, stuffed bytes) for one setting.

        Needs only quantization and entropy coding (no decode, no SSIM): the cheap, exact way to
        know a setting's bytes.
        """
        luma_t, chroma_t = setting.tables()
        return self._file_size(self._scan(luma_t, chroma_t, setting.subsampling), optimal)

    def huffman_tables(self, setting: Setting) -> list[tuple[tuple[int, ...], tuple[int, ...]]]:
        """The optimal Huffman tables (BITS, HUFFVAL) of one setting: DC, AC per table pair."""
        luma_t, chroma_t = setting.tables()
        scan = self._scan(luma_t, chroma_t, setting.subsampling)
        return [entropy.optimal_table(scan.counts(t)) for t in range(2 * scan.groups)]

    def evaluate(
        self,
        setting: Setting | None = None,
        *,
        tables: tuple[np.ndarray, np.ndarray] | None = None,
        subsampling: str | None = None,
        want_arrays: bool = False,
        standard: bool | None = None,
    ) -> SweepPoint | Simulation:
        """Simulate one setting (or explicit tables with a subsampling mode).

        ``standard`` also sizes the file with the standard Huffman tables (``standard_bytes``); by
        default only with ``want_arrays``.
        """
        if tables is None:
            if setting is None:
                raise ValueError("give a Setting or explicit tables")
            luma_t, chroma_t = setting.tables()
            subsampling = setting.subsampling
        else:
            luma_t = check_table(tables[0], "luma table")
            chroma_t = check_table(tables[1], "chroma table")
            subsampling = check_subsampling(subsampling or "4:2:0")
        if want_arrays:
            luma = self._decode_luma(luma_t)
            chroma = None if self.grayscale else self._decode_chroma(chroma_t, subsampling)
            decoded = luma if chroma is None else color.ycbcr_to_rgb(luma, *chroma.planes)
            seen_luma = luma if chroma is None else color.luma(decoded)
            luma_ssim = self._luma_reference().compare(seen_luma, want_map=True)
        else:
            # A sweep point needs only the map's values next to edges, not the whole map.
            seen_luma, luma_ssim, chroma = self._luma_ssim(luma_t, chroma_t, subsampling)
        scan = self._scan(luma_t, chroma_t, subsampling)
        optimal = self._file_size(scan, True)
        standard_total = self._file_size(scan, False).total if (want_arrays if standard is None else standard) else None
        # The visible-damage statistics (dct.damage) read the luma planes and the SSIM map.
        seen = self._damage_reference().measure(seen_luma, luma_ssim.ssim_map if want_arrays else luma_ssim.values_at)
        ssim_cb, ssim_cr = (None, None) if chroma is None else self._chroma_ssim(chroma)
        fields = dict(
            setting=setting,
            estimated_bytes=optimal.total,
            standard_bytes=standard_total,
            ssim=luma_ssim.ssim,
            ssim_cb=ssim_cb,
            ssim_cr=ssim_cr,
            ssim_local=luma_ssim.local,
            psnr=luma_ssim.psnr,
            edge_ssim=seen.edge_ssim,
            blocking=seen.blocking,
        )
        if not want_arrays:
            return SweepPoint(**fields)
        return Simulation(**fields, ssim_map=luma_ssim.ssim_map, reconstructed=decoded, tables=(luma_t, chroma_t))


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
    # Visit settings that share a luma table (same quality and cutoff) one after another, so its
    # quantization and inverse DCT are done once for all subsampling modes.
    order = sorted(range(len(settings)), key=lambda i: (settings[i].quality, settings[i].cutoff))
    points: list[SweepPoint | None] = [None] * len(settings)
    for i in order:
        points[i] = prepared.evaluate(settings[i])
    return points


__all__ = ["PreparedImage", "Simulation", "SweepPoint", "quant_tables", "simulate", "sweep"]
