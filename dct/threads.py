"""One thread for the engine's numerical libraries, whatever process it runs in.

The engine's matrix products are mid-sized and its OpenCV filters work on strips: in a sweep one
image runs per core, and a library that starts its own threads on top only makes them fight for
the same cores (on a busy machine a single ``simulate`` call was seen taking 9x longer with
OpenBLAS's default threads). :func:`single_threaded` limits BLAS (through threadpoolctl) and
OpenCV to one thread for the duration of a call and restores the caller's settings afterwards, so
the facade is fast in a plain Python process, a notebook or a worker alike.
"""

from __future__ import annotations

import functools
import threading
from contextlib import contextmanager

import cv2
from threadpoolctl import ThreadpoolController

_controller = None
_lock = threading.Lock()
_depth = 0  # nesting depth: only the outermost entry changes and restores the settings


def _get_controller() -> ThreadpoolController:
    # Building a controller scans the loaded libraries (a few ms): do it once per process. A
    # library loaded later is not seen; the engine's own (numpy's BLAS) is loaded on import.
    global _controller
    if _controller is None:
        _controller = ThreadpoolController()
    return _controller


@contextmanager
def single_threaded():
    """Run the body with BLAS and OpenCV limited to one thread each (re-entrant)."""
    global _depth
    with _lock:
        _depth += 1
        outer = _depth == 1
    if not outer:
        try:
            yield
        finally:
            with _lock:
                _depth -= 1
        return
    cv_before = cv2.getNumThreads()
    try:
        with _get_controller().limit(limits=1, user_api="blas"):
            cv2.setNumThreads(1)
            try:
                yield
            finally:
                cv2.setNumThreads(cv_before)
    finally:
        with _lock:
            _depth -= 1


def engine_call(func):
    """Decorator form of :func:`single_threaded`, for the facade's entry points."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        with single_threaded():
            return func(*args, **kwargs)

    return wrapper
