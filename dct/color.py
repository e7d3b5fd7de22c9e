"""Colour conversion and chroma resampling, as a baseline JFIF encoder and decoder do them.

RGB <-> YCbCr is the full-range conversion of ITU-T T.871 (JFIF), section 7:

.. math::

    Y  &=  0.299 R + 0.587 G + 0.114 B \\
    Cb &= -0.168736 R - 0.331264 G + 0.5 B + 128 \\
    Cr &=  0.5 R - 0.418688 G - 0.081312 B + 128

Encoders store 8-bit samples, so the forward conversion rounds to integers (as libjpeg's fixed-point
converter does). Downsampling averages 2x1 or 2x2 neighbourhoods (libjpeg's default, no smoothing);
upsampling is the triangle ("fancy") filter that libjpeg's decoder uses by default, so that the
reconstruction is what a browser shows.
"""

from __future__ import annotations

import numpy as np

# ITU-T T.871, equations in section 7 (forward) and their inverse.
_RGB_TO_YCC = np.array(
    [
        [0.299, 0.587, 0.114],
        [-0.168736, -0.331264, 0.5],
        [0.5, -0.418688, -0.081312],
    ],
    dtype=np.float32,
)
_YCC_TO_RGB = np.array(
    [
        [1.0, 0.0, 1.402],
        [1.0, -0.344136, -0.714136],
        [1.0, 1.772, 0.0],
    ],
    dtype=np.float32,
)


def rgb_to_ycbcr(rgb: np.ndarray) -> np.ndarray:
    """Convert RGB samples to rounded full-range YCbCr.

    Parameters
    ----------
    rgb : ndarray, shape (H, W, 3), uint8

    Returns
    -------
    ycc : ndarray, shape (3, H, W), float32
        Integer-valued planes Y, Cb, Cr in 0..255 (plane-first, the layout the transform wants).
    """
    flat = rgb.reshape(-1, 3).astype(np.float32)
    ycc = flat @ _RGB_TO_YCC.T
    ycc[:, 1:] += 128.0
    np.rint(ycc, out=ycc)
    np.clip(ycc, 0.0, 255.0, out=ycc)
    h, w = rgb.shape[:2]
    return np.ascontiguousarray(ycc.T.reshape(3, h, w))


def ycbcr_to_rgb(y: np.ndarray, cb: np.ndarray, cr: np.ndarray) -> np.ndarray:
    """Convert full-resolution YCbCr planes (float, 0..255) to uint8 RGB, shape (H, W, 3)."""
    h, w = y.shape
    ycc = np.stack([y.ravel(), cb.ravel() - 128.0, cr.ravel() - 128.0], axis=1).astype(np.float32)
    rgb = ycc @ _YCC_TO_RGB.T
    np.rint(rgb, out=rgb)
    np.clip(rgb, 0.0, 255.0, out=rgb)
    return rgb.astype(np.uint8).reshape(h, w, 3)


def pad_edges(plane: np.ndarray, height: int, width: int) -> np.ndarray:
    """Pad a plane to (height, width) by replicating its last row and column (libjpeg's edge expansion)."""
    ph, pw = height - plane.shape[0], width - plane.shape[1]
    if ph == 0 and pw == 0:
        return plane
    return np.pad(plane, ((0, ph), (0, pw)), mode="edge")


def downsample(plane: np.ndarray, h_factor: int, v_factor: int) -> np.ndarray:
    """Average ``v_factor`` x ``h_factor`` neighbourhoods; the plane's size must be a multiple of them.

    Returns integer-valued float32 samples, rounded as an encoder stores them.
    """
    if h_factor == 1 and v_factor == 1:
        return plane
    hh, ww = plane.shape
    view = plane.reshape(hh // v_factor, v_factor, ww // h_factor, h_factor)
    out = view.mean(axis=(1, 3), dtype=np.float32)
    return np.rint(out, out=out)


def _upsample_axis(plane: np.ndarray, axis: int) -> np.ndarray:
    """Double one axis with the triangle filter: each output is 3/4 nearest + 1/4 next-nearest input."""
    x = np.moveaxis(plane, axis, -1)
    prev = np.concatenate([x[..., :1], x[..., :-1]], axis=-1)
    nxt = np.concatenate([x[..., 1:], x[..., -1:]], axis=-1)
    out = np.empty(x.shape[:-1] + (2 * x.shape[-1],), dtype=np.float32)
    out[..., 0::2] = 0.75 * x + 0.25 * prev
    out[..., 1::2] = 0.75 * x + 0.25 * nxt
    return np.moveaxis(out, -1, axis)


def upsample(plane: np.ndarray, h_factor: int, v_factor: int, height: int, width: int) -> np.ndarray:
    """Upsample a chroma plane to full resolution and crop to (height, width).

    Parameters
    ----------
    plane : ndarray, shape (h, w), float32
    h_factor, v_factor : int
        1 or 2, the luma sampling factors.
    """
    out = plane.astype(np.float32, copy=False)
    if h_factor == 2:
        out = _upsample_axis(out, 1)
    if v_factor == 2:
        out = _upsample_axis(out, 0)
    return out[:height, :width]
