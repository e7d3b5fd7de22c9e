"""Background sweeps: one worker thread per app consuming a queue of sweep ids.

A sweep never runs inside a request. The worker calls ``dct.pipeline.run_sweep`` with a progress
callback (written to SQLite, polled by the page), a cancel event, and a ``ResultCache`` over SQLite so
finished per-image work survives a crash; on app start, sweeps left ``queued``/``running`` are resumed.
"""

from __future__ import annotations

import dataclasses
import logging
import os
import queue
import threading
import time
from pathlib import Path

from flask import current_app

from webapp import store, validation

log = logging.getLogger(__name__)
EXTENSION = "eightfold_worker"


class SweepWorker:
    def __init__(self, config: dict):
        self.database = config["DATABASE"]
        self.root = config["DATA_DIR"]
        self.workers = config.get("SWEEP_WORKERS")
        self.grid = config.get("SWEEP_GRID")
        self.strategy = config.get("SWEEP_STRATEGY") or os.environ.get("EIGHTFOLD_STRATEGY") or "search"
        self._queue: queue.Queue = queue.Queue()
        self._cancel: dict[str, threading.Event] = {}
        self._reused: dict[str, int] = {}  # passes of a running sweep taken from the result cache
        self._lock = threading.Lock()
        self._thread: threading.Thread | None = None
        self._stopping = threading.Event()
        self.current: str | None = None

    # --- control (request threads) ---

    def submit(self, sweep_id: str) -> None:
        with self._lock:
            self._cancel.setdefault(sweep_id, threading.Event())
            if self._thread is None or not self._thread.is_alive():
                self._thread = threading.Thread(target=self._loop, name="eightfold-sweeps", daemon=True)
                self._thread.start()
        self._queue.put(sweep_id)

    def cancel(self, sweep_id: str) -> None:
        with self._lock:
            event = self._cancel.get(sweep_id)
        if event is not None:
            event.set()

    def stop(self, timeout: float = 30.0) -> None:
        """Cancel what runs, finish the thread (tests and shutdown)."""
        self._stopping.set()
        with self._lock:
            for event in self._cancel.values():
                event.set()
            thread = self._thread
        self._queue.put(None)
        if thread is not None:
            thread.join(timeout)

    def reused(self, sweep_id: str) -> int:
        """Passes of a running sweep that came from the result cache (0 when none or not running)."""
        return self._reused.get(sweep_id, 0)

    def wait_idle(self, timeout: float = 120.0) -> bool:
        """Block until the queue is drained (tests)."""
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self._queue.unfinished_tasks == 0:
                return True
            time.sleep(0.05)
        return False

    # --- the thread ---

    def _loop(self) -> None:
        while True:
            sweep_id = self._queue.get()
            try:
                if sweep_id is None or self._stopping.is_set():
                    return
                self.current = sweep_id
                self._run(sweep_id)
            except Exception:  # keep the worker alive for the next sweep
                log.exception("sweep %s crashed the worker step", sweep_id)
            finally:
                self.current = None
                self._queue.task_done()

    def _run(self, sweep_id: str) -> None:
        conn = store.connect(self.database)
        try:
            sweep = store.get_sweep(conn, sweep_id)
            if sweep is None or sweep["status"] not in ("queued", "running"):
                return
            event = self._cancel.setdefault(sweep_id, threading.Event())
            if sweep["cancel_requested"] or event.is_set():
                store.finish_sweep(conn, sweep_id, status="cancelled")
                return
            store.mark_running(conn, sweep_id)
            try:
                outcome = self._sweep(conn, sweep, event)
            except Exception as exc:
                log.exception("sweep %s failed", sweep_id)
                store.finish_sweep(conn, sweep_id, status="failed", error=f"{type(exc).__name__}: {exc}")
                return
            if outcome.cancelled or event.is_set():
                store.finish_sweep(conn, sweep_id, status="cancelled")
            else:
                store.finish_sweep(conn, sweep_id, status="done", document=outcome.document, curves=outcome.curves)
        finally:
            with self._lock:
                self._cancel.pop(sweep_id, None)
                self._reused.pop(sweep_id, None)
            conn.close()

    def _sweep(self, conn, sweep: dict, event: threading.Event):
        from dct.pipeline import run_sweep
        from dct.runner import SCHEDULER_ENV, make_runner

        from dct.sampleset import Rejection

        jobs = build_jobs(conn, self.root, sweep["set_id"], sweep["params"])
        # Files refused at upload are listed in the document, as the CLI lists files refused on discovery.
        rejected = [Rejection(path=r["filename"], error=r["error"]) for r in store.set_rejected(conn, sweep["set_id"])]
        classes = validation.class_specs(sweep["params"])
        current = validation.current_setting(sweep["params"])

        def progress(done: int, total: int) -> None:
            store.update_progress(conn, sweep["id"], done, total)

        def on_reused(count: int) -> None:
            self._reused[sweep["id"]] = count

        cache = store.SqliteResultCache(self.database, set_id=sweep["set_id"])
        # EIGHTFOLD_SCHEDULER sends the work to a dask cluster, whose workers bring their own
        # processes and cannot read this machine's blob store: they get the images as bytes.
        scheduler = os.environ.get(SCHEDULER_ENV, "").strip() or None
        runner = make_runner(workers=None if scheduler else self.workers, scheduler=scheduler)
        if scheduler:
            jobs = [dataclasses.replace(j, source=Path(j.source).read_bytes()) for j in jobs]
        try:
            kwargs = dict(current=current, runner=runner, progress=progress, on_reused=on_reused, cancel=event,
                          cache=cache, rejected=rejected, plain_only=validation.plain_only(sweep["params"]),
                          strategy=self.strategy)
            if self.grid is not None:
                kwargs["grid"] = make_grid(self.grid)
            return run_sweep(jobs, classes, **kwargs)
        finally:
            runner.close()
            cache.close()


def make_grid(value):
    """``SWEEP_GRID`` as a ``dct.grid.Grid``: a Grid, or a dict of its fields (tests use a small one)."""
    from dct.grid import Grid

    if isinstance(value, Grid):
        return value
    if isinstance(value, dict):
        return Grid(**{k: tuple(v) if isinstance(v, (list, tuple)) else v for k, v in value.items()})
    raise ValueError(f"SWEEP_GRID must be a dct.grid.Grid or a dict of its fields, got {value!r}")


def build_jobs(conn, root, set_id: str, params: dict) -> list:
    """One ``ImageJob`` per stored image, its source the content-addressed blob on disk."""
    from dct.sampleset import ImageJob

    jobs = []
    for image in store.set_images(conn, set_id):
        spec = params["classes"][image["class_name"]]
        jobs.append(ImageJob(
            key=image["filename"],
            class_name=image["class_name"],
            source=str(store.blob_path(root, image["sha256"])),
            widths=tuple(spec.get("widths") or [None]),
            background=(255, 255, 255),
        ))
    return jobs


def get_worker() -> SweepWorker:
    return current_app.extensions[EXTENSION]


def init_app(app) -> None:
    worker = SweepWorker(app.config)
    app.extensions[EXTENSION] = worker
    if app.config.get("SWEEP_AUTORESUME", True):
        conn = store.connect(app.config["DATABASE"])
        try:
            pending = store.pending_sweeps(conn)
        finally:
            conn.close()
        for sweep_id in pending:
            worker.submit(sweep_id)
