"""Colour conversion against Pillow's JFIF YCbCr conversion (ITU-T T.871)."""

import numpy as np
from PIL import Image
from skimage import data

from dct.color import downsample, rgb_to_ycbcr, upsample, ycbcr_to_rgb


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
    plane = np.full((16, 24), 77.0, np.float32)
    small = downsample(plane, 2, 2)
    assert small.shape == (8, 12) and (small == 77).all()
    assert (upsample(small, 2, 2, 15, 23) == 77).all()
