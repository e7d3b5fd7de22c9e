"""libjpeg's integer DCT (dct.integer_dct) against the definition C X C^T and scipy.fft.

The exact equality with libjpeg itself (coefficients read back with jpeglib, pixels decoded by Pillow)
is in tests/test_exact.py; here we bound how far the integer path strays from the orthonormal DCT.
"""

import numpy as np
import pytest
from scipy.fft import dctn, idctn

from dct.integer_dct import forward_dct_islow, inverse_dct_islow, inverse_dct_islow_plane, pass_matrix
from dct.transform import dct_matrix


def test_pass_matrices_approximate_the_scaled_dct():
    # Each 1-D pass is sqrt(8) times the orthonormal DCT (so two passes give the factor 8 libjpeg's
    # quantizer expects), held to 13 fractional bits: entries within the constants' rounding.
    c = dct_matrix(8) * np.sqrt(8.0) * 2**13
    assert np.abs(pass_matrix("forward") - c).max() <= 4
    assert np.abs(pass_matrix("inverse") - c.T).max() <= 4


def test_forward_within_one_step_of_eight_times_scipy():
    # scipy.fft.dctn(type=2, norm="ortho") is C X C^T; libjpeg's output is 8x that, rounded per pass.
    rng = np.random.default_rng(3)
    blocks = rng.integers(-128, 128, (2000, 8, 8))
    ours = forward_dct_islow(blocks)
    reference = 8 * dctn(blocks.astype(np.float64), type=2, norm="ortho", axes=(1, 2))
    err = np.abs(ours - reference)
    assert err.max() <= 2.0  # measured 1.4 on these blocks: one rounding per pass plus the constants
    assert err.mean() < 0.5


def test_flat_block_is_exact():
    # A flat block has only a DC term: 8 * 8 * mean on libjpeg's scale, with no rounding at all.
    block = np.full((1, 8, 8), 37 - 128)
    out = forward_dct_islow(block)
    assert out[0, 0, 0] == 8 * 8 * (37 - 128) and not out[0].ravel()[1:].any()


def test_inverse_within_one_level_of_scipy():
    # Dequantized coefficients (quantized value times table entry: the orthonormal scale) -> pixels:
    # scipy's orthonormal inverse plus 128, rounded and clamped, differs from libjpeg's by at most one.
    rng = np.random.default_rng(4)
    coef = np.zeros((2000, 8, 8), np.int64)
    coef[:, :4, :4] = rng.integers(-60, 61, (2000, 4, 4))
    ours = inverse_dct_islow(coef).astype(int)
    reference = np.clip(np.rint(idctn(coef.astype(np.float64), type=2, norm="ortho", axes=(1, 2)) + 128), 0, 255)
    assert np.abs(ours - reference).max() <= 1


@pytest.mark.parametrize("value", [0, 255])
def test_inverse_clamps(value):
    coef = np.zeros((1, 8, 8), np.int64)
    coef[0, 0, 0] = 8 * (2000 if value else -2000)
    assert (inverse_dct_islow(coef) == value).all()


def test_compiled_plane_decoder_equals_the_matrix_form():
    """The compiled decoder (zigzag in, per-column shortcut, cropped plane out) against the matrix
    form above on the same blocks: dense, sparse, zero-AC columns and clamped ones, cropped at an
    odd size."""
    from dct.tables import ZIGZAG, quant_tables

    rng = np.random.default_rng(12)
    nby, nbx = 7, 9
    natural = rng.integers(-50, 51, (nby, nbx, 8, 8))
    natural[0] = 0
    natural[1, :, 1:, :] = 0  # every column's AC is zero: the shortcut
    natural[2, :, :, ::2] *= rng.random((nbx, 8, 4)) < 0.2  # some columns sparse
    natural[3, :, 0, 0] = 1000  # clamps high
    natural[4, :, 0, 0] = -1000  # clamps low
    table = quant_tables(35)[0]
    quantized = natural.reshape(nby, nbx, 64)[..., ZIGZAG].astype(np.int16)
    rows, cols = 8 * nby - 3, 8 * nbx - 5
    plane = inverse_dct_islow_plane(quantized, table, rows, cols)
    blocks = inverse_dct_islow((natural * table).reshape(-1, 8, 8))
    whole = blocks.reshape(nby, nbx, 8, 8).transpose(0, 2, 1, 3).reshape(8 * nby, 8 * nbx)
    np.testing.assert_array_equal(plane, whole[:rows, :cols])
