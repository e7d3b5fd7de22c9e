"""The orthonormal 8x8 DCT-II, batched over every block of a plane.

For an N x N block X the forward transform is ``Y = C X C^T`` and the inverse is ``X = C^T Y C``, where

.. math::

    C_{k n} = a_k \\sqrt{2/N} \\cos\\left(\\frac{(2n + 1) k \\pi}{2N}\\right),
    \\qquad a_0 = 1/\\sqrt{2},\\ a_k = 1 \\text{ otherwise}.

C is orthonormal (``C C^T = I``), so this is the same transform as ``scipy.fft.dctn(X, type=2,
norm="ortho")``. It also equals ITU-T T.81 A.3.3's FDCT, whose output libjpeg scales by 8.

Over a whole plane, each block's row-major vector transforms as ``vec(C X C^T) = (C ⊗ C) vec(X)``,
so all blocks go through one matrix product with the 64 x 64 Kronecker matrix: a single BLAS call
for the plane, with no Python loop per block.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

BLOCK = 8


def dct_matrix(n: int = 8) -> np.ndarray:
    """The orthonormal DCT-II matrix C, shape (n, n), float64 (see the module docstring)."""
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
        raise ValueError(f"n must be a positive integer, got {n!r}")
    k = np.arange(n)[:, None]
    i = np.arange(n)[None, :]
    c = np.sqrt(2.0 / n) * np.cos((2 * i + 1) * k * np.pi / (2 * n))
    c[0, :] /= np.sqrt(2.0)
    return c


@lru_cache(maxsize=None)
def _kron_matrices(order: tuple[int, ...] | None) -> tuple[np.ndarray, np.ndarray]:
    """Forward and inverse 64x64 matrices, optionally with output coefficients permuted by ``order``."""
    c = dct_matrix(BLOCK)
    k = np.kron(c, c)  # vec(C X C^T) = K vec(X) for row-major vec
    if order is not None:
        k = k[list(order), :]
    forward = np.ascontiguousarray(k.T, dtype=np.float32)  # rows of blocks @ K^T
    inverse = np.ascontiguousarray(k, dtype=np.float32)  # K is orthogonal: inverse is K^T, so rows @ K
    return forward, inverse


def plane_to_blocks(plane: np.ndarray) -> np.ndarray:
    """Split a plane whose sides are multiples of 8 into row-major blocks.

    Parameters
    ----------
    plane : ndarray, shape (H, W)

    Returns
    -------
    blocks : ndarray, shape (H//8, W//8, 64), float32
        Block (by, bx) holds ``plane[8*by:8*by+8, 8*bx:8*bx+8]`` in row-major order.
    """
    h, w = plane.shape
    if h % BLOCK or w % BLOCK:
        raise ValueError(f"plane sides must be multiples of 8, got shape {plane.shape!r}")
    nby, nbx = h // BLOCK, w // BLOCK
    b = plane.reshape(nby, BLOCK, nbx, BLOCK).transpose(0, 2, 1, 3)
    return np.ascontiguousarray(b, dtype=np.float32).reshape(nby, nbx, BLOCK * BLOCK)


def blocks_to_plane(blocks: np.ndarray) -> np.ndarray:
    """Inverse of :func:`plane_to_blocks`: (nby, nbx, 64) -> (8*nby, 8*nbx)."""
    nby, nbx, _ = blocks.shape
    b = blocks.reshape(nby, nbx, BLOCK, BLOCK).transpose(0, 2, 1, 3)
    return b.reshape(nby * BLOCK, nbx * BLOCK)


def forward_dct_plane(plane: np.ndarray, *, order: tuple[int, ...] | None = None) -> np.ndarray:
    """Forward DCT of every 8x8 block of a level-shifted plane.

    Parameters
    ----------
    plane : ndarray, shape (H, W), sides multiples of 8
        Samples already level-shifted (minus 128).
    order : tuple of int, optional
        Permutation of the 64 outputs (for example the zigzag order); natural row-major if None.

    Returns
    -------
    coefficients : ndarray, shape (H//8, W//8, 64), float32
    """
    forward, _ = _kron_matrices(order)
    blocks = plane_to_blocks(plane)
    return (blocks.reshape(-1, 64) @ forward).reshape(blocks.shape)


def inverse_dct_blocks(coefficients: np.ndarray, *, order: tuple[int, ...] | None = None) -> np.ndarray:
    """Inverse DCT of (nby, nbx, 64) coefficients (in ``order``) back to a (8*nby, 8*nbx) plane, float32."""
    _, inverse = _kron_matrices(order)
    nby, nbx, _ = coefficients.shape
    flat = coefficients.reshape(-1, 64).astype(np.float32, copy=False) @ inverse
    return blocks_to_plane(flat.reshape(nby, nbx, 64))


def forward_dct_blocks(blocks: np.ndarray) -> np.ndarray:
    """``C X C^T`` for a stack of blocks, shape (..., 8, 8), float64. The plain definition, for checking."""
    c = dct_matrix(BLOCK)
    return c @ np.asarray(blocks, dtype=np.float64) @ c.T


def inverse_dct_stack(coefficients: np.ndarray) -> np.ndarray:
    """``C^T Y C`` for a stack of coefficient blocks, shape (..., 8, 8), float64."""
    c = dct_matrix(BLOCK)
    return c.T @ np.asarray(coefficients, dtype=np.float64) @ c
