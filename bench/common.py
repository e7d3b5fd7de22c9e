"""Shared pieces of the benchmarks: test photos and the brute-force way of measuring a setting."""

from __future__ import annotations

import io
import time

import cv2
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


class OpenCvSsim:
    """SSIM against one reference as a speed-minded practitioner writes it, for the fast peer.

    OpenCV's separable Gaussian (sigma 1.5, radius 5, ``BORDER_REFLECT``) on whole float32 planes,
    numpy for eq. (13) of Wang et al. (2004), the reference's mean and variance filtered once. Written
    in the error e = y - x, as a careful script would to dodge float32 cancellation, so it agrees with
    ``dct.quality`` to float32 rounding; but it shares none of the engine's code (the engine's own
    SSIM now runs compiled loops, which a re-encoding script would not have).
    """

    C1, C2 = (0.01 * 255) ** 2, (0.03 * 255) ** 2
    taps = cv2.getGaussianKernel(11, 1.5, cv2.CV_64F)

    def __init__(self, reference: np.ndarray):
        self.x = reference.astype(np.float32) - 128.0
        self.ux = self._blur(self.x)
        self.vx = self._blur(self.x * self.x) - self.ux * self.ux

    def _blur(self, plane):
        return cv2.sepFilter2D(plane, cv2.CV_32F, self.taps, self.taps, borderType=cv2.BORDER_REFLECT)

    def compare(self, distorted: np.ndarray, *, local: bool = True) -> tuple[float, float, np.ndarray]:
        """(mean SSIM over the interior, 5th percentile of 16x16 tile means or NaN without ``local``,
        the SSIM map)."""
        e = distorted.astype(np.float32) - 128.0 - self.x
        ue = self._blur(e)
        var_e = self._blur(e * e) - ue * ue
        cov_xe = self._blur(self.x * e) - self.ux * ue
        mx = self.ux + 128.0
        n1 = 2.0 * mx * (mx + ue) + self.C1
        n2 = 2.0 * (self.vx + cov_xe) + self.C2
        ssim_map = (n1 * n2) / ((n1 + ue * ue) * (n2 + var_e))
        mean = float(ssim_map[5:-5, 5:-5].mean(dtype=np.float64))
        if not local:
            return mean, float("nan"), ssim_map
        h, w = ssim_map.shape
        tops, lefts = np.arange(0, h, 16), np.arange(0, w, 16)
        sums = np.add.reduceat(np.add.reduceat(ssim_map.astype(np.float64), tops, axis=0), lefts, axis=1)
        tiles = sums / np.outer(np.minimum(16, h - tops), np.minimum(16, w - lefts))
        return mean, float(np.percentile(tiles, 5.0)), ssim_map


class Timer:
    def __enter__(self):
        self.start = time.perf_counter()
        return self

    def __exit__(self, *exc):
        self.seconds = time.perf_counter() - self.start
