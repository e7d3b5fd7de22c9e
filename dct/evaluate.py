"""One image job in, its curves out: the unit of work that runners ship to worker processes.

A job names an image (a path or its bytes), its class's delivery widths and background, and the
settings to evaluate. The worker decodes it (``dct.io``), resizes it to each width and sweeps the
settings with the engine. A file that cannot be decoded comes back as a result with ``error`` set,
so one broken file never sinks a sample set.
"""

from __future__ import annotations

import hashlib
import io as _io
import os
import pickle
from dataclasses import dataclass, field

import numpy as np

from . import damage, predict
from .budget import Measure, Targets
from .color import rgb_to_ycbcr
from .io import ImageRejected, decode_image, encode_jpeg, encode_jpeg_tables, resize_to_width
from .quality import ReferenceStats
from .search import clear_luma_failure, stops_ladder
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
    forecasts: dict = field(default_factory=dict)  # {width: dct.predict.Forecast as a dict} (search jobs)
    # {width: [(Setting, luma SSIM), ...]}: search-job settings seen to fail clearly by luma alone
    failed: dict = field(default_factory=dict)

    def as_dict(self) -> dict:
        d = {
            "key": self.key,
            "class": self.class_name,
            "curves": [c.as_dict() for c in self.curves],
            "warnings": list(self.warnings),
            "error": self.error,
        }
        if self.forecasts:
            d["forecasts"] = [{"width": w, "forecast": f} for w, f in self.forecasts.items()]
        if self.failed:
            d["failed"] = [{"width": w, "settings": [[s.as_dict(), v] for s, v in pairs]} for w, pairs in self.failed.items()]
        return d

    @classmethod
    def from_dict(cls, d: dict) -> "ImageResult":
        return cls(d["key"], d["class"], [WidthCurve.from_dict(c) for c in d["curves"]], list(d["warnings"]), d["error"],
                   {f["width"]: f["forecast"] for f in d.get("forecasts", [])},
                   {f["width"]: [(Setting.from_dict(s), float(v)) for s, v in f["settings"]] for f in d.get("failed", [])})


def evaluate_image(job) -> ImageResult:
    """Decode, resize and sweep one image job (a ``dct.sampleset.ImageJob``) at ``job.settings``."""
    # Parallelism comes from running one image per core; multi-threaded BLAS or OpenCV on top of
    # that only makes the engine's many mid-sized operations fight for the same cores.
    with single_threaded():
        return _evaluate(job)


def _evaluate(job) -> ImageResult:
    settings = list(job.settings or ())
    if not settings:
        return ImageResult(job.key, job.class_name, error="no settings to evaluate")
    return _per_width(job, lambda width, prepared: ([prepared.evaluate(s) for s in settings], None))


def _per_width(job, work) -> ImageResult:
    """Decode a job's image once and run ``work(width, prepared) -> (points, forecast)`` per width.

    A search round that comes back to an image whose prepared widths this worker (or the sweep's
    store) still has does not decode it again: the decode's warnings travel with them.
    """
    result = ImageResult(job.key, job.class_name)
    kept = [_kept(job, width) for width in job.widths]
    decoded = None
    if any(k is None for k in kept):
        try:
            decoded = decode_image(job.source, background=job.background)
        except ImageRejected as exc:
            result.error = str(exc)
            return result
        warnings = list(decoded.warnings)
    else:
        warnings = list(kept[0].warnings)
    result.warnings.extend(warnings)
    for i, width in enumerate(job.widths):
        if kept[i] is None:
            pixels = resize_to_width(decoded.pixels, width)
            h, w = pixels.shape[:2]
            if h < MIN_SIDE or w < MIN_SIDE:
                result.error = f"image too small: {w}x{h} pixels; SSIM needs at least {MIN_SIDE}x{MIN_SIDE}"
                return result
            kept[i] = _Kept(PreparedImage(pixels), warnings)
            del pixels
    del decoded  # the prepared planes are all the work needs: the decoded RGB's memory goes back now
    for width, entry in zip(job.widths, kept):
        _remember(job, width, entry)
        points, forecast = work(width, entry.prepared)
        _share(job, width, entry)
        result.curves.append(WidthCurve(width, entry.prepared.width, entry.prepared.height, points))
        if forecast is not None:
            result.forecasts[width] = forecast
    return result


# A worker keeps its most recent prepared images: a class search comes back to the same images in
# rounds, and with one worker (or few images per worker) their decode and transforms are then done
# once. A local pool's workers also share them through the sweep's private store folder, so a round
# that lands an image on another worker loads its transforms (milliseconds) instead of redoing them.
PREPARED_CACHE_PIXELS = 12_000_000
_prepared_cache: dict = {}


@dataclass
class _Kept:
    prepared: PreparedImage
    warnings: list[str]  # the decode's, reported again by every round that reuses it


def _prepared_key(job, width) -> tuple:
    if isinstance(job.source, str):
        try:  # a file replaced under the same name is a different image
            st = os.stat(job.source)
            source = (job.source, st.st_size, st.st_mtime_ns)
        except OSError:
            source = (job.source,)
    else:
        source = hashlib.sha1(job.source).hexdigest()
    return (source, width, tuple(job.background))


def _stored_path(job, width) -> str | None:
    """Where a search job's prepared image is shared between worker processes (None: not shared)."""
    store = getattr(job, "store", None)
    if not store:
        return None
    return os.path.join(store, hashlib.sha1(repr(_prepared_key(job, width)).encode()).hexdigest() + ".pickle")


def _share(job, width, entry: _Kept) -> None:
    """Share a prepared image with the sweep's other workers (written once, atomically)."""
    path = _stored_path(job, width)
    if path is None or os.path.exists(path):
        return
    tmp = f"{path}.{os.getpid()}.tmp"
    with open(tmp, "wb") as f:
        pickle.dump(entry, f, protocol=pickle.HIGHEST_PROTOCOL)
    os.replace(tmp, path)


def _kept(job, width) -> _Kept | None:
    """This worker's (or the sweep store's) prepared image for a job's width, if any."""
    hit = _prepared_cache.get(_prepared_key(job, width))
    if hit is None:
        path = _stored_path(job, width)
        if path is not None and os.path.exists(path):
            with open(path, "rb") as f:
                hit = pickle.load(f)  # written by this sweep's own workers (dct.pipeline)
    return hit


def _remember(job, width, entry: _Kept) -> None:
    key = _prepared_key(job, width)
    _prepared_cache.pop(key, None)
    _prepared_cache[key] = entry  # most recent last
    # Within the pixel budget; the newest entry is kept even alone over it (a huge image's next
    # round then reuses its transforms instead of redoing them).
    while len(_prepared_cache) > 1 and sum(e.prepared.height * e.prepared.width
                                           for e in _prepared_cache.values()) > PREPARED_CACHE_PIXELS:
        _prepared_cache.pop(next(iter(_prepared_cache)))


@dataclass(frozen=True)
class SearchJob:
    """One image's share of a class search round (``dct.search``), for every width of its class.

    ``forecast`` asks for the coefficient-domain forecast over ``grid``; ``points`` are settings to
    evaluate exactly; each ladder is evaluated from its first setting down and stops at the first
    clear failure against ``targets`` (nothing below it can pass). A rung of a ladder that is not
    ``full`` is first checked by its luma SSIM alone: a clear failure there is reported as a verdict
    (``ImageResult.failed``) without sizing the file or the other checks.
    """

    key: str
    class_name: str
    source: str | bytes
    widths: tuple
    background: tuple[int, int, int]
    targets: Targets
    grid: object = None  # dct.grid.Grid, for the forecast
    forecast: bool = False
    points: tuple = ()  # ((width, (Setting, ...)), ...)
    ladders: tuple = ()  # ((width, (dct.search.Ladder, ...)), ...)
    store: str | None = None  # a private folder where workers share prepared images (dct.pipeline)


def evaluate_search(job: SearchJob) -> ImageResult:
    """Run one image's share of a search round; the result's curves hold only the exact points."""
    with single_threaded():
        points = dict(job.points)
        ladders = dict(job.ladders)

        failed: dict = {}

        def work(width, prepared: PreparedImage):
            done: dict[Setting, SweepPoint] = {}
            quick: dict[Setting, float] = {}
            for s in points.get(width, ()):
                if s not in done:
                    done[s] = prepared.evaluate(s)
            for ladder in ladders.get(width, ()):
                for s in ladder.settings:
                    if s not in done and not ladder.full:
                        luma = prepared.luma_ssim(s)  # evaluate() below reuses it
                        if clear_luma_failure(luma, job.targets):
                            quick[s] = luma
                            break
                    point = done.get(s) or prepared.evaluate(s)
                    done[s] = point
                    if stops_ladder(Measure.of(point), job.targets):
                        break
            if quick:
                failed[width] = [(s, v) for s, v in quick.items() if s not in done]
            forecast = predict.forecast(prepared, job.grid).as_dict() if job.forecast else None
            return list(done.values()), forecast

        result = _per_width(job, work)
        result.failed = {w: pairs for w, pairs in failed.items() if pairs} if result.error is None else {}
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
