"""Module-level task functions for the runner tests.

They live in their own module so that worker processes (process pool, dask workers) can import
them by name: pickle sends functions by reference, never by value.
"""

from __future__ import annotations

import os
import time


def square_after(item: tuple[int, float]) -> int:
    """Sleep ``item[1]`` seconds, then return ``item[0] ** 2``; a negative value raises ValueError."""
    value, delay = item
    time.sleep(delay)
    if value < 0:
        raise ValueError(f"negative value {value!r}")
    return value * value


def pid_after(delay: float) -> int:
    """Sleep, then report which process ran the item."""
    time.sleep(delay)
    return os.getpid()


def die_on(item: tuple[int, float]) -> int:
    """Like :func:`square_after`, but value -1 ends the worker process abruptly (no exception)."""
    value, delay = item
    if value == -1:
        os._exit(3)
    time.sleep(delay)
    return value * value


def blas_threads(_: object = None) -> dict[str, int]:
    """Thread count each loaded OpenBLAS reports through its own ``*_get_num_threads`` call."""
    import ctypes

    import numpy  # noqa: F401  (loads numpy's OpenBLAS)
    import scipy.linalg  # noqa: F401  (loads scipy's own copy)

    with open("/proc/self/maps", encoding="utf-8", errors="replace") as fh:
        paths = sorted({line.split()[-1] for line in fh if "openblas" in line.lower() and "/" in line})
    out = {}
    for path in paths:
        lib = ctypes.CDLL(path)
        for symbol in (
            "openblas_get_num_threads",
            "openblas_get_num_threads64_",
            "scipy_openblas_get_num_threads",
            "scipy_openblas_get_num_threads64_",
        ):
            getter = getattr(lib, symbol, None)
            if getter is not None:
                out[os.path.basename(path)] = int(getter())
                break
    return out


def mmapped_bytes_for_array(nbytes: int) -> int:
    """How much of an ``nbytes`` numpy array glibc served by mmap (``mallinfo2().hblkhd`` grows)."""
    import ctypes

    import numpy

    class Mallinfo2(ctypes.Structure):
        _fields_ = [(name, ctypes.c_size_t) for name in (
            "arena", "ordblks", "smblks", "hblks", "hblkhd", "usmblks", "fsmblks", "uordblks", "fordblks", "keepcost")]

    libc = ctypes.CDLL("libc.so.6")
    libc.mallinfo2.restype = Mallinfo2
    before = libc.mallinfo2().hblkhd
    array = numpy.ones(nbytes, dtype=numpy.uint8)
    during = libc.mallinfo2().hblkhd
    del array
    return int(during - before)
