"""Colour conversion against Pillow (ITU-T T.871 JFIF YCbCr). libjpeg's own conversion, downsampling and
upsampling are checked bit for bit through its coefficients and decoded pixels in tests/test_exact.py."""

import numpy as np
from PIL import Image
from skimage import data

from dct.color import downsample, luma, rgb_to_ycbcr, upsample, ycbcr_to_rgb


def test_forward_matches_pillow_within_one_level():
    # Pillow's "YCbCr" mode implements the JFIF (T.871) full-range conversion in fixed point.
    rgb = data.astronaut()
    ours = rgb_to_ycbcr(rgb)
    pil = np.asarray(Image.fromarray(rgb).convert("YCbCr")).astype(np.float32).transpose(2, 0, 1)
    assert np.abs(ours - pil).max() <= 1.0


def test_round_trip_within_two_levels():
    rgb = data.coffee()
    ycc = rgb_to_ycbcr(rgb)
    back = ycbcr_to_rgb(ycc[0], ycc[1], ycc[2])
    assert np.abs(back.astype(int) - rgb.astype(int)).max() <= 2


def test_t871_primaries():
    # T.871 section 7: white -> (255, 128, 128); pure red -> Y = 0.299 * 255 = 76.2, Cr = 255.5 -> 255.
    px = np.array([[[255, 255, 255], [255, 0, 0]]], np.uint8)
    ycc = rgb_to_ycbcr(px)
    assert ycc[:, 0, 0].tolist() == [255, 128, 128]
    assert ycc[0, 0, 1] == 76 and ycc[2, 0, 1] == 255


def test_downsample_then_upsample_keeps_flat_planes():
    plane = np.full((16, 24), 77, np.uint8)
    small = downsample(plane, 2, 2)
    assert small.shape == (8, 12) and (small == 77).all()
    assert (upsample(small, 2, 2, 15, 23) == 77).all()


def test_luma_equals_pillow_convert_L_on_every_colour():
    # Pillow's "L" conversion (ITU-R 601-2 weights, 16-bit fixed point) rounds exactly as libjpeg's
    # encoder computes Y: the engine's luma of decoded RGB is what Pillow's convert("L") gives.
    r, g = np.meshgrid(np.arange(256), np.arange(256), indexing="ij")
    for b in range(0, 256, 15):
        rgb = np.stack([r, g, np.full_like(r, b)], -1).astype(np.uint8)
        assert (luma(rgb) == np.asarray(Image.fromarray(rgb).convert("L"))).all()


def test_downsample_bias_alternates():
    # libjpeg's 2x2 average adds 1, 2, 1, 2, ... before the shift by 2, so equal half-way sums round
    # down, then up, then down along a row (jcsample.c's h2v2 rule; checked end to end in test_exact).
    plane = np.tile(np.array([[0, 1, 0, 1, 0, 1, 0, 1]], np.uint8), (2, 1))  # each 2x2 sums to 2
    assert downsample(plane, 2, 2).tolist() == [[0, 1, 0, 1]]


def _fancy_oracle(plane, v_factor, height, width):
    """libjpeg's "fancy" upsampling, one output sample at a time (jdsample.c's h2v1 and h2v2 rules
    as its comments state them): 3/4 of the nearer and 1/4 of the further input per doubled axis,
    vertical first for h2v2 (column sums 3 * nearer + further), biases 1/2 over 4 (h2v1) and 8/7
    over 16 (h2v2) for even/odd outputs, edge samples replicated."""
    x = plane.astype(int)
    h, w = x.shape
    out = np.empty((height, width), np.uint8)
    for i in range(height):
        for j in range(width):
            def col(c):
                c = min(max(c, 0), w - 1)
                if v_factor == 1:
                    return x[i, c]
                a = i // 2
                b = min(max(a - 1 if i % 2 == 0 else a + 1, 0), h - 1)
                return 3 * x[a, c] + x[b, c]
            a = j // 2
            other = col(a - 1) if j % 2 == 0 else col(a + 1)
            bias = (8 if j % 2 == 0 else 7) if v_factor == 2 else (1 if j % 2 == 0 else 2)
            out[i, j] = (3 * col(a) + other + bias) >> (4 if v_factor == 2 else 2)
    return out


def test_upsampling_equals_a_per_sample_loop():
    """The compiled upsampler against the rule written out sample by sample, on an odd-sized plane
    (crops at the right and bottom); Pillow's decoded pixels check it end to end in test_exact."""
    plane = np.ascontiguousarray(rgb_to_ycbcr(data.coffee())[1][:61:2, :97:2])  # 31 x 49
    for v, height in ((2, 61), (1, 31)):
        np.testing.assert_array_equal(upsample(plane, 2, v, height, 97), _fancy_oracle(plane, v, height, 97))

def test_decoded_luma_equals_the_luma_of_the_decoded_rgb_for_every_sample():
    """The compiled, float32 decoded luma against its definition (libjpeg's fixed-point YCbCr -> RGB,
    then the T.871 luma of that RGB, both in numpy integers) for all 2**24 (Y, Cb, Cr) triples."""
    from dct.color import decoded_luma, luma, ycbcr_to_rgb

    every = np.arange(1 << 24, dtype=np.uint32).reshape(4096, 4096)
    y, cb, cr = ((every >> 16).astype(np.uint8), ((every >> 8) & 255).astype(np.uint8), (every & 255).astype(np.uint8))
    np.testing.assert_array_equal(decoded_luma(y, cb, cr), luma(ycbcr_to_rgb(y, cb, cr)))
