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


def _matrix_form_plane(natural, table, rows, cols):
    nby, nbx = natural.shape[:2]
    blocks = inverse_dct_islow((natural * table).reshape(-1, 8, 8))
    return blocks.reshape(nby, nbx, 8, 8).transpose(0, 2, 1, 3).reshape(8 * nby, 8 * nbx)[:rows, :cols]


def test_compiled_plane_decoder_equals_the_matrix_form():
    """The compiled decoder (zigzag in, 32-bit lanes, cropped plane out) against the matrix form
    above on the same blocks: dense, sparse, zero-AC columns and clamped ones, and coefficients at
    the 32-bit lanes' limit with every sign pattern the rows and columns can take, cropped at an
    odd size. It must take its compiled path on all of them."""
    from dct.integer_dct import LANE_SAFE_COEFFICIENT, _decode_blocks
    from dct.tables import UNZIGZAG, ZIGZAG, quant_tables

    rng = np.random.default_rng(12)
    nby, nbx = 12, 9
    table = quant_tables(35)[0]
    limit = LANE_SAFE_COEFFICIENT // table  # per position: |q * Q| stays within the limit
    natural = rng.integers(-3, 4, (nby, nbx, 8, 8))
    natural[0] = 0
    natural[1, :, 1:, :] = 0  # every column's AC is zero
    natural[2, :, :, ::2] *= rng.random((nbx, 8, 4)) < 0.2  # some columns sparse
    natural[3, :, 0, 0] = limit[0, 0]  # clamps high
    natural[4, :, 0, 0] = -limit[0, 0]  # clamps low
    signs = rng.choice([-1, 1], (3, nbx, 8, 8))
    natural[5:8] = signs * limit  # every coefficient at its limit, random signs
    natural[5, 0] = limit * np.sign(np.cos(np.arange(8) * np.pi * 3 / 16))[:, None]  # aligned with a basis
    # The shortcuts for zeros throughout a block row: the last four rows, the last four columns,
    # both, and all but one column.
    natural[8, :, 4:, :] = 0
    natural[9, :, :, 4:] = 0
    natural[10, :, 4:, :] = natural[10, :, :, 4:] = 0
    natural[11, :, :, [0, 1, 2, 4, 5, 6, 7]] = 0
    quantized = natural.reshape(nby, nbx, 64)[..., ZIGZAG].astype(np.int16)
    rows, cols = 8 * nby - 3, 8 * nbx - 5
    plane = inverse_dct_islow_plane(quantized, table, rows, cols)
    np.testing.assert_array_equal(plane, _matrix_form_plane(natural, table, rows, cols))
    samples = np.empty((8, 8 * nbx), np.uint8)
    assert _decode_blocks(quantized, table.reshape(64).astype(np.int32), UNZIGZAG.astype(np.int64),
                          np.empty((rows, cols), np.uint8), samples.view(np.uint64), samples)


def test_decoder_beyond_the_lane_limit_takes_the_matrix_form():
    """Coefficients no quantizer of 8-bit samples makes (here up to 50 x 255) still decode exactly."""
    from dct.tables import ZIGZAG, quant_tables

    rng = np.random.default_rng(13)
    natural = rng.integers(-50, 51, (3, 4, 8, 8))
    table = quant_tables(35)[0]
    quantized = natural.reshape(3, 4, 64)[..., ZIGZAG].astype(np.int16)
    plane = inverse_dct_islow_plane(quantized, table, 21, 30)
    np.testing.assert_array_equal(plane, _matrix_form_plane(natural, table, 21, 30))


def test_lane_limit_keeps_every_intermediate_within_32_bits():
    """The bound the 32-bit passes rely on, recomputed: run the inverse butterfly on linear forms
    (one weight per input) and take the largest L1 norm of any intermediate; with every input within
    LANE_SAFE_COEFFICIENT, both passes (the second on the first's rounded output) stay below 2**31,
    rounding constants included. And the limit covers what a quantizer of 8-bit samples can give:
    a coefficient of at most 1024 on the orthonormal scale (DC of a block of -128s) moved by at most
    half of the largest table entry."""
    from dct import integer_dct

    peak = [0]

    class Form:
        def __init__(self, w):
            self.w = np.asarray(w, dtype=np.int64)

        def _new(self, w):
            peak[0] = max(peak[0], int(np.abs(w).sum()))
            return Form(w)

        def __add__(self, other):
            return self._new(self.w + other.w)

        def __sub__(self, other):
            return self._new(self.w - other.w)

        def __mul__(self, k):
            return self._new(self.w * int(k))

        def __lshift__(self, k):
            return self._new(self.w << int(k))

    # The compiled butterflies' plain Python, with the 32-bit wrap made the identity for forms.
    odd = integer_dct._odd_rotations.py_func
    inverse = integer_dct._inverse_butterfly.py_func
    names = {"_i32": lambda x: x, "_odd_rotations": odd}
    saved = {k: inverse.__globals__[k] for k in names}
    inverse.__globals__.update(names)
    try:
        outputs = inverse(*[Form(np.eye(8, dtype=np.int64)[i]) for i in range(8)])
    finally:
        inverse.__globals__.update(saved)
    gain = peak[0]  # the largest |intermediate| per unit of input magnitude
    assert gain == max(int(np.abs(o.w).sum()) for o in outputs)  # the outputs are the largest
    first = gain * integer_dct.LANE_SAFE_COEFFICIENT + (1 << 10)
    workspace = first >> (integer_dct.CONST_BITS - integer_dct.PASS1_BITS)
    second = gain * workspace + (1 << 17)
    assert first < 2**31 and second < 2**31
    assert 1024 + 255 / 2 <= integer_dct.LANE_SAFE_COEFFICIENT
