"""The 8x8 DCT-II against a textbook double sum and scipy.fft."""

import numpy as np
import pytest
import scipy.fft

from dct import dct_matrix
from dct.transform import forward_dct_blocks, forward_dct_plane, inverse_dct_blocks, inverse_dct_stack
from dct.tables import ZIGZAG


def textbook_dct2(block):
    """2-D DCT-II by the double sum (e.g. ITU-T T.81 A.3.3, normalized): a_0 = 1/sqrt(2), a_k = 1."""
    n = block.shape[0]
    out = np.zeros((n, n))
    for u in range(n):
        for v in range(n):
            au = 1 / np.sqrt(2) if u == 0 else 1.0
            av = 1 / np.sqrt(2) if v == 0 else 1.0
            s = 0.0
            for x in range(n):
                for y in range(n):
                    s += block[x, y] * np.cos((2 * x + 1) * u * np.pi / (2 * n)) * np.cos((2 * y + 1) * v * np.pi / (2 * n))
            out[u, v] = 2 / n * au * av * s
    return out


def test_matrix_is_orthonormal():
    c = dct_matrix(8)
    np.testing.assert_allclose(c @ c.T, np.eye(8), atol=1e-12)


def test_matrix_equals_scipy_dct_basis():
    # scipy.fft.dct(type=2, norm="ortho") of the identity gives the transform matrix's columns.
    np.testing.assert_allclose(dct_matrix(8), scipy.fft.dct(np.eye(8), type=2, norm="ortho", axis=0), atol=1e-12)


def test_forward_matches_textbook_and_scipy():
    rng = np.random.default_rng(2)
    block = rng.integers(-128, 128, (8, 8)).astype(float)
    ours = forward_dct_blocks(block)
    np.testing.assert_allclose(ours, textbook_dct2(block), atol=1e-9)
    np.testing.assert_allclose(ours, scipy.fft.dctn(block, type=2, norm="ortho"), atol=1e-9)


def test_inverse_recovers_block():
    rng = np.random.default_rng(3)
    blocks = rng.normal(size=(5, 8, 8))
    np.testing.assert_allclose(inverse_dct_stack(forward_dct_blocks(blocks)), blocks, atol=1e-12)


def test_plane_transform_is_blockwise_scipy():
    # The fast plane path (one GEMM with the Kronecker matrix) equals scipy.fft.dctn on every block.
    rng = np.random.default_rng(4)
    plane = rng.integers(-128, 128, (24, 40)).astype(np.float32)
    coeffs = forward_dct_plane(plane)
    for by in range(3):
        for bx in range(5):
            ref = scipy.fft.dctn(plane[8 * by : 8 * by + 8, 8 * bx : 8 * bx + 8].astype(float), norm="ortho")
            np.testing.assert_allclose(coeffs[by, bx].reshape(8, 8), ref, atol=2e-3)  # float32 tolerance


def test_plane_round_trip_with_zigzag_order():
    rng = np.random.default_rng(5)
    plane = rng.integers(-128, 128, (16, 16)).astype(np.float32)
    order = tuple(int(i) for i in ZIGZAG)
    coeffs = forward_dct_plane(plane, order=order)
    natural = forward_dct_plane(plane)
    np.testing.assert_allclose(coeffs, natural[..., ZIGZAG], atol=1e-4)
    np.testing.assert_allclose(inverse_dct_blocks(coeffs, order=order), plane, atol=2e-3)


def test_bad_n():
    with pytest.raises(ValueError, match="n must be a positive integer, got 0"):
        dct_matrix(0)
    with pytest.raises(ValueError, match="plane sides must be multiples of 8"):
        forward_dct_plane(np.zeros((9, 8), np.float32))
