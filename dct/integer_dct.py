"""libjpeg's accurate integer DCT ("islow"), forward and inverse, vectorized over every block.

What this emulates
------------------
libjpeg-turbo's default DCT method, ``JDCT_ISLOW`` (``jfdctint.c`` for the encoder, ``jidctint.c`` for
the decoder), which is what Pillow uses when it writes and reads a JPEG. The algorithm is the 1-D DCT
factorisation of Loeffler, Ligtenberg and Moschytz ("Practical fast 1-D DCT algorithms with 11
multiplications", ICASSP 1989), applied to the rows and then the columns of each 8x8 block, with its
twelve irrational constants held as 13-bit fixed-point integers (``FIX(x) = round(x * 2**13)``; for
example ``FIX(0.541196100) = 4433``, sqrt(2) * c6).

Why a matrix and not the butterflies
------------------------------------
Inside one 1-D pass libjpeg only adds, subtracts and multiplies integers by those constants; it rounds
once, at the end of the pass (``DESCALE(x, n) = (x + 2**(n-1)) >> n``, an arithmetic shift, so
half-way cases round up). So each pass is an exact integer 8x8 matrix followed by one rounding shift.
We build that matrix by running the butterflies on the unit vectors (:func:`_forward_butterfly`,
:func:`_inverse_butterfly`, written from the factorisation) and then apply it to every block of a plane
with one float64 matrix product per pass. float64 holds every intermediate exactly: the constants'
sums stay below 2**16, inputs below 2**20 (a dequantized coefficient is at most 2**11 * 255), so each
dot product of 8 terms stays below 2**40 < 2**53, and the power-of-two rounding shift is exact too.

The decoder that sweeps run for every setting (:func:`inverse_dct_islow_plane`) is the butterflies
themselves, compiled (``dct.jit``) and run a block row at a time, both passes across the whole row
of blocks at once: the same integers and the same two roundings, without the matrix products'
temporaries. tests/test_integer_dct.py holds it equal to the matrix form. (The matrix builder below
runs the same compiled butterflies on each unit input.)

Integer width
-------------
The compiled passes wrap every step to 32 bits, which lets the compiler use 32-bit vector lanes
(as libjpeg-turbo's SIMD code does). That is exact while every dequantized coefficient is within
+-1152 (:data:`LANE_SAFE_COEFFICIENT`): bounding each intermediate of both passes by the L1 norm of
its weights gives at most 2**30.98 then. A quantizer of 8-bit samples never exceeds it (a
coefficient of such a block is at most 1024 on the orthonormal scale, and quantization moves it by
at most half a table entry, 127.5). The compiled decoder checks the bound as it dequantizes and
hands any other input to the matrix form. tests/test_integer_dct.py recomputes the bound.

Scaling
-------
* Forward: rows produce ``sqrt(8) * 2**2`` times the orthonormal DCT of each row (``PASS1_BITS = 2``
  extra bits of precision), columns remove the 2 bits again and leave the factor 8 that libjpeg's
  quantizer expects: the output is ``8 * (C X C^T)`` rounded, where ``C`` is :func:`dct.dct_matrix`.
  The DC and the (4) outputs are exact sums shifted by 2 bits, which we fold into the same matrix by
  scaling those rows by ``2**13`` so that one rounding shift serves all eight outputs.
* Inverse: input is dequantized coefficients (quantized value times table entry), which are back
  on the orthonormal scale since the quantizer divided by ``8 * Q``. Each pass multiplies by
  ``sqrt(8)`` again; the column pass keeps ``PASS1_BITS`` extra bits (shift by ``13 - 2``), the row
  pass removes them, the factor 8 and the constants' 13 bits (shift by ``13 + 2 + 3``). Then +128 and clamping to
  0..255. libjpeg's C code masks out-of-range values through a table, its SIMD code (what x86 builds
  run) saturates; we saturate, which agrees on every value a real quantizer can produce.

Checked against: the quantized coefficients libjpeg writes (read back with ``jpeglib``) and the pixels
Pillow decodes (tests/test_exact.py); and against the definition ``C X C^T`` within rounding
(tests/test_integer_dct.py).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from .jit import kernel
from .tables import UNZIGZAG

CONST_BITS = 13
PASS1_BITS = 2
LANE_SAFE_COEFFICIENT = 1152  # dequantized magnitudes up to this keep the 32-bit passes exact


def _fix(x: float) -> int:
    return int(x * (1 << CONST_BITS) + 0.5)


# The LL&M constants, as libjpeg names their roles (sqrt(2) times cosine combinations).
FIX_0_298631336 = _fix(0.298631336)  # sqrt(2) * (-c1 + c3 + c5 - c7)
FIX_0_390180644 = _fix(0.390180644)  # sqrt(2) * (c5 - c3)
FIX_0_541196100 = _fix(0.541196100)  # sqrt(2) * c6
FIX_0_765366865 = _fix(0.765366865)  # sqrt(2) * (c2 - c6)
FIX_0_899976223 = _fix(0.899976223)  # sqrt(2) * (c7 - c3)
FIX_1_175875602 = _fix(1.175875602)  # sqrt(2) * c3
FIX_1_501321110 = _fix(1.501321110)  # sqrt(2) * (c1 + c3 - c5 - c7)
FIX_1_847759065 = _fix(1.847759065)  # sqrt(2) * (-c2 - c6)
FIX_1_961570560 = _fix(1.961570560)  # sqrt(2) * (-c3 - c5)
FIX_2_053119869 = _fix(2.053119869)  # sqrt(2) * (c1 + c3 - c5 + c7)
FIX_2_562915447 = _fix(2.562915447)  # sqrt(2) * (-c1 - c3)
FIX_3_072711026 = _fix(3.072711026)  # sqrt(2) * (c1 + c3 + c5 - c7)


_i32 = np.int32  # every step of the compiled passes wraps to 32 bits (see "Integer width" above)


@kernel
def _odd_rotations(t4, t5, t6, t7):
    """The odd half of the LL&M flow graph (its figure 8): four inputs, four outputs, 12 products."""
    z1, z2, z3, z4 = _i32(t4 + t7), _i32(t5 + t6), _i32(t4 + t6), _i32(t5 + t7)
    z5 = _i32(_i32(z3 + z4) * FIX_1_175875602)
    t4 = _i32(t4 * FIX_0_298631336)
    t5 = _i32(t5 * FIX_2_053119869)
    t6 = _i32(t6 * FIX_3_072711026)
    t7 = _i32(t7 * FIX_1_501321110)
    z1 = _i32(z1 * -FIX_0_899976223)
    z2 = _i32(z2 * -FIX_2_562915447)
    z3 = _i32(_i32(z3 * -FIX_1_961570560) + z5)
    z4 = _i32(_i32(z4 * -FIX_0_390180644) + z5)
    return (_i32(_i32(t4 + z1) + z3), _i32(_i32(t5 + z2) + z4), _i32(_i32(t6 + z2) + z3),
            _i32(_i32(t7 + z1) + z4))


def _forward_butterfly(x):
    """One forward 1-D pass before rounding: 8 inputs -> 8 outputs on the 2**13 scale (exact ints)."""
    t0, t7 = x[0] + x[7], x[0] - x[7]
    t1, t6 = x[1] + x[6], x[1] - x[6]
    t2, t5 = x[2] + x[5], x[2] - x[5]
    t3, t4 = x[3] + x[4], x[3] - x[4]
    t10, t13 = t0 + t3, t0 - t3
    t11, t12 = t1 + t2, t1 - t2
    z1 = (t12 + t13) * FIX_0_541196100
    out = [None] * 8
    out[0] = (t10 + t11) << CONST_BITS  # exact; scaled up so one rounding shift serves every output
    out[4] = (t10 - t11) << CONST_BITS
    out[2] = z1 + t13 * FIX_0_765366865
    out[6] = z1 - t12 * FIX_1_847759065
    out[7], out[5], out[3], out[1] = _odd_rotations(t4, t5, t6, t7)
    return out


@kernel
def _inverse_butterfly(y0, y1, y2, y3, y4, y5, y6, y7):
    """One inverse 1-D pass before rounding: the transpose flow of the forward pass (exact ints)."""
    z1 = _i32(_i32(y2 + y6) * FIX_0_541196100)
    t2 = _i32(z1 - _i32(y6 * FIX_1_847759065))
    t3 = _i32(z1 + _i32(y2 * FIX_0_765366865))
    t0 = _i32(_i32(y0 + y4) << CONST_BITS)
    t1 = _i32(_i32(y0 - y4) << CONST_BITS)
    t10, t13 = _i32(t0 + t3), _i32(t0 - t3)
    t11, t12 = _i32(t1 + t2), _i32(t1 - t2)
    o0, o1, o2, o3 = _odd_rotations(y7, y5, y3, y1)
    return (_i32(t10 + o3), _i32(t11 + o2), _i32(t12 + o1), _i32(t13 + o0),
            _i32(t13 - o0), _i32(t12 - o1), _i32(t11 - o2), _i32(t10 - o3))


@lru_cache(maxsize=None)
def pass_matrix(kind: str) -> np.ndarray:
    """The exact integer 8x8 matrix of one 1-D pass (``"forward"`` or ``"inverse"``), as float64.

    Row k holds the weights of output k before the pass's rounding shift: the butterflies run on
    each unit input, whose outputs are one column.
    """
    columns = []
    for i in range(8):
        unit = [0] * 8
        unit[i] = 1
        columns.append(_forward_butterfly(unit) if kind == "forward" else _inverse_butterfly(*unit))
    return np.array(columns, dtype=np.float64).T


CHUNK_BLOCKS = 1 << 15  # blocks per matrix product: 16 MiB of float64 per temporary


def _descale(x: np.ndarray, bits: int) -> np.ndarray:
    """libjpeg's DESCALE on exact integers held in float64: floor((x + 2**(bits-1)) / 2**bits)."""
    x += float(1 << (bits - 1))
    x *= 1.0 / (1 << bits)
    return np.floor(x, out=x)


def forward_dct_islow(blocks: np.ndarray) -> np.ndarray:
    """libjpeg's accurate integer forward DCT of level-shifted 8x8 blocks.

    Parameters
    ----------
    blocks : ndarray, shape (..., 8, 8), integer values in -128..127
        Samples minus 128 (``GETJSAMPLE(x) - CENTERJSAMPLE``), row-major within each block.

    Returns
    -------
    ndarray, shape (..., 8, 8), int32
        8 times the orthonormal DCT of each block, rounded as libjpeg rounds it (natural order).
    """
    m = pass_matrix("forward")
    blocks = np.asarray(blocks)
    flat = blocks.reshape(-1, 8, 8)
    out = np.empty(flat.shape, dtype=np.int32)
    for s in range(0, flat.shape[0], CHUNK_BLOCKS):  # bounded float64 temporaries on large images
        x = flat[s : s + CHUNK_BLOCKS].astype(np.float64)
        rows = _descale(x @ m.T, CONST_BITS - PASS1_BITS)  # each row of each block
        out[s : s + CHUNK_BLOCKS] = _descale(m @ rows, CONST_BITS + PASS1_BITS)  # then each column
    return out.reshape(blocks.shape)


def inverse_dct_islow(coefficients: np.ndarray) -> np.ndarray:
    """libjpeg's accurate integer inverse DCT, with the +128 level shift and clamping to 0..255.

    Parameters
    ----------
    coefficients : ndarray, shape (N, 8, 8), integer
        Dequantized coefficients (quantized value times the table entry), natural order: the
        orthonormal scale.

    Returns
    -------
    ndarray, shape (N, 8, 8), uint8
    """
    coefficients = np.asarray(coefficients)
    if coefficients.shape[0] > CHUNK_BLOCKS:  # bounded float64 temporaries on large images
        return np.concatenate([inverse_dct_islow(coefficients[s : s + CHUNK_BLOCKS])
                               for s in range(0, coefficients.shape[0], CHUNK_BLOCKS)])
    coefficients = coefficients.transpose(0, 2, 1)  # [block, column, row]: the first pass's layout
    m = pass_matrix("inverse")
    n = coefficients.shape[0]
    # Column pass: every column of every block (a row of the transposed block) through M.
    cols = np.asarray(coefficients, dtype=np.float64).reshape(n * 8, 8) @ m.T  # [block, column, row]
    cols = _descale(cols, CONST_BITS - PASS1_BITS)
    # Row pass: every row of every block through M (one transposing copy in between).
    work = np.ascontiguousarray(cols.reshape(n, 8, 8).transpose(0, 2, 1)).reshape(n * 8, 8)
    out = work @ m.T
    out = _descale(out, CONST_BITS + PASS1_BITS + 3)
    out += 128.0
    np.clip(out, 0.0, 255.0, out=out)
    return out.astype(np.uint8).reshape(n, 8, 8)


def inverse_dct_islow_plane(quantized: np.ndarray, table: np.ndarray, rows: int, cols: int) -> np.ndarray:
    """Dequantize, inverse-DCT (as :func:`inverse_dct_islow`) and assemble one component's plane.

    The compiled path a decoder takes, a block row at a time: the row's coefficients are dequantized
    from zigzag order into one array per natural position, both passes then run across all of the
    row's blocks at once in 32-bit lanes (which the compiler vectorizes), and each block row of
    output samples is packed eight to a 64-bit word.

    Parameters
    ----------
    quantized : ndarray, shape (nby, nbx, 64), int16 — quantized coefficients, zigzag order.
    table : ndarray, shape (8, 8) or (64,) — the quantization table, natural order.
    rows, cols : int — the plane's size; blocks past it are cropped (at most ``8 * nby`` x ``8 * nbx``).

    Returns
    -------
    ndarray, shape (rows, cols), uint8
    """
    q = np.ascontiguousarray(quantized, dtype=np.int16)
    if q.ndim != 3 or q.shape[2] != 64:
        raise ValueError(f"quantized blocks must have shape (nby, nbx, 64), got {q.shape!r}")
    if not (0 < rows <= 8 * q.shape[0] and 0 < cols <= 8 * q.shape[1]):
        raise ValueError(f"a {rows}x{cols} plane does not fit {q.shape[0]}x{q.shape[1]} blocks")
    dequantize = np.asarray(table, dtype=np.int32).reshape(64)  # natural order, as the blocks are read
    plane = np.empty((rows, cols), dtype=np.uint8)
    samples = np.empty((8, 8 * q.shape[1]), np.uint8)  # one block row of output, before cropping
    if _decode_blocks(q, dequantize, UNZIGZAG.astype(np.int64), plane, samples.view(np.uint64), samples):
        return plane
    # Coefficients no quantizer of 8-bit samples makes: the matrix form, exact at any magnitude.
    nby, nbx = q.shape[:2]
    natural = q[..., UNZIGZAG].astype(np.int64) * dequantize  # zigzag -> natural positions
    blocks = inverse_dct_islow(natural.reshape(-1, 8, 8)).reshape(nby, nbx, 8, 8)
    return np.ascontiguousarray(blocks.transpose(0, 2, 1, 3).reshape(8 * nby, 8 * nbx)[:rows, :cols])


@kernel
def _first_pass(o):
    return _i32(_i32(o + (1 << (CONST_BITS - PASS1_BITS - 1))) >> (CONST_BITS - PASS1_BITS))


@kernel
def _output_sample(o):
    """The second pass's rounding shift, the +128 level shift and saturation to 0..255 (as a word)."""
    shift = CONST_BITS + PASS1_BITS + 3
    v = _i32(_i32(o + (1 << (shift - 1))) >> shift) + 128
    return np.uint64(min(max(v, 0), 255))


@kernel
def _decode_blocks(q, table, unzigzag, plane, words, samples):
    """Decode into ``plane``; False (and the plane unfinished) as soon as a dequantized coefficient
    is beyond LANE_SAFE_COEFFICIENT. ``words`` and ``samples`` are one buffer, (8, nbx) uint64 and
    (8, 8 nbx) uint8: a block's row of eight samples is one little-endian word (sample c in bits
    8c..8c+7).

    Positions that are zero in every block of a block row (most of them in chroma) are not read: their
    row of coefficients is set to zero. Where a whole column of positions is zero, the first pass
    leaves it zero; where the last four rows (or columns) are zero throughout, the passes run the
    butterfly with those inputs as literal zeros, which the compiler folds away. Zeros give zeros
    exactly, so every sample is the one the full passes give."""
    rows, cols = plane.shape
    nby, nbx = q.shape[0], q.shape[1]
    coef = np.empty((64, nbx), np.int32)  # [natural position, block]
    work = np.empty((64, nbx), np.int32)  # the first pass's output, same layout
    used = np.zeros(64, np.bool_)  # natural positions non-zero somewhere in the block row
    zero = _i32(0)
    b8, b16, b24, b32, b40, b48, b56 = (np.uint64(8), np.uint64(16), np.uint64(24), np.uint64(32), np.uint64(40),
                                        np.uint64(48), np.uint64(56))
    for by in range(min(nby, (rows + 7) // 8)):
        blocks = q[by]
        any_zigzag = np.zeros(64, np.int16)
        for bx in range(nbx):
            block = blocks[bx]
            for z in range(64):
                any_zigzag[z] |= block[z]
        largest = 0
        for p in range(64):  # dequantize: each natural position across the row's blocks
            z, dst = unzigzag[p], coef[p]
            used[p] = any_zigzag[z] != 0
            if not used[p]:
                for bx in range(nbx):
                    dst[bx] = zero
                continue
            step = _i32(table[p])
            for bx in range(nbx):
                v = _i32(_i32(blocks[bx, z]) * step)
                dst[bx] = v
                largest = max(largest, abs(v))
        if largest > LANE_SAFE_COEFFICIENT:
            return False
        low_rows = True  # rows 4..7 of every block are zero
        low_cols = True  # columns 4..7 of every block are zero
        for p in range(64):
            if used[p]:
                low_rows = low_rows and p < 32
                low_cols = low_cols and (p & 7) < 4
        for c in range(8):  # down each column of every block
            w0, w1, w2, w3, w4, w5, w6, w7 = (work[c], work[8 + c], work[16 + c], work[24 + c], work[32 + c],
                                              work[40 + c], work[48 + c], work[56 + c])
            if not (used[c] or used[8 + c] or used[16 + c] or used[24 + c] or used[32 + c] or used[40 + c]
                    or used[48 + c] or used[56 + c]):
                for bx in range(nbx):  # an all-zero column stays zero
                    w0[bx] = w1[bx] = w2[bx] = w3[bx] = w4[bx] = w5[bx] = w6[bx] = w7[bx] = zero
                continue
            y0, y1, y2, y3, y4, y5, y6, y7 = (coef[c], coef[8 + c], coef[16 + c], coef[24 + c], coef[32 + c],
                                              coef[40 + c], coef[48 + c], coef[56 + c])
            if low_rows:
                for bx in range(nbx):
                    o = _inverse_butterfly(y0[bx], y1[bx], y2[bx], y3[bx], zero, zero, zero, zero)
                    w0[bx], w1[bx], w2[bx], w3[bx] = _first_pass(o[0]), _first_pass(o[1]), _first_pass(o[2]), _first_pass(o[3])
                    w4[bx], w5[bx], w6[bx], w7[bx] = _first_pass(o[4]), _first_pass(o[5]), _first_pass(o[6]), _first_pass(o[7])
            else:
                for bx in range(nbx):
                    o = _inverse_butterfly(y0[bx], y1[bx], y2[bx], y3[bx], y4[bx], y5[bx], y6[bx], y7[bx])
                    w0[bx], w1[bx], w2[bx], w3[bx] = _first_pass(o[0]), _first_pass(o[1]), _first_pass(o[2]), _first_pass(o[3])
                    w4[bx], w5[bx], w6[bx], w7[bx] = _first_pass(o[4]), _first_pass(o[5]), _first_pass(o[6]), _first_pass(o[7])
        for r in range(8):  # then along each row of every block, eight samples to a word
            x0, x1, x2, x3, x4, x5, x6, x7 = (work[8 * r], work[8 * r + 1], work[8 * r + 2], work[8 * r + 3],
                                              work[8 * r + 4], work[8 * r + 5], work[8 * r + 6], work[8 * r + 7])
            out = words[r]
            if low_cols:
                for bx in range(nbx):
                    o = _inverse_butterfly(x0[bx], x1[bx], x2[bx], x3[bx], zero, zero, zero, zero)
                    out[bx] = _packed_samples(o, b8, b16, b24, b32, b40, b48, b56)
            else:
                for bx in range(nbx):
                    o = _inverse_butterfly(x0[bx], x1[bx], x2[bx], x3[bx], x4[bx], x5[bx], x6[bx], x7[bx])
                    out[bx] = _packed_samples(o, b8, b16, b24, b32, b40, b48, b56)
        for r in range(min(8, rows - 8 * by)):
            line, row = plane[8 * by + r], samples[r]
            for j in range(cols):  # an explicit loop: compiled as a plain copy
                line[j] = row[j]
    return True


@kernel(inline=True)
def _packed_samples(o, b8, b16, b24, b32, b40, b48, b56):
    """A row's eight second-pass outputs as samples packed into one little-endian word."""
    return (_output_sample(o[0]) | (_output_sample(o[1]) << b8) | (_output_sample(o[2]) << b16)
            | (_output_sample(o[3]) << b24) | (_output_sample(o[4]) << b32) | (_output_sample(o[5]) << b40)
            | (_output_sample(o[6]) << b48) | (_output_sample(o[7]) << b56))
