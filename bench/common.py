"""Shared pieces of the benchmarks: test photos and the brute-force way of measuring a setting."""

from __future__ import annotations

import io
import time

import numpy as np
from PIL import Image
from skimage import data
from skimage.metrics import structural_similarity

from dct.color import rgb_to_ycbcr
from dct.tables import Setting

PILLOW_SUBSAMPLING = {"4:4:4": 0, "4:2:2": 1, "4:2:0": 2}


def photo_mosaic(height: int, width: int, seed: int = 0) -> np.ndarray:
    """A photo-like test image tiled from scikit-image's bundled sample photos (an open dataset).

    Tiles are 512x512 crops at native resolution (no upscaling, so the texture stays real), flipped
    and shuffled by ``seed`` so that different seeds give different images.
    """
    rng = np.random.default_rng(seed)
    sources = [data.astronaut(), data.coffee(), data.chelsea(), data.rocket(), data.immunohistochemistry()]
    out = np.empty((height, width, 3), np.uint8)
    for y in range(0, height, 256):
        for x in range(0, width, 256):
            src = sources[rng.integers(len(sources))]
            sy, sx = rng.integers(0, src.shape[0] - 256), rng.integers(0, src.shape[1] - 256)
            tile = src[sy : sy + 256, sx : sx + 256]
            if rng.random() < 0.5:
                tile = tile[:, ::-1]
            h, w = min(256, height - y), min(256, width - x)
            out[y : y + h, x : x + w] = tile[:h, :w]
    return out


def skimage_ssim(x, y) -> float:
    # Wang et al. 2004 settings as scikit-image exposes them (float64 inside).
    return structural_similarity(x, y, gaussian_weights=True, sigma=1.5, use_sample_covariance=False, data_range=255)


def brute_force_point(rgb: np.ndarray, setting: Setting, *, chroma: bool = True, orig: np.ndarray | None = None) -> dict:
    """The brute-force way: Pillow encode (optimize=True) + decode + scikit-image SSIM.

    With ``chroma`` it also measures Cb and Cr SSIM (libjpeg's own upsampled planes), i.e. the same
    outputs the engine gives; without, luma SSIM only. ``orig`` is the original's YCbCr planes,
    converted once per image as a brute-force script would.
    """
    luma, chroma_t = setting.tables()
    buf = io.BytesIO()
    Image.fromarray(rgb).save(
        buf, "JPEG", qtables=[luma.ravel().tolist(), chroma_t.ravel().tolist()],
        subsampling=PILLOW_SUBSAMPLING[setting.subsampling], optimize=True,
    )
    data_bytes = buf.getvalue()
    decoded = np.asarray(Image.open(io.BytesIO(data_bytes)).convert("RGB"))
    if orig is None:
        orig = rgb_to_ycbcr(rgb)
    out = {"bytes": len(data_bytes), "ssim": skimage_ssim(orig[0], rgb_to_ycbcr(decoded)[0])}
    if chroma:
        im = Image.open(io.BytesIO(data_bytes))
        im.draft("YCbCr", im.size)
        planes = np.asarray(im).astype(np.float32).transpose(2, 0, 1)
        out["ssim_cb"] = skimage_ssim(orig[1], planes[1])
        out["ssim_cr"] = skimage_ssim(orig[2], planes[2])
    return out


class Timer:
    def __enter__(self):
        self.start = time.perf_counter()
        return self

    def __exit__(self, *exc):
        self.seconds = time.perf_counter() - self.start
