"""Quantization tables, zigzag order and the encoder setting.

The base tables are ITU-T T.81 Annex K, Tables K.1 (luminance) and K.2 (chrominance), in natural
(row-major) order. Quality scaling follows the Independent JPEG Group's ``jpeg_quality_scaling`` and
``jpeg_add_quant_table`` with ``force_baseline`` set: entries are clamped to 1..255 so the result is a
valid 8-bit baseline table.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

SUBSAMPLINGS = ("4:4:4", "4:2:2", "4:2:0")

# (horizontal, vertical) sampling factors of the luma component; chroma is always 1x1.
SAMPLING_FACTORS = {"4:4:4": (1, 1), "4:2:2": (2, 1), "4:2:0": (2, 2)}

# ITU-T T.81 Table K.1, luminance quantization table (natural order).
ANNEX_K_LUMA = np.array(
    [
        [16, 11, 10, 16, 24, 40, 51, 61],
        [12, 12, 14, 19, 26, 58, 60, 55],
        [14, 13, 16, 24, 40, 57, 69, 56],
        [14, 17, 22, 29, 51, 87, 80, 62],
        [18, 22, 37, 56, 68, 109, 103, 77],
        [24, 35, 55, 64, 81, 104, 113, 92],
        [49, 64, 78, 87, 103, 121, 120, 101],
        [72, 92, 95, 98, 112, 100, 103, 99],
    ],
    dtype=np.int32,
)

# ITU-T T.81 Table K.2, chrominance quantization table (natural order).
ANNEX_K_CHROMA = np.array(
    [
        [17, 18, 24, 47, 99, 99, 99, 99],
        [18, 21, 26, 66, 99, 99, 99, 99],
        [24, 26, 56, 99, 99, 99, 99, 99],
        [47, 66, 99, 99, 99, 99, 99, 99],
        [99, 99, 99, 99, 99, 99, 99, 99],
        [99, 99, 99, 99, 99, 99, 99, 99],
        [99, 99, 99, 99, 99, 99, 99, 99],
        [99, 99, 99, 99, 99, 99, 99, 99],
    ],
    dtype=np.int32,
)


def _zigzag_order(n: int = 8) -> np.ndarray:
    """Natural (row-major) index of each zigzag position, as in ITU-T T.81 Figure A.6."""
    cells = [(i, j) for i in range(n) for j in range(n)]
    # Walk anti-diagonals; odd diagonals run top-right to bottom-left, even ones the other way.
    cells.sort(key=lambda ij: (ij[0] + ij[1], ij[0] if (ij[0] + ij[1]) % 2 else ij[1]))
    return np.array([i * n + j for i, j in cells], dtype=np.intp)


ZIGZAG = _zigzag_order()  # ZIGZAG[k] = natural index of zigzag position k
UNZIGZAG = np.argsort(ZIGZAG)  # UNZIGZAG[natural index] = zigzag position


def quality_scale(quality: int) -> int:
    """IJG ``jpeg_quality_scaling``: percentage applied to the Annex K tables."""
    _check_quality(quality)
    return 5000 // quality if quality < 50 else 200 - 2 * quality


def scale_table(base: np.ndarray, quality: int) -> np.ndarray:
    """Scale one base table the IJG way and clamp to the baseline range 1..255."""
    scale = quality_scale(quality)
    table = (np.asarray(base, dtype=np.int64) * scale + 50) // 100
    return np.clip(table, 1, 255).astype(np.int32)


def apply_cutoff(table: np.ndarray, cutoff: int) -> np.ndarray:
    """Set entries at zigzag positions >= ``cutoff`` to 255 (still a valid baseline table)."""
    _check_cutoff(cutoff)
    out = np.array(table, dtype=np.int32).reshape(64)
    out[ZIGZAG[cutoff:]] = 255
    return out.reshape(8, 8)


def quant_tables(quality: int, cutoff: int = 64) -> tuple[np.ndarray, np.ndarray]:
    """Luminance and chrominance quantization tables for a quality factor and zigzag cutoff.

    Parameters
    ----------
    quality : int
        IJG quality factor, 1..100.
    cutoff : int, optional
        Zigzag cutoff K, 1..64. Table entries at zigzag positions >= K are set to 255, the largest
        baseline quantizer, which drops those frequencies in all but extreme blocks.

    Returns
    -------
    luma, chroma : ndarray, shape (8, 8), int32
        Natural row-major order: the order Pillow's ``qtables=`` takes and ``Image.quantization`` gives.
    """
    _check_quality(quality)
    _check_cutoff(cutoff)
    luma = apply_cutoff(scale_table(ANNEX_K_LUMA, quality), cutoff)
    chroma = apply_cutoff(scale_table(ANNEX_K_CHROMA, quality), cutoff)
    return luma, chroma


def check_table(table, name: str = "table") -> np.ndarray:
    """Validate an explicit 8x8 baseline quantization table and return it as int32."""
    arr = np.asarray(table)
    if arr.shape not in ((8, 8), (64,)):
        raise ValueError(f"{name} must be 8x8 (or 64 values in row-major order), got shape {arr.shape!r}")
    if not np.issubdtype(arr.dtype, np.integer):
        if not np.all(np.equal(np.mod(arr, 1), 0)):
            raise ValueError(f"{name} must hold integers, got dtype {arr.dtype!r}")
    if arr.min() < 1 or arr.max() > 255:
        raise ValueError(
            f"{name} entries must be in 1..255 for 8-bit baseline, got {int(arr.min())}..{int(arr.max())}"
        )
    return arr.astype(np.int32).reshape(8, 8)


def _check_quality(quality) -> None:
    if isinstance(quality, bool) or not isinstance(quality, (int, np.integer)) or not 1 <= quality <= 100:
        raise ValueError(f"quality must be an integer in 1..100, got {quality!r}")


def _check_cutoff(cutoff) -> None:
    if isinstance(cutoff, bool) or not isinstance(cutoff, (int, np.integer)) or not 1 <= cutoff <= 64:
        raise ValueError(f"cutoff must be an integer zigzag position in 1..64, got {cutoff!r}")


def check_subsampling(subsampling) -> str:
    if subsampling not in SUBSAMPLINGS:
        raise ValueError(f"subsampling must be one of {', '.join(SUBSAMPLINGS)}, got {subsampling!r}")
    return subsampling


@dataclass(frozen=True, order=True)
class Setting:
    """One encoder setting: what Eightfold searches over and exports."""

    quality: int
    cutoff: int = 64
    subsampling: str = "4:2:0"

    def __post_init__(self):
        _check_quality(self.quality)
        _check_cutoff(self.cutoff)
        check_subsampling(self.subsampling)

    def tables(self) -> tuple[np.ndarray, np.ndarray]:
        return quant_tables(self.quality, self.cutoff)

    def as_dict(self) -> dict:
        return {"quality": int(self.quality), "cutoff": int(self.cutoff), "subsampling": self.subsampling}

    @classmethod
    def from_dict(cls, d: dict) -> "Setting":
        return cls(int(d["quality"]), int(d.get("cutoff", 64)), str(d.get("subsampling", "4:2:0")))

    def label(self) -> str:
        return f"q{self.quality} k{self.cutoff} {self.subsampling}"
