"""Colour conversion and chroma resampling, in libjpeg's fixed-point arithmetic.

RGB <-> YCbCr is the full-range conversion of ITU-T T.871 (JFIF), section 7:

.. math::

    Y  &=  0.299 R + 0.587 G + 0.114 B \\
    Cb &= -0.168736 R - 0.331264 G + 0.5 B + 128 \\
    Cr &=  0.5 R - 0.418688 G - 0.081312 B + 128

What this emulates (libjpeg-turbo as Pillow links it, learnt from ``jccolor.c``, ``jcsample.c``,
``jcprepct.c``, ``jdsample.c`` and ``jdcolor.c``):

* **Encoder colour conversion** with 16-bit fixed-point weights ``FIX(x) = round(x * 2**16)``:
  ``Y = (19595 R + 38470 G + 7471 B + 2**15) >> 16`` rounds half up; Cb and Cr add
  ``128 * 2**16 + 2**15 - 1``, so their half-way cases round down (this keeps them within 0..255
  without clamping). Products fit easily in 32 bits (255 * 2**16 < 2**24).
* **Downsampling** averages 2x1 or 2x2 neighbourhoods with an alternating bias instead of a fixed
  half, so that the rounding errors cancel along a row: ``(a + b + {0, 1}) >> 1`` for 4:2:2 and
  ``(a + b + c + d + {1, 2}) >> 2`` for 4:2:0, the bias alternating from one output column to the next.
* **Edge extension** replicates the last column of the full-resolution plane out to twice the chroma
  plane's block width, and the last row to an even count; after downsampling, the last chroma row
  is replicated down to whole blocks (so rows are extended *after* averaging, columns before).
* **Decoder upsampling** is the "fancy" triangle filter: each output sample is 3/4 of the nearer
  and 1/4 of the further input sample per doubled axis, with libjpeg's biases (``+1``/``+2`` over 4
  for 4:2:2; ``+8``/``+7`` over 16 for 4:2:0), edges replicated at the plane's real (not padded) size.
* **Decoder colour conversion** with tables: ``R = Y + round(1.402 (Cr-128))``,
  ``B = Y + round(1.772 (Cb-128))``, ``G = Y + ((-22554 (Cb-128) - 46802 (Cr-128) + 2**15) >> 16)``,
  each clamped to 0..255.

The equality is checked pixel for pixel against Pillow's encoder (coefficients read back with
``jpeglib``) and decoder in tests/test_exact.py.
"""

from __future__ import annotations

import numpy as np

from .jit import kernel

SCALEBITS = 16
ONE_HALF = 1 << (SCALEBITS - 1)
CBCR_OFFSET = 128 << SCALEBITS


def _fix(x: float) -> int:
    return int(x * (1 << SCALEBITS) + 0.5)


# Encoder weights (ITU-T T.871 section 7, libjpeg's rounding of them).
_Y_WEIGHTS = (_fix(0.29900), _fix(0.58700), _fix(0.11400))
_CB_WEIGHTS = (-_fix(0.16874), -_fix(0.33126), _fix(0.50000))
_CR_WEIGHTS = (_fix(0.50000), -_fix(0.41869), -_fix(0.08131))

# Decoder tables, indexed by the 8-bit Cb or Cr sample.
_X = np.arange(256, dtype=np.int64) - 128
CR_TO_R = ((_fix(1.40200) * _X + ONE_HALF) >> SCALEBITS).astype(np.int32)
CB_TO_B = ((_fix(1.77200) * _X + ONE_HALF) >> SCALEBITS).astype(np.int32)
_CR_TO_G = -_fix(0.71414) * _X
_CB_TO_G = -_fix(0.34414) * _X + ONE_HALF


def _weighted(rgb: np.ndarray, weights: tuple[int, int, int], offset: int) -> np.ndarray:
    r, g, b = (rgb[..., i].astype(np.int32) for i in range(3))
    return (weights[0] * r + weights[1] * g + weights[2] * b + offset) >> SCALEBITS


def luma(rgb: np.ndarray) -> np.ndarray:
    """The Y of T.871 as libjpeg's encoder rounds it, for an (H, W, 3) uint8 image; (H, W) uint8.

    This is also the luma that Pillow's ``convert("L")`` computes, with the same weights and rounding.
    """
    return _weighted(rgb, _Y_WEIGHTS, ONE_HALF).astype(np.uint8)


def rgb_to_ycbcr(rgb: np.ndarray) -> np.ndarray:
    """Convert RGB samples to YCbCr exactly as libjpeg's encoder does.

    Parameters
    ----------
    rgb : ndarray, shape (H, W, 3), uint8

    Returns
    -------
    ycc : ndarray, shape (3, H, W), uint8
        Planes Y, Cb, Cr (plane-first, the layout the transform wants).
    """
    rgb = np.asarray(rgb)
    out = np.empty((3,) + rgb.shape[:2], dtype=np.uint8)
    for a in range(0, rgb.shape[0], _CONVERT_ROWS):  # int32 temporaries a band of rows at a time
        band = rgb[a : a + _CONVERT_ROWS]
        out[0, a : a + _CONVERT_ROWS] = _weighted(band, _Y_WEIGHTS, ONE_HALF)
        out[1, a : a + _CONVERT_ROWS] = _weighted(band, _CB_WEIGHTS, CBCR_OFFSET + ONE_HALF - 1)
        out[2, a : a + _CONVERT_ROWS] = _weighted(band, _CR_WEIGHTS, CBCR_OFFSET + ONE_HALF - 1)
    return out


_CONVERT_ROWS = 256


def ycbcr_to_rgb(y: np.ndarray, cb: np.ndarray, cr: np.ndarray) -> np.ndarray:
    """Convert full-resolution uint8 Y, Cb, Cr planes to RGB as libjpeg's decoder does; (H, W, 3) uint8."""
    y = np.asarray(y, dtype=np.int32)
    cb = np.asarray(cb, dtype=np.intp)
    cr = np.asarray(cr, dtype=np.intp)
    out = np.empty(y.shape + (3,), dtype=np.uint8)
    out[..., 0] = np.clip(y + CR_TO_R[cr], 0, 255)
    out[..., 1] = np.clip(y + ((_CB_TO_G[cb] + _CR_TO_G[cr]) >> SCALEBITS), 0, 255)
    out[..., 2] = np.clip(y + CB_TO_B[cb], 0, 255)
    return out


def decoded_luma(y: np.ndarray, cb: np.ndarray, cr: np.ndarray) -> np.ndarray:
    """``luma(ycbcr_to_rgb(y, cb, cr))`` (what a viewer's luma of the decoded RGB is) in one
    compiled pass, without making the RGB image; (H, W) uint8.

    The decoder's fixed-point products and shifts are computed in float32, which holds each of them
    exactly (every sum stays below 2**24: the largest, the luma weights times 255 plus the rounding
    half, is 16,744,448) and lets the compiler fill 8-wide vector lanes; a shift right is a floor of
    the division by 2**16, also exact. tests/test_color.py checks every (Y, Cb, Cr) combination.
    """
    y, cb, cr = (np.ascontiguousarray(p, dtype=np.uint8) for p in (y, cb, cr))
    if not (y.shape == cb.shape == cr.shape and y.ndim == 2):
        raise ValueError(f"Y, Cb and Cr must be 2-D planes of one shape, got {y.shape}, {cb.shape}, {cr.shape}")
    out = np.empty(y.shape, np.uint8)
    _decoded_luma(y.ravel(), cb.ravel(), cr.ravel(), out.ravel())
    return out


_R_CR, _B_CB, _G_CB, _G_CR = _fix(1.40200), _fix(1.77200), -_fix(0.34414), -_fix(0.71414)


@kernel
def _decoded_luma(y, cb, cr, out):
    f32 = np.float32
    r_cr, b_cb, g_cb, g_cr = f32(_R_CR), f32(_B_CB), f32(_G_CB), f32(_G_CR)
    wr, wg, wb = f32(_Y_WEIGHTS[0]), f32(_Y_WEIGHTS[1]), f32(_Y_WEIGHTS[2])
    half, unit, low, high = f32(ONE_HALF), f32(1.0 / (1 << SCALEBITS)), f32(0.0), f32(255.0)
    for k in range(y.size):
        v = f32(y[k])
        u, w = f32(cb[k]) - f32(128.0), f32(cr[k]) - f32(128.0)
        r = min(max(v + np.floor((r_cr * w + half) * unit), low), high)  # CR_TO_R
        g = min(max(v + np.floor((g_cb * u + half + g_cr * w) * unit), low), high)
        b = min(max(v + np.floor((b_cb * u + half) * unit), low), high)  # CB_TO_B
        out[k] = np.uint8(np.floor((wr * r + wg * g + wb * b + half) * unit))


def pad_edges(plane: np.ndarray, height: int, width: int) -> np.ndarray:
    """Pad a plane to (height, width) by replicating its last row and column (libjpeg's edge expansion)."""
    ph, pw = height - plane.shape[0], width - plane.shape[1]
    if ph == 0 and pw == 0:
        return plane
    return np.pad(plane, ((0, ph), (0, pw)), mode="edge")


def downsample(plane: np.ndarray, h_factor: int, v_factor: int) -> np.ndarray:
    """Average ``v_factor`` x ``h_factor`` neighbourhoods with libjpeg's alternating bias.

    Parameters
    ----------
    plane : ndarray, shape (H, W), uint8
        Both sides multiples of the factors (edge-extended beforehand).

    Returns
    -------
    ndarray, shape (H // v_factor, W // h_factor), uint8
    """
    if h_factor == 1 and v_factor == 1:
        return plane
    hh, ww = plane.shape
    sums = plane.astype(np.int32).reshape(hh // v_factor, v_factor, ww // h_factor, h_factor).sum(axis=(1, 3))
    n = h_factor * v_factor
    # bias 0,1,0,1,... for two samples (4:2:2), 1,2,1,2,... for four (4:2:0)
    bias = np.where(np.arange(sums.shape[1]) % 2 == 0, n // 2 - 1, n // 2).astype(np.int32)
    shift = n.bit_length() - 1
    return ((sums + bias) >> shift).astype(np.uint8)


def downsample_component(plane: np.ndarray, h_factor: int, v_factor: int, blocks_down: int,
                         blocks_across: int) -> np.ndarray:
    """One full-resolution chroma plane -> libjpeg's padded, downsampled component plane.

    Columns are extended to ``2 * 8 * blocks_across`` (times ``h_factor``) and rows to a multiple of
    ``v_factor`` before averaging; the averaged rows are then extended down to ``8 * blocks_down``.

    Returns
    -------
    ndarray, shape (8 * blocks_down, 8 * blocks_across), uint8
    """
    h, _ = plane.shape
    rows = -(-h // v_factor) * v_factor
    full = pad_edges(plane, rows, 8 * blocks_across * h_factor)
    return pad_edges(downsample(full, h_factor, v_factor), 8 * blocks_down, 8 * blocks_across)


def upsample(plane: np.ndarray, h_factor: int, v_factor: int, height: int, width: int) -> np.ndarray:
    """libjpeg's "fancy" upsampling of a decoded chroma plane to full resolution, cropped to (height, width).

    Parameters
    ----------
    plane : ndarray, shape (h, w), uint8
        The component's real samples (``ceil(height / v_factor)`` x ``ceil(width / h_factor)``).
    h_factor, v_factor : int
        1 or 2, the luma sampling factors.

    Returns
    -------
    ndarray, shape (height, width), uint8
    """
    if h_factor == 1 and v_factor == 1:
        return np.asarray(plane, dtype=np.uint8)[:height, :width]
    if h_factor != 2 or v_factor not in (1, 2):
        raise ValueError(f"fancy upsampling doubles the width, and the height or not; got {h_factor}x{v_factor}")
    src = np.ascontiguousarray(plane, dtype=np.uint8)
    if not (0 < height <= v_factor * src.shape[0] and 0 < width <= 2 * src.shape[1]):
        raise ValueError(f"a {width}x{height} plane is not the {h_factor}x{v_factor} upsampling of {src.shape[1]}x{src.shape[0]}")
    out = np.empty((height, width), dtype=np.uint8)
    _fancy(src, v_factor, out)
    return out


@kernel
def _fancy(src, v_factor, out):
    """Row by row: for 4:2:0 the column sums 3 * nearer + further input row first (rows replicated
    at the top and bottom), then across, even outputs (3 * s + left + 8) >> 4 and odd ones
    (3 * s + right + 7) >> 4; for 4:2:2 the samples themselves with biases 1 and 2 and a shift of 2.
    Columns are replicated at both ends; the output is cropped to its shape."""
    height, width = out.shape
    h, w = src.shape
    i32 = np.int32  # every step wraps to 32 bits and the shift is masked below 32: 32-bit vector lanes
    sums = np.empty(w + 2, np.int32)  # with one replicated column at each end
    line = np.empty(2 * w, np.uint8)
    even_bias, odd_bias, shift = (8, 7, 4) if v_factor == 2 else (1, 2, 2)
    shift = i32(shift & 31)
    for i in range(height):
        if v_factor == 2:
            a = i >> 1
            b = max(a - 1, 0) if i % 2 == 0 else min(a + 1, h - 1)
            near, far = src[a], src[b]
            for j in range(w):
                sums[j + 1] = i32(i32(3 * i32(near[j])) + i32(far[j]))
        else:
            row = src[i]
            for j in range(w):
                sums[j + 1] = i32(row[j])
        sums[0], sums[w + 1] = sums[1], sums[w]
        for j in range(w):
            s = i32(3 * sums[j + 1])
            line[2 * j] = i32(i32(i32(s + sums[j]) + even_bias) >> shift)
            line[2 * j + 1] = i32(i32(i32(s + sums[j + 2]) + odd_bias) >> shift)
        row_out = out[i]
        for j in range(width):  # an explicit loop: compiled as a plain copy (a slice assignment is not)
            row_out[j] = line[j]
