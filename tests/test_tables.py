"""Quantization tables against ITU-T T.81 Annex K, the IJG scaling rule, and Pillow/libjpeg."""

import io

import numpy as np
import pytest
from PIL import Image

import dct
from dct.tables import ANNEX_K_CHROMA, ANNEX_K_LUMA, ZIGZAG, Setting, check_table, quality_scale


def test_quality_50_reproduces_annex_k():
    # ITU-T T.81 Annex K: IJG quality 50 is scale 100 %, i.e. Tables K.1 and K.2 unchanged.
    luma, chroma = dct.quant_tables(50)
    assert np.array_equal(luma, ANNEX_K_LUMA)
    assert np.array_equal(chroma, ANNEX_K_CHROMA)


def test_annex_k_spot_values():
    # Values from ITU-T T.81 Table K.1 / K.2 (first row and the bottom-right corner), from the standard.
    assert ANNEX_K_LUMA[0].tolist() == [16, 11, 10, 16, 24, 40, 51, 61]
    assert ANNEX_K_LUMA[7, 7] == 99
    assert ANNEX_K_CHROMA[0].tolist() == [17, 18, 24, 47, 99, 99, 99, 99]


def test_quality_100_is_all_ones():
    # IJG libjpeg documentation (usage.txt / jcparam.c): quality 100 gives a scale of 0 -> all ones.
    luma, chroma = dct.quant_tables(100)
    assert (luma == 1).all() and (chroma == 1).all()


@pytest.mark.parametrize("q, scale", [(1, 5000), (10, 500), (25, 200), (49, 102), (50, 100), (75, 50), (95, 10)])
def test_ijg_scaling_percentages(q, scale):
    # IJG jpeg_quality_scaling: q < 50 -> 5000 / q, else 200 - 2q.
    assert quality_scale(q) == scale


def test_baseline_clamp():
    # force_baseline: entries clamp to 255 (IJG jpeg_add_quant_table).
    luma, chroma = dct.quant_tables(1)
    assert luma.max() == 255 and chroma.max() == 255 and luma.min() >= 1


def test_zigzag_matches_t81_figure_a6():
    # ITU-T T.81 Figure A.6: the zigzag sequence starts 0, 1, 8, 16, 9, 2, 3, 10, 17, 24, 32, 25 ...
    assert ZIGZAG[:12].tolist() == [0, 1, 8, 16, 9, 2, 3, 10, 17, 24, 32, 25]
    assert ZIGZAG[-1] == 63 and sorted(ZIGZAG.tolist()) == list(range(64))


def test_cutoff_sets_high_frequencies_to_255():
    luma, chroma = dct.quant_tables(75, cutoff=10)
    for table, full in ((luma, dct.quant_tables(75)[0]), (chroma, dct.quant_tables(75)[1])):
        zz = table.ravel()[ZIGZAG]
        assert (zz[10:] == 255).all()
        assert np.array_equal(zz[:10], full.ravel()[ZIGZAG][:10])


@pytest.mark.parametrize("q", [5, 20, 50, 75, 85, 95, 100])
def test_tables_equal_what_pillow_writes(q):
    # Pillow's libjpeg writes jpeg_set_quality(q) tables; Image.quantization reads them back in natural order.
    buf = io.BytesIO()
    Image.fromarray(np.full((16, 16, 3), 128, np.uint8)).save(buf, "JPEG", quality=q)
    qt = Image.open(io.BytesIO(buf.getvalue())).quantization
    luma, chroma = dct.quant_tables(q)
    assert np.array_equal(np.array(qt[0]).reshape(8, 8), luma)
    assert np.array_equal(np.array(qt[1]).reshape(8, 8), chroma)


@pytest.mark.parametrize(
    "kwargs, message",
    [
        (dict(quality=0), "quality must be an integer in 1..100, got 0"),
        (dict(quality=101), "quality must be an integer in 1..100, got 101"),
        (dict(quality=50.5), "quality must be an integer in 1..100, got 50.5"),
        (dict(quality=True), "quality must be an integer in 1..100, got True"),
        (dict(quality=50, cutoff=0), "cutoff must be an integer zigzag position in 1..64, got 0"),
        (dict(quality=50, cutoff=65), "cutoff must be an integer zigzag position in 1..64, got 65"),
    ],
)
def test_bad_parameters(kwargs, message):
    with pytest.raises(ValueError, match=message.replace(".", r"\.")):
        dct.quant_tables(**kwargs)


def test_bad_subsampling_and_tables():
    with pytest.raises(ValueError, match="subsampling must be one of 4:4:4, 4:2:2, 4:2:0, got '4:1:1'"):
        Setting(75, 64, "4:1:1")
    with pytest.raises(ValueError, match="must be 8x8"):
        check_table(np.ones((4, 4)))
    with pytest.raises(ValueError, match="entries must be in 1..255"):
        check_table(np.zeros((8, 8), int))
