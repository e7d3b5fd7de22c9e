"""Thread control: the engine runs single-threaded inside, and leaves the caller's settings alone."""

import cv2
import numpy as np
from threadpoolctl import threadpool_info

import dct
from dct.threads import engine_call, single_threaded


def blas_threads():
    return [i["num_threads"] for i in threadpool_info() if i["user_api"] == "blas"]


def test_limits_inside_and_restores_after():
    before_cv, before_blas = cv2.getNumThreads(), blas_threads()
    with single_threaded():
        assert cv2.getNumThreads() == 1
        assert all(n == 1 for n in blas_threads())
        with single_threaded():  # nested entry keeps the limit and does not restore early
            pass
        assert cv2.getNumThreads() == 1
    assert cv2.getNumThreads() == before_cv and blas_threads() == before_blas


def test_restores_after_an_exception():
    before = cv2.getNumThreads()
    try:
        with single_threaded():
            raise KeyError("boom")
    except KeyError:
        pass
    assert cv2.getNumThreads() == before


def test_facade_runs_single_threaded():
    seen = []

    @engine_call
    def probe():
        seen.append((cv2.getNumThreads(), blas_threads()))
        return 7

    assert probe() == 7 and seen[0][0] == 1 and all(n == 1 for n in seen[0][1])
    rng = np.random.default_rng(0)
    rgb = rng.integers(0, 256, (24, 24, 3), dtype=np.uint8)
    assert dct.simulate(rgb, 75).estimated_bytes > 0  # the wrapped facade still simulates
    assert len(dct.sweep(rgb, [dct.Setting(50), dct.Setting(90)])) == 2
