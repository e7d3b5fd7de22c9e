"""Decoding and rendering off the request threads, in a bounded pool.

A 160 KB PNG can decode to 50 Mpx (150 MB of pixels, more while converting); six of those decoded at
once in request threads took a test server from 140 MB to 3.6 GB and stalled every page. Here every
decode (upload checks, thumbnails, review renders) runs on one of ``DECODE_WORKERS`` threads, so
memory is bounded by that many images, and at most ``UPLOAD_SLOTS`` uploads are checked at a time
(as many again may wait for their turn), so the server's other threads stay free for pages. Work that cannot start in time gets a 503 with
``Retry-After`` instead of piling up. (Pillow and numpy release the GIL while they decode and
convert, so threads keep both cores busy; a process pool would also copy each image back.)
"""

from __future__ import annotations

import concurrent.futures as cf
import threading
from contextlib import contextmanager

from flask import current_app
from werkzeug.exceptions import ServiceUnavailable

EXTENSION = "eightfold_decode_pool"


class Busy(ServiceUnavailable):
    def __init__(self, description: str, retry_after: int = 30):
        super().__init__(description=description)
        self.retry_after = retry_after

    def get_headers(self, environ=None, scope=None):
        return [*super().get_headers(environ, scope), ("Retry-After", str(self.retry_after))]


class DecodePool:
    def __init__(self, *, workers: int, upload_slots: int, wait_s: float, upload_wait_s: float = 30.0):
        if workers < 1 or upload_slots < 1:
            raise ValueError(f"DECODE_WORKERS and UPLOAD_SLOTS must be at least 1, got {workers!r}, {upload_slots!r}")
        self.workers = workers
        self.wait_s = float(wait_s)
        self._executor = cf.ThreadPoolExecutor(max_workers=workers, thread_name_prefix="eightfold-decode")
        self._uploads = threading.BoundedSemaphore(upload_slots)
        self._waiting = threading.BoundedSemaphore(upload_slots)
        self.upload_wait_s = float(upload_wait_s)
        self._running = 0
        self.peak = 0  # most decodes seen running at once (tests check the bound)
        self._lock = threading.Lock()

    def _tracked(self, fn, args):
        with self._lock:
            self._running += 1
            self.peak = max(self.peak, self._running)
        try:
            return fn(*args)
        finally:
            with self._lock:
                self._running -= 1

    def run(self, fn, *args):
        """``fn(*args)`` on a pool thread; its exception is raised here. 503 when it cannot finish in time."""
        future = self._executor.submit(self._tracked, fn, args)
        try:
            return future.result(timeout=self.wait_s)
        except cf.TimeoutError:
            future.cancel()
            raise Busy("the server is busy decoding other images; try again in a minute") from None

    @contextmanager
    def upload_slot(self, wait_s: float | None = None):
        """One of the few uploads checked at a time.

        As many uploads again may wait for a slot (up to ``wait_s``, default ``UPLOAD_WAIT_S``); any
        more get a 503 at once, so waiting uploads never hold more than that many server threads.
        """
        wait_s = self.upload_wait_s if wait_s is None else wait_s
        if not self._uploads.acquire(blocking=False):
            if not self._waiting.acquire(blocking=False):
                raise Busy("the server is checking other uploads right now; send this one again in a minute")
            try:
                got = self._uploads.acquire(timeout=wait_s)
            finally:
                self._waiting.release()
            if not got:
                raise Busy("the server is checking other uploads right now; send this one again in a minute")
        try:
            yield
        finally:
            self._uploads.release()

    def close(self) -> None:
        self._executor.shutdown(wait=False, cancel_futures=True)


def get_pool() -> DecodePool:
    return current_app.extensions[EXTENSION]


def run(fn, *args):
    return get_pool().run(fn, *args)


def init_app(app) -> None:
    app.extensions[EXTENSION] = DecodePool(workers=int(app.config["DECODE_WORKERS"]),
                                           upload_slots=int(app.config["UPLOAD_SLOTS"]),
                                           wait_s=float(app.config["DECODE_WAIT_S"]),
                                           upload_wait_s=float(app.config["UPLOAD_WAIT_S"]))
