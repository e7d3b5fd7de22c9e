"""One image job in, its curves out: the unit of work that runners ship to worker processes.

A job names an image (a path or its bytes), its class's delivery widths and background, and the
settings to evaluate. The worker decodes it (``dct.io``), resizes it to each width and sweeps the
settings with the engine. A file that cannot be decoded comes back as a result with ``error`` set,
so one broken file never sinks a sample set.
"""

from __future__ import annotations

import io as _io
from dataclasses import dataclass, field

import numpy as np

from . import damage
from .color import rgb_to_ycbcr
from .io import ImageRejected, decode_image, encode_jpeg, encode_jpeg_tables, resize_to_width
from .quality import ReferenceStats
from .simulate import MIN_SIDE, PreparedImage, SweepPoint
from .tables import Setting
from .threads import single_threaded


@dataclass
class WidthCurve:
    """An image's curve at one delivery width: every evaluated setting's point."""

    width: int | None  # the requested delivery width (None: the image's own width)
    pixel_width: int  # what was evaluated, after resizing (never upscaled)
    pixel_height: int
    points: list[SweepPoint]

    def as_dict(self) -> dict:
        return {
            "width": self.width,
            "pixel_width": self.pixel_width,
            "pixel_height": self.pixel_height,
            "points": [p.as_dict() for p in self.points],
        }

    @classmethod
    def from_dict(cls, d: dict) -> "WidthCurve":
        return cls(d["width"], int(d["pixel_width"]), int(d["pixel_height"]), [SweepPoint.from_dict(p) for p in d["points"]])


@dataclass
class ImageResult:
    key: str
    class_name: str
    curves: list[WidthCurve] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    error: str | None = None

    def as_dict(self) -> dict:
        return {
            "key": self.key,
            "class": self.class_name,
            "curves": [c.as_dict() for c in self.curves],
            "warnings": list(self.warnings),
            "error": self.error,
        }

    @classmethod
    def from_dict(cls, d: dict) -> "ImageResult":
        return cls(d["key"], d["class"], [WidthCurve.from_dict(c) for c in d["curves"]], list(d["warnings"]), d["error"])


def evaluate_image(job) -> ImageResult:
    """Decode, resize and sweep one image job (a ``dct.sampleset.ImageJob``) at ``job.settings``."""
    # Parallelism comes from running one image per core; multi-threaded BLAS or OpenCV on top of
    # that only makes the engine's many mid-sized operations fight for the same cores.
    with single_threaded():
        return _evaluate(job)


def _evaluate(job) -> ImageResult:
    result = ImageResult(job.key, job.class_name)
    try:
        decoded = decode_image(job.source, background=job.background)
    except ImageRejected as exc:
        result.error = str(exc)
        return result
    result.warnings.extend(decoded.warnings)
    settings = list(job.settings or ())
    if not settings:
        result.error = "no settings to evaluate"
        return result
    for width in job.widths:
        pixels = resize_to_width(decoded.pixels, width)
        h, w = pixels.shape[:2]
        if h < MIN_SIDE or w < MIN_SIDE:
            result.error = f"image too small: {w}x{h} pixels; SSIM needs at least {MIN_SIDE}x{MIN_SIDE}"
            result.curves = []
            return result
        prepared = PreparedImage(pixels)
        points = [prepared.evaluate(s) for s in settings]
        result.curves.append(WidthCurve(width, w, h, points))
    return result


@dataclass(frozen=True)
class VerifyJob:
    """Re-encode one image at chosen settings with Pillow, to check the estimates against reality."""

    key: str
    source: str | bytes
    background: tuple[int, int, int]
    settings_by_width: tuple[tuple[int | None, Setting], ...]


def verify_image(job: VerifyJob) -> dict:
    """Actual bytes and SSIM of Pillow's JPEG with the exported tables, per width.

    Returns ``{"key", "widths": [{"width", "actual_bytes", "actual_ssim", "actual_ssim_cb",
    "actual_ssim_cr", "actual_ssim_local"}]}`` (see :func:`measure_jpeg`).
    """
    decoded = decode_image(job.source, background=job.background)
    out = []
    for width, setting in job.settings_by_width:
        pixels = resize_to_width(decoded.pixels, width)
        data = encode_jpeg(pixels, quality=setting.quality, cutoff=setting.cutoff, subsampling=setting.subsampling)
        out.append({"width": width, "actual_bytes": len(data), **measure_jpeg(pixels, data)})
    return {"key": job.key, "widths": out}


def encode_and_measure(pixels: np.ndarray, *, luma, chroma, subsampling: str) -> dict:
    """Encode with explicit tables (Pillow, optimized Huffman) and measure the real decode.

    Returns ``{"actual_bytes", "actual_ssim", "actual_ssim_cb", "actual_ssim_cr", "actual_ssim_local",
    "actual_edge_ssim", "actual_blocking"}``.
    """
    data = encode_jpeg_tables(pixels, luma=luma, chroma=chroma, subsampling=subsampling)
    return {"actual_bytes": len(data), **measure_jpeg(pixels, data)}


def measure_jpeg(pixels: np.ndarray, data: bytes) -> dict:
    """SSIM of a real JPEG file against the pixels it was encoded from.

    Luma SSIM (and the local statistic: the low percentile of 16x16-tile SSIM) is measured on the
    luma of the decoded RGB, which is what a browser shows; Cb and Cr SSIM on libjpeg's own decoded
    chroma planes (upsampled by libjpeg); the visible-damage statistics (``dct.damage``) on the same
    luma. Returns ``{"actual_ssim", "actual_ssim_cb", "actual_ssim_cr", "actual_ssim_local",
    "actual_edge_ssim", "actual_blocking"}``; the chroma values are None for grayscale.
    """
    from PIL import Image  # dct.io owns encoding; decoding back here is the measurement itself

    with Image.open(_io.BytesIO(data)) as im:
        rgb = np.asarray(im)
    if pixels.ndim == 2:
        luma = ReferenceStats(pixels).compare(rgb, want_map=True)
        seen = damage.EdgeReference(pixels).measure(rgb, luma.ssim_map)
        return {"actual_ssim": luma.ssim, "actual_ssim_cb": None, "actual_ssim_cr": None,
                "actual_ssim_local": luma.local, "actual_edge_ssim": seen.edge_ssim, "actual_blocking": seen.blocking}
    with Image.open(_io.BytesIO(data)) as im:
        im.draft("YCbCr", im.size)
        planes = np.asarray(im).astype(np.float32).transpose(2, 0, 1)
    orig = rgb_to_ycbcr(pixels)
    decoded_luma = rgb_to_ycbcr(rgb)[0]
    luma = ReferenceStats(orig[0]).compare(decoded_luma, want_map=True)
    seen = damage.EdgeReference(orig[0]).measure(decoded_luma, luma.ssim_map)
    return {
        "actual_ssim": luma.ssim,
        "actual_ssim_cb": ReferenceStats(orig[1]).compare(planes[1]).ssim,
        "actual_ssim_cr": ReferenceStats(orig[2]).compare(planes[2]).ssim,
        "actual_ssim_local": luma.local,
        "actual_edge_ssim": seen.edge_ssim,
        "actual_blocking": seen.blocking,
    }
