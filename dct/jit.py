"""Compiled loops for the engine's per-setting passes: the one place that configures numba.

Most of the engine is whole-array numpy. A few steps are loops over blocks or pixels that numpy can
only express as a dozen whole-array passes with temporaries (the scan's symbols in coding order,
the bit assembly that counts 0xFF stuffing, libjpeg's inverse DCT, the SSIM formula after
filtering). Those are written as plain Python loops and compiled by numba on
first use. What they must equal does not change: tests/test_exact.py holds them to libjpeg's bytes
and Pillow's decoded pixels, and the modules' own tests to their numpy definitions.

* ``cache=True``: compiled code is kept on disk (next to the module, or in numba's per-user cache
  when that folder is read-only), so a new worker process loads it instead of compiling again.
  Where no cache can be kept at all, a kernel is compiled in each process instead of failing.
* ``nogil=True``: a kernel releases the GIL, so threads in one process (the web app's background
  sweep) do not stall each other.
* No ``parallel``: a sweep already runs one image per core (``dct.threads``).
* No ``fastmath``: floating-point kernels keep IEEE order, so they round as the numpy they replace.
* ``error_model="numpy"``: a float division by zero gives inf or nan as numpy's does, instead of a
  check per division that would keep the loops from being vectorized.
"""

from __future__ import annotations

import numba
from llvmlite import ir
from numba.extending import intrinsic

_OPTIONS = dict(nogil=True, error_model="numpy")


def kernel(func=None, *, inline: bool = False):
    """Compile ``func`` with the engine's options, cached on disk where a cache can be kept.

    ``@kernel(inline=True)`` marks a helper that other kernels call once per block or pixel: numba
    then copies its body into each caller, where a call per block would cost more than its work.
    """
    if func is None:
        return lambda f: kernel(f, inline=inline)
    options = dict(_OPTIONS, inline="always") if inline else _OPTIONS
    try:
        return numba.njit(cache=True, **options)(func)
    except RuntimeError:  # no writable cache location for its source: compiled anew in each process
        return numba.njit(**options)(func)


@intrinsic
def trailing_zeros(typingctx, value):
    """The number of zero bits below an integer's lowest set bit (its width for 0), for use inside
    kernels: LLVM's cttz, one instruction on current x86-64 and ARM cores."""
    if not isinstance(value, numba.types.Integer):
        return None

    def codegen(context, builder, signature, args):
        return builder.cttz(args[0], ir.Constant(ir.IntType(1), 0))

    return value(value), codegen


@intrinsic
def bit_length(value_type, value):
    """``int.bit_length`` of a non-negative integer, for use inside kernels: its width minus LLVM's
    ctlz (leading zero bits), one instruction on current x86-64 and ARM cores."""
    if not isinstance(value, numba.types.Integer):
        return None

    def codegen(context, builder, signature, args):
        width = ir.Constant(args[0].type, value.bitwidth)
        return builder.sub(width, builder.ctlz(args[0], ir.Constant(ir.IntType(1), 0)))

    return value(value), codegen


@intrinsic
def popcount(value_type, value):
    """The number of set bits of an integer, for use inside kernels: LLVM's ctpop."""
    if not isinstance(value, numba.types.Integer):
        return None

    def codegen(context, builder, signature, args):
        return builder.ctpop(args[0])

    return value(value), codegen
