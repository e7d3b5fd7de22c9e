"""Tests for webapp.heatmap: the SSIM overlay PNG, its colour ramp and the SVG key."""

from __future__ import annotations

import io
import struct
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from PIL import Image
from skimage import data
from skimage.color import lab2rgb, rgb2lab
from skimage.metrics import structural_similarity

from webapp.heatmap import (
    DEFAULT_MAX_ALPHA,
    heat_rgba,
    lab_to_srgb,
    ramp_rgb,
    ssim_heatmap_png,
    ssim_legend_svg,
)

SVG = "{http://www.w3.org/2000/svg}"


def _png_chunks(png: bytes) -> list[bytes]:
    # PNG layout (ISO/IEC 15948, W3C PNG spec section 5): 8-byte signature, then chunks of
    # 4-byte big-endian length, 4-byte type, data, 4-byte CRC.
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    types, pos = [], 8
    while pos < len(png):
        (length,) = struct.unpack(">I", png[pos : pos + 4])
        types.append(png[pos + 4 : pos + 8])
        pos += 12 + length
    return types


def test_alpha_zero_at_one_and_full_at_or_below_low():
    ssim = np.array([[1.0, 0.999, 0.9, 0.75, 0.5, 0.2, -1.0]], dtype=np.float64)
    rgba = heat_rgba(ssim, low=0.5)
    a = rgba[0, :, 3].astype(int)
    assert a[0] == 0
    assert a[4] == a[5] == a[6] == DEFAULT_MAX_ALPHA
    assert 0 <= a[1] < a[2] < a[3] < a[4]  # more damage, more opaque
    # Colour at full strength is the ramp's far end, independent of how far below `low` it is.
    assert (rgba[0, 4, :3] == rgba[0, 6, :3]).all()


def test_alpha_is_monotone_over_the_whole_range():
    ssim = np.linspace(1.0, -1.0, 2001).reshape(1, -1)
    a = heat_rgba(ssim, low=0.3, max_alpha=255)[0, :, 3].astype(int)
    assert (np.diff(a) >= 0).all()
    assert a[0] == 0 and a[-1] == 255


def test_low_changes_where_full_strength_starts():
    ssim = np.array([[0.8]])
    assert heat_rgba(ssim, low=0.8)[0, 0, 3] == DEFAULT_MAX_ALPHA
    assert heat_rgba(ssim, low=0.5)[0, 0, 3] < DEFAULT_MAX_ALPHA


def test_png_decodes_and_matches_the_array():
    rng = np.random.default_rng(7)
    ssim = rng.uniform(0.2, 1.0, size=(37, 53)).astype(np.float32)
    png = ssim_heatmap_png(ssim, low=0.5)
    img = Image.open(io.BytesIO(png))
    assert img.format == "PNG" and img.mode == "RGBA"
    assert img.size == (53, 37)  # Pillow reports (width, height)
    np.testing.assert_array_equal(np.asarray(img), heat_rgba(ssim, low=0.5))


def test_png_without_alpha_is_opaque_rgb():
    ssim = np.linspace(1.0, 0.4, 64).reshape(8, 8)
    img = Image.open(io.BytesIO(ssim_heatmap_png(ssim, alpha=False)))
    assert img.mode == "RGB"
    np.testing.assert_array_equal(np.asarray(img), heat_rgba(ssim)[..., :3])


def test_png_has_no_metadata_chunks():
    png = ssim_heatmap_png(np.full((4, 4), 0.7))
    assert _png_chunks(png) == [b"IHDR", b"IDAT", b"IEND"]
    assert Image.open(io.BytesIO(png)).info == {}


def test_real_ssim_map_from_a_jpeg():
    # Reference pipeline: Pillow/libjpeg at a low quality, scikit-image's SSIM map.
    ref = data.camera()[::2, ::2]
    buf = io.BytesIO()
    Image.fromarray(ref).save(buf, "JPEG", quality=10)
    dec = np.asarray(Image.open(io.BytesIO(buf.getvalue())))
    _, smap = structural_similarity(ref, dec, data_range=255, full=True)
    rgba = np.asarray(Image.open(io.BytesIO(ssim_heatmap_png(smap, low=0.5))))
    worst = np.unravel_index(np.argmin(smap), smap.shape)
    best = np.unravel_index(np.argmax(smap), smap.shape)
    assert rgba[worst][3] > rgba[best][3]
    # Alpha rank-agrees with damage: strongly negative correlation with SSIM.
    assert np.corrcoef(smap.ravel(), rgba[..., 3].ravel())[0, 1] < -0.9


def test_lab_to_srgb_matches_scikit_image():
    rng = np.random.default_rng(3)
    lab = np.stack([rng.uniform(20, 95, 500), rng.uniform(-40, 40, 500), rng.uniform(-40, 60, 500)], -1)
    ref = lab2rgb(lab)  # scikit-image, D65 / 2 degree observer
    in_gamut = (ref > 0.001).all(-1) & (ref < 0.999).all(-1)
    assert in_gamut.sum() > 100
    np.testing.assert_allclose(lab_to_srgb(lab)[in_gamut], ref[in_gamut], atol=1e-4)


def test_ramp_is_perceptually_ordered():
    # Lightness (CIELAB L*, measured with scikit-image) falls strictly from "no damage" to "worst",
    # so the ramp keeps its order in greyscale and for colour-vision deficiencies.
    rgb = ramp_rgb(np.linspace(0.0, 1.0, 33))
    lightness = rgb2lab(rgb[None].astype(np.float64) / 255.0)[0, :, 0]
    assert (np.diff(lightness) < 0).all(), lightness
    # Warm: red channel at least green at least blue along the ramp.
    r, g, b = rgb[:, 0].astype(int), rgb[:, 1].astype(int), rgb[:, 2].astype(int)
    assert (r >= g).all() and (g >= b).all()


@pytest.mark.parametrize(
    "bad, match",
    [
        (np.zeros((2, 2, 3)), "2-D"),
        (np.zeros((0, 4)), "non-empty"),
        (np.array([[0.5, np.nan]]), "NaN"),
        (np.array([[True, False]]), "bool"),
        (np.array([[0, 255]], dtype=np.uint8), "255"),
        ([[0.5, 0.6]], "list"),
    ],
)
def test_bad_maps_are_rejected(bad, match):
    with pytest.raises(ValueError, match=match):
        ssim_heatmap_png(bad)


def test_bad_options_are_rejected():
    ok = np.ones((2, 2))
    with pytest.raises(ValueError, match="1.0"):
        ssim_heatmap_png(ok, low=1.0)
    with pytest.raises(ValueError, match="-2"):
        ssim_heatmap_png(ok, low=-2)
    with pytest.raises(ValueError, match="'yes'"):
        ssim_heatmap_png(ok, alpha="yes")
    with pytest.raises(ValueError, match="300"):
        heat_rgba(ok, max_alpha=300)


def test_rounding_slightly_above_one_is_tolerated():
    rgba = heat_rgba(np.array([[1.0 + 1e-7, 1.0]]))
    assert (rgba[..., 3] == 0).all()


def test_legend_svg():
    svg = ssim_legend_svg(0.6)
    root = ET.fromstring(svg)
    assert root.tag == SVG + "svg" and root.get("viewBox") and root.get("role") == "img"
    assert "0.60" in root.get("aria-label")
    assert root.find(SVG + "title") is not None
    for el in root.iter():
        assert "id" not in el.attrib
        assert el.tag not in (SVG + "script", SVG + "style", SVG + "image")
    ticks = [el for el in root.iter(SVG + "text") if el.get("class") == "hm-key-tick"]
    assert [t.text for t in ticks] == ["1.00", "0.80", "\u2264 0.60"]
    assert [float(t.get("x")) for t in ticks] == sorted(float(t.get("x")) for t in ticks)
    bar = next(el for el in root.iter(SVG + "g") if el.get("class") == "hm-key-bar")
    opacities = [float(r.get("fill-opacity")) for r in bar]
    assert len(opacities) == 40
    assert opacities == sorted(opacities) and opacities[0] < 0.2 and opacities[-1] > 0.8
    with pytest.raises(ValueError, match="1.5"):
        ssim_legend_svg(1.5)


def test_high_moves_where_the_overlay_starts_and_the_key_follows():
    ssim = np.array([[1.0, 0.85, 0.8, 0.7, 0.6]])
    rgba = heat_rgba(ssim, low=0.6, high=0.8)
    assert rgba[0, 0, 3] == 0 and rgba[0, 1, 3] == 0 and rgba[0, 2, 3] == 0  # clear at and above high
    assert 0 < rgba[0, 3, 3] < rgba[0, 4, 3] == DEFAULT_MAX_ALPHA
    svg = ssim_legend_svg(0.6, high=0.8)
    assert "\u2265 0.80" in svg and "0.70" in svg and "\u2264 0.60" in svg
    assert "clear at SSIM 0.80 or higher" in svg
    with pytest.raises(ValueError, match="high must be"):
        heat_rgba(ssim, low=0.6, high=0.6)
