"""Pixels the app shows, always re-encoded from the decoded array and cached on disk per blob.

Originals are shown as PNG from ``dct.io.encode_png`` and candidates as the real JPEG from
``dct.io.encode_jpeg``; neither carries the upload's metadata (EXIF, GPS, comments).
"""

from __future__ import annotations

import io
import json

import numpy as np
from flask import Response

from webapp import store

THUMB_WIDTH = 96
DEFAULT_HEAT_LOW = 0.5
HEAT_MAX_ALPHA = 176  # about 70 %: the designer still sees the pixels under the strongest colour


def heat_scale(ssim_map_values: np.ndarray, target_ssim) -> tuple[float, float]:
    """The heat-map's (high, low) for one image: clear at SSIM >= high, full colour at <= low.

    Fixed scales paint textured images red all over, because SSIM punishes smoothed grain
    everywhere. So the scale follows the image: colour starts below the class target or below the
    image's own median SSIM, whichever is lower (at most half the picture is coloured), and is full
    at the image's 1st percentile (at least 0.1 below ``high``). Rounded to 0.01 so the key reads
    cleanly and cached renders are shared.
    """
    values = np.clip(np.asarray(ssim_map_values, dtype=np.float64), -1.0, 1.0)
    target = 0.95 if target_ssim is None else float(target_ssim)
    high = min(target, float(np.median(values)))
    low = min(high - 0.1, float(np.percentile(values, 1.0)))
    high, low = round(high, 2), round(max(-1.0, low), 2)
    if high - low < 0.1:
        low = round(high - 0.1, 2)
    return high, max(-1.0, low)


def _setting_key(setting: dict) -> str:
    return f"q{setting['quality']}-k{setting['cutoff']}-s{setting['subsampling'].replace(':', '')}"


def _width_key(width) -> str:
    return "wfull" if width is None else f"w{int(width)}"


def pixels(root, sha: str, width=None) -> np.ndarray:
    """Decoded (and, for a delivery width, resized) pixels of a stored blob."""
    from dct.io import decode_image, resize_to_width

    decoded = decode_image(store.blob_path(root, sha).read_bytes())
    px = decoded.pixels
    if width is not None and int(width) != px.shape[1]:
        px = resize_to_width(px, int(width))
    return px


def original_png(root, sha: str, width=None) -> bytes:
    from dct.io import encode_png

    return store.cached_render(root, sha, f"{_width_key(width)}-orig.png", lambda: encode_png(pixels(root, sha, width)))


def thumbnail_png(root, sha: str) -> bytes:
    from dct.io import encode_png, resize_to_width

    def make():
        px = pixels(root, sha)
        if px.shape[1] > THUMB_WIDTH:
            px = resize_to_width(px, THUMB_WIDTH)
        return encode_png(px)

    return store.cached_render(root, sha, f"thumb{THUMB_WIDTH}.png", make)


def candidate_jpeg(root, sha: str, width, setting: dict) -> bytes:
    from dct.io import encode_jpeg

    return store.cached_render(
        root, sha, f"{_width_key(width)}-{_setting_key(setting)}.jpg",
        lambda: encode_jpeg(pixels(root, sha, width), quality=setting["quality"], cutoff=setting["cutoff"],
                            subsampling=setting["subsampling"]),
    )


def ssim_map(root, sha: str, width, setting: dict) -> np.ndarray:
    """Local SSIM map of the simulated coding at ``setting`` (float, image-sized per ``dct.simulate``)."""
    from dct.simulate import simulate

    def make():
        result = simulate(pixels(root, sha, width), setting["quality"], setting["subsampling"], setting["cutoff"])
        buf = io.BytesIO()
        np.save(buf, np.asarray(result.ssim_map, dtype=np.float32), allow_pickle=False)
        return buf.getvalue()

    data = store.cached_render(root, sha, f"{_width_key(width)}-{_setting_key(setting)}-ssim.npy", make)
    return np.load(io.BytesIO(data), allow_pickle=False)


def heat_png_from_map(ssim_map_values: np.ndarray, *, low: float = DEFAULT_HEAT_LOW, high: float = 1.0) -> bytes:
    """The heat-map PNG of an SSIM map, after clipping it to [-1, 1].

    SSIM cannot exceed 1, but a float32 map of flat areas can come out a hair above it (1.0001 seen
    on the demo's screenshots), which the heat-map module rightly refuses; clip the rounding away.
    """
    from webapp.heatmap import ssim_heatmap_png

    return ssim_heatmap_png(np.clip(np.asarray(ssim_map_values, dtype=np.float32), -1.0, 1.0), low=low,
                            high=high, max_alpha=HEAT_MAX_ALPHA)


def heatmap_png(root, sha: str, width, setting: dict, *, target_ssim=None) -> bytes:
    """The heat-map overlay at ``setting``, on this image's own scale (:func:`heat_scale`)."""
    values = ssim_map(root, sha, width, setting)
    high, low = heat_scale(values, target_ssim)
    return store.cached_render(
        root, sha, f"{_width_key(width)}-{_setting_key(setting)}-heat{high:.2f}-{low:.2f}a{HEAT_MAX_ALPHA}.png",
        lambda: heat_png_from_map(values, low=low, high=high),
    )


def worst_crops(root, sha: str, width, setting: dict, *, count: int = 3, size: int = 96) -> list[dict]:
    from dct.quality import worst_regions

    def make():
        regions = worst_regions(ssim_map(root, sha, width, setting), count=count, size=size)
        return json.dumps([
            {"top": int(t), "left": int(lf), "height": int(h), "width": int(w), "ssim": float(m)}
            for t, lf, h, w, m in regions
        ]).encode()

    key = f"{_width_key(width)}-{_setting_key(setting)}-worst{count}x{size}.json"
    return json.loads(store.cached_render(root, sha, key, make))


def damage_spot(root, sha: str, width, setting: dict, check: str, *, size: int = 96) -> dict | None:
    """Where a visible-damage check (``dct.damage``: "edge" or "blocking") is worst at ``setting``."""
    from dct.color import rgb_to_ycbcr
    from dct.damage import EdgeReference
    from dct.simulate import simulate

    def make():
        px = pixels(root, sha, width)
        sim = simulate(px, setting["quality"], setting["subsampling"], setting["cutoff"])
        luma = (lambda a: a.astype(np.float32)) if px.ndim == 2 else (lambda a: rgb_to_ycbcr(a)[0])
        spot = EdgeReference(luma(px)).worst_spot(luma(sim.reconstructed), sim.ssim_map, check, size=size)
        if spot is None:
            return b"null"
        return json.dumps({"top": spot.top, "left": spot.left, "height": spot.height, "width": spot.width,
                           "ssim": spot.value, "check": check}).encode()

    key = f"{_width_key(width)}-{_setting_key(setting)}-damage-{check}{size}.json"
    return json.loads(store.cached_render(root, sha, key, make))


def png_response(data: bytes) -> Response:
    resp = Response(data, mimetype="image/png")
    resp.headers["Cache-Control"] = "private, max-age=3600"
    return resp


def jpeg_response(data: bytes) -> Response:
    resp = Response(data, mimetype="image/jpeg")
    resp.headers["Cache-Control"] = "private, max-age=3600"
    return resp
