"""Where per-image work runs: in-process, a local process pool, or a dask.distributed cluster.

All three runners share one interface: ``map_unordered(fn, items, cancel=...)`` yields
``(index, result)`` pairs as items finish, in completion order, so progress can be shown while a
sweep runs. ``index`` is the item's position in ``items``; callers that need a stable answer sort
by it, so completion order never changes a result.

A failing item never sinks the others: its slot carries a :class:`TaskFailed` value instead of a
result (the exception is not raised). Only trouble with the runner itself (an unreachable
scheduler, a function that cannot be pickled) raises :class:`RunnerError` or ``ValueError``.

``fn`` must be a module-level function and every item must be picklable; the local pool sends
both to worker processes by reference, and dask workers must be able to import ``fn``'s module
(workers started from an environment with ``pip install eightfold`` can).
"""

from __future__ import annotations

import concurrent.futures as cf
import ctypes
import multiprocessing
import os
import pickle
import threading
import time
import traceback
import uuid
from collections import deque
from collections.abc import Callable, Iterable, Iterator
from concurrent.futures.process import BrokenProcessPool
from typing import Any

__all__ = [
    "DaskRunner",
    "InlineRunner",
    "LocalPoolRunner",
    "Runner",
    "RunnerError",
    "TaskFailed",
    "make_runner",
    "SCHEDULER_ENV",
]

SCHEDULER_ENV = "EIGHTFOLD_SCHEDULER"

# How long a waiting loop sleeps before looking at the cancel event again.
_POLL_S = 0.05
# How often a dask run asks the scheduler how many worker threads there are now.
_WORKERS_CHECK_S = 2.0


# dask's nanny starts workers with MALLOC_TRIM_THRESHOLD_ set, which also switches off glibc's
# sliding mmap threshold: every array above 128 kB is then a fresh mmap, page-faulted in and
# unmapped again, and a 1 MP image took 2-3x as long, most of it in the kernel (measured here).
# Serving arrays up to 32 MB (glibc's own upper bound for the sliding threshold) from the heap
# restores the usual behaviour; dask's trimming of freed memory stays as it is.
_M_MMAP_THRESHOLD = -3  # glibc <malloc.h>
_MMAP_THRESHOLD_BYTES = 32 * 2**20
_worker_tuned = False


def _tune_worker_malloc() -> None:
    global _worker_tuned
    if _worker_tuned:
        return
    _worker_tuned = True
    if "MALLOC_TRIM_THRESHOLD_" not in os.environ or "MALLOC_MMAP_THRESHOLD_" in os.environ:
        return  # glibc's sliding threshold is still on, or the user chose a threshold
    try:
        libc = ctypes.CDLL("libc.so.6")
        libc.mallopt(_M_MMAP_THRESHOLD, _MMAP_THRESHOLD_BYTES)
    except (OSError, AttributeError):
        pass  # not glibc: nothing to undo


def _dask_call(fn, item):
    """What a dask worker runs for one item: ``fn(item)`` after a one-off allocator fix (the
    nanny already limits BLAS/OpenMP threads)."""
    _tune_worker_malloc()
    return fn(item)


# One native (BLAS/OpenMP) thread per worker process, as dask's nanny also sets for its workers:
# N processes each running a multi-threaded OpenBLAS on N cores oversubscribe the machine, and
# OpenBLAS's spinning threads then make every process many times slower (measured here: a 1 MP
# image took 48 s instead of 5 s with two processes on two cores).
_THREAD_ENV = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")
_OPENBLAS_SETTERS = (
    "openblas_set_num_threads",
    "openblas_set_num_threads64_",
    "scipy_openblas_set_num_threads",
    "scipy_openblas_set_num_threads64_",
)


_PR_SET_PDEATHSIG = 1  # <linux/prctl.h>


def _exit_with_parent() -> None:
    """End this worker when the process that started the pool dies, ``kill -9`` included.

    A pool worker otherwise finishes its current image and waits on a queue nobody feeds, for
    a minute or more. Two guards: a thread waiting on ``multiprocessing``'s parent sentinel (a
    pipe end that reads EOF once the parent is gone, for forkserver and spawn alike), and on
    Linux ``PR_SET_PDEATHSIG``, which signals the worker when its direct parent exits.
    """
    try:
        libc = ctypes.CDLL("libc.so.6", use_errno=True)
        libc.prctl(_PR_SET_PDEATHSIG, 9, 0, 0, 0)  # SIGKILL
    except (OSError, AttributeError):
        pass  # not Linux/glibc: the sentinel thread below still works
    parent = multiprocessing.parent_process()
    if parent is None or parent.sentinel is None:
        return

    def watch() -> None:
        from multiprocessing.connection import wait

        wait([parent.sentinel])
        os._exit(1)

    threading.Thread(target=watch, name="eightfold-parent-watch", daemon=True).start()


def _init_pool_worker() -> None:
    """Pool-worker initializer: exit with the parent, the allocator fix (in case the environment
    carries dask's setting), and one BLAS/OpenMP thread unless the user chose otherwise."""
    _exit_with_parent()
    _tune_worker_malloc()
    chosen = "OPENBLAS_NUM_THREADS" in os.environ
    for name in _THREAD_ENV:
        os.environ.setdefault(name, "1")  # read by libraries loaded from now on
    if chosen:
        return
    # numpy may be loaded already (each child re-imports the parent's main module before this
    # runs), and OpenBLAS reads its variable only when it loads: tell every loaded copy directly.
    try:
        with open("/proc/self/maps", encoding="utf-8", errors="replace") as fh:
            paths = {line.split()[-1] for line in fh if "openblas" in line.lower() and "/" in line}
    except OSError:
        return  # not Linux: the variables above still cover libraries loaded later
    for path in sorted(paths):
        try:
            lib = ctypes.CDLL(path)
        except OSError:
            continue
        for symbol in _OPENBLAS_SETTERS:
            setter = getattr(lib, symbol, None)
            if setter is not None:
                setter(1)
                break


class RunnerError(RuntimeError):
    """The runner itself cannot work (scheduler unreachable, no workers, pool cannot start)."""


class TaskFailed(Exception):
    """The value yielded in place of a result when ``fn(item)`` failed for one item.

    It is yielded, never raised, so the other items carry on. It pickles, so it can travel.

    Attributes
    ----------
    index : int
        Position of the item in the list given to ``map_unordered``.
    message : str
        ``"ExceptionType: text"`` of the failure, or what happened to the worker.
    detail : str
        The formatted traceback where one was available, else ``""``.
    """

    def __init__(self, index: int, message: str, detail: str = "") -> None:
        super().__init__(index, message, detail)
        self.index = index
        self.message = message
        self.detail = detail

    def __str__(self) -> str:
        return f"item {self.index}: {self.message}"

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, TaskFailed):
            return NotImplemented
        return (self.index, self.message) == (other.index, other.message)

    def __hash__(self) -> int:
        return hash((self.index, self.message))


def _describe_exception(exc: BaseException) -> str:
    return f"{type(exc).__name__}: {exc}"


def _check_call(fn: Any, cancel: Any) -> None:
    if not callable(fn):
        raise ValueError(f"fn must be a callable (a module-level function), got {fn!r}")
    if cancel is not None and not isinstance(cancel, threading.Event):
        raise ValueError(f"cancel must be a threading.Event or None, got {cancel!r}")


class Runner:
    """Common interface of the three runners; use as a context manager or call :meth:`close`."""

    def map_unordered(
        self,
        fn: Callable[[Any], Any],
        items: Iterable[Any],
        *,
        cancel: threading.Event | None = None,
    ) -> Iterator[tuple[int, Any]]:
        """Run ``fn`` on every item and yield ``(index, result)`` as each one finishes.

        Parameters
        ----------
        fn : callable
            A picklable module-level function of one argument.
        items : iterable
            Picklable items; the iterable is read in full before work starts.
        cancel : threading.Event, optional
            When set, no further item is started, pending ones are dropped and the iterator
            stops within about 0.1 s (an item already running in a worker finishes there, but its
            result is not yielded).

        Yields
        ------
        (int, object)
            The item's index in ``items`` and ``fn(item)``, or a :class:`TaskFailed` when it
            failed. Every index appears exactly once unless the run was cancelled.
        """
        raise NotImplementedError

    @property
    def description(self) -> str:
        """Where the work runs, in words, e.g. ``"local pool, 2 processes"``."""
        raise NotImplementedError

    def close(self) -> None:
        """Release processes or connections; safe to call more than once."""

    def __enter__(self) -> Runner:
        return self

    def __exit__(self, *exc_info: object) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"<{type(self).__name__}: {self.description}>"


class InlineRunner(Runner):
    """Runs every item in the calling thread, one after another (tests, debugging, tiny sets)."""

    def __init__(self) -> None:
        self._closed = False

    @property
    def description(self) -> str:
        return "in-process, 1 worker"

    def map_unordered(self, fn, items, *, cancel=None):
        _check_call(fn, cancel)
        if self._closed:
            raise RunnerError("this runner is closed")
        return self._run(fn, list(items), cancel)

    @staticmethod
    def _run(fn, items, cancel):
        for index, item in enumerate(items):
            if cancel is not None and cancel.is_set():
                return
            try:
                result = fn(item)
            except Exception as exc:  # one bad item must not stop the rest
                result = TaskFailed(index, _describe_exception(exc), traceback.format_exc())
            yield index, result

    def close(self) -> None:
        self._closed = True


class LocalPoolRunner(Runner):
    """A pool of worker processes on this machine (``concurrent.futures.ProcessPoolExecutor``).

    The processes come from the ``forkserver`` start method, never ``fork``, so a caller running
    in a threaded server hands no locks or threads down to them. The pool starts on the first
    :meth:`map_unordered` and is reused by later calls until :meth:`close`.

    If a worker process dies (out of memory, a crash in native code), the pool breaks and every
    item then in flight fails with it. Those items are re-run one at a time in a fresh pool, so
    only the item that really kills a worker is reported as failed.

    Each worker runs numpy's BLAS (OpenBLAS, MKL, OpenMP) on one thread, unless
    ``OPENBLAS_NUM_THREADS`` is set: the processes already use every core between them.
    """

    def __init__(self, *, workers: int | None = None, start_method: str = "forkserver") -> None:
        if workers is None:
            workers = os.cpu_count() or 1
        if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
            raise ValueError(f"workers must be a positive int or None, got {workers!r}")
        if start_method not in ("forkserver", "spawn"):
            # fork would copy the caller's threads' locks into the children.
            raise ValueError(f"start_method must be 'forkserver' or 'spawn', got {start_method!r}")
        self.workers = workers
        self._context = multiprocessing.get_context(start_method)
        self._pool: cf.ProcessPoolExecutor | None = None
        self._lock = threading.Lock()
        self._closed = False

    @property
    def description(self) -> str:
        return f"local pool, {self.workers} process{'es' if self.workers != 1 else ''}"

    def _get_pool(self) -> cf.ProcessPoolExecutor:
        with self._lock:
            if self._closed:
                raise RunnerError("this runner is closed")
            if self._pool is None:
                pool = cf.ProcessPoolExecutor(
                    max_workers=self.workers, mp_context=self._context, initializer=_init_pool_worker
                )
                # A worker that cannot even start (unimportable __main__, broken environment) would
                # otherwise look like every item crashing its worker in turn.
                try:
                    pool.submit(os.getpid).result()
                except BrokenProcessPool as exc:
                    pool.shutdown(wait=False, cancel_futures=True)
                    raise RunnerError(
                        "the local worker processes could not start; run from an importable script "
                        "or module (not stdin) with this project installed"
                    ) from exc
                self._pool = pool
            return self._pool

    def _drop_pool(self, pool: cf.ProcessPoolExecutor) -> None:
        with self._lock:
            if self._pool is pool:
                self._pool = None
        pool.shutdown(wait=False, cancel_futures=True)

    def map_unordered(self, fn, items, *, cancel=None):
        _check_call(fn, cancel)
        try:
            pickle.dumps(fn)
        except Exception as exc:
            raise ValueError(
                f"fn must be a picklable module-level function, got {fn!r} ({_describe_exception(exc)})"
            ) from exc
        if self._closed:
            raise RunnerError("this runner is closed")
        return self._run(fn, list(items), cancel)

    def _run(self, fn, items, cancel):
        todo = deque(range(len(items)))
        suspects: deque[int] = deque()  # in flight when a worker died; re-run alone
        inflight: dict[cf.Future, int] = {}
        isolated: int | None = None  # the suspect running alone, if any
        broken: cf.ProcessPoolExecutor | None = None  # pool seen broken, not yet drained
        # One item per worker in flight: the executor hands submitted items to its call queue
        # early, and those can no longer be cancelled, so a larger window would make a cancelled
        # run keep the workers busy; it also limits what a dying worker takes down with it.
        window = self.workers
        pool = self._get_pool()
        try:
            while todo or suspects or inflight:
                if cancel is not None and cancel.is_set():
                    return
                if broken is not None and not inflight:
                    self._drop_pool(broken)
                    broken = None
                    pool = self._get_pool()
                if broken is None:
                    if suspects:
                        if not inflight:
                            isolated = suspects.popleft()
                            broken = self._submit(pool, fn, items, isolated, inflight, front=suspects)
                    else:
                        while todo and len(inflight) < window and broken is None:
                            broken = self._submit(pool, fn, items, todo.popleft(), inflight, front=todo)
                if not inflight:
                    continue
                done, _ = cf.wait(list(inflight), timeout=_POLL_S, return_when=cf.FIRST_COMPLETED)
                for future in done:
                    index = inflight.pop(future)
                    try:
                        result = future.result()
                    except BrokenProcessPool:
                        broken = pool
                        if index == isolated:
                            isolated = None
                            yield index, TaskFailed(
                                index,
                                "the worker process died while running this item "
                                "(out of memory, or a crash in native code)",
                            )
                        else:
                            suspects.append(index)
                        continue
                    except Exception as exc:
                        detail = "".join(traceback.format_exception(exc))
                        result = TaskFailed(index, _describe_exception(exc), detail)
                    if index == isolated:
                        isolated = None
                    yield index, result
        finally:
            # Cancelled, finished, or the consumer stopped early: drop what has not started.
            for future in inflight:
                future.cancel()

    @staticmethod
    def _submit(pool, fn, items, index, inflight, *, front):
        """Submit one item; on a pool already broken, put it back and return that pool."""
        try:
            inflight[pool.submit(fn, items[index])] = index
        except BrokenProcessPool:
            front.appendleft(index)
            return pool
        return None

    def close(self) -> None:
        with self._lock:
            self._closed = True
            pool, self._pool = self._pool, None
        if pool is not None:
            pool.shutdown(wait=True, cancel_futures=True)


class DaskRunner(Runner):
    """Sends items to the workers of a dask.distributed scheduler.

    Workers need this project's code importable (``pip install eightfold`` in their environment)
    and must reach any file path an item names; items that carry the file's bytes need nothing
    else.

    A worker lost mid-run is handled by the scheduler itself: the tasks it was running are given
    to other workers, up to ``distributed.scheduler.allowed-failures`` times (3 by default) before
    the item is reported as failed (``KilledWorker``). ``retries`` is separate and only re-runs an
    item whose function raised, for transient trouble such as a worker short of memory; keep it
    small, since a bad image fails the same way every time.

    The connection is opened on first use and closed by :meth:`close`.
    """

    def __init__(
        self,
        address: str,
        *,
        retries: int = 1,
        connect_timeout_s: float = 10.0,
        worker_wait_s: float = 30.0,
    ) -> None:
        if not isinstance(address, str) or not address.strip():
            raise ValueError(f"address must be a scheduler address like 'tcp://HOST:8786', got {address!r}")
        if isinstance(retries, bool) or not isinstance(retries, int) or retries < 0:
            raise ValueError(f"retries must be an int >= 0, got {retries!r}")
        for name, value in (("connect_timeout_s", connect_timeout_s), ("worker_wait_s", worker_wait_s)):
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not value > 0:
                raise ValueError(f"{name} must be a positive number of seconds, got {value!r}")
        self.address = address.strip()
        self.retries = retries
        self._connect_timeout_s = float(connect_timeout_s)
        self._worker_wait_s = float(worker_wait_s)
        self._client = None
        self._nworkers: int | None = None
        self._nthreads: int | None = None
        self._lock = threading.Lock()
        self._closed = False

    @property
    def description(self) -> str:
        if self._nworkers is None:
            return f"dask scheduler {self.address} (not connected yet)"
        return (
            f"dask scheduler {self.address}, {self._nworkers} worker{'s' if self._nworkers != 1 else ''}"
            f" ({self._nthreads} thread{'s' if self._nthreads != 1 else ''})"
        )

    def connect(self):
        """Open the connection now (it opens by itself on first use); returns the ``Client``."""
        with self._lock:
            if self._closed:
                raise RunnerError("this runner is closed")
            if self._client is None:
                from distributed import Client  # dask is only needed when a scheduler is used

                try:
                    self._client = Client(
                        self.address, timeout=self._connect_timeout_s, set_as_default=False
                    )
                except (OSError, TimeoutError) as exc:
                    raise RunnerError(
                        f"cannot reach the dask scheduler at {self.address!r}: {_describe_exception(exc)}"
                    ) from exc
            return self._client

    def _refresh_workers(self, client, *, wait: bool) -> None:
        nthreads = client.nthreads()
        if not nthreads and wait:
            try:
                client.wait_for_workers(1, timeout=self._worker_wait_s)
            except TimeoutError as exc:
                raise RunnerError(
                    f"the dask scheduler at {self.address!r} has had no workers for "
                    f"{self._worker_wait_s:g} s; start some with 'dask worker {self.address}'"
                ) from exc
            nthreads = client.nthreads()
        self._nworkers = len(nthreads)
        self._nthreads = sum(nthreads.values())

    def map_unordered(self, fn, items, *, cancel=None):
        _check_call(fn, cancel)
        items = list(items)
        client = self.connect()
        self._refresh_workers(client, wait=True)
        return self._run(client, fn, items, cancel)

    def _window(self) -> int:
        # Two tasks per worker thread: one running, one ready to start the moment it finishes.
        return max(4, 2 * (self._nthreads or 0))

    def _run(self, client, fn, items, cancel):
        from distributed import as_completed

        # Explicit unique keys: identical items (same bytes twice) must still be two tasks.
        run_id = uuid.uuid4().hex[:12]
        name = getattr(fn, "__name__", "task")
        todo = deque(range(len(items)))
        inflight: dict[Any, int] = {}
        completed = as_completed(loop=client.loop)

        def submit_more() -> None:
            # A window, not the whole list: uploads carry file bytes, and the scheduler holds
            # every submitted task's arguments until it runs.
            while todo and len(inflight) < self._window():
                index = todo.popleft()
                future = client.submit(
                    _dask_call, fn, items[index], key=f"{name}-{run_id}-{index}", retries=self.retries, pure=False
                )
                inflight[future] = index
                completed.add(future)

        try:
            submit_more()
            checked = time.monotonic()
            while inflight:
                if cancel is not None and cancel.is_set():
                    return
                if todo and time.monotonic() - checked > _WORKERS_CHECK_S:
                    # Workers may join (or leave) mid-run: keep every thread fed.
                    self._refresh_workers(client, wait=False)
                    checked = time.monotonic()
                    submit_more()
                batch = completed.next_batch(block=False)
                if not batch:
                    if cancel is not None:
                        cancel.wait(_POLL_S)
                    else:
                        time.sleep(_POLL_S)
                    continue
                for future in batch:
                    index = inflight.pop(future)
                    if future.status == "finished":
                        result = future.result()
                    elif future.status == "cancelled":
                        result = TaskFailed(index, "cancelled on the dask scheduler")
                    else:
                        exc = future.exception()
                        tb = future.traceback()
                        detail = "".join(traceback.format_tb(tb)) if tb is not None else ""
                        result = TaskFailed(index, _describe_exception(exc), detail)
                    future.release()
                    yield index, result
                submit_more()
        finally:
            if inflight:
                client.cancel(list(inflight))
            completed.clear()

    def close(self) -> None:
        with self._lock:
            self._closed = True
            client, self._client = self._client, None
        if client is not None:
            client.close()


def make_runner(
    *,
    workers: int | None = None,
    scheduler: str | None = None,
    use_env: bool = False,
) -> Runner:
    """Pick a runner.

    Parameters
    ----------
    workers : int, optional
        Local processes. ``1`` runs in-process (:class:`InlineRunner`); ``None`` means
        ``os.cpu_count()``. Not allowed together with a scheduler, whose workers are its own.
    scheduler : str, optional
        A dask scheduler address (``"tcp://HOST:8786"``) -> :class:`DaskRunner`.
    use_env : bool
        When ``scheduler`` is None, read it from the ``EIGHTFOLD_SCHEDULER`` environment variable
        (the web app does; the CLI passes its ``--scheduler`` option instead).

    Returns
    -------
    Runner
        Not yet started: processes or the connection open on first use.
    """
    if scheduler is None and use_env:
        scheduler = os.environ.get(SCHEDULER_ENV, "").strip() or None
    if scheduler is not None:
        if workers is not None:
            raise ValueError(
                f"workers={workers!r} cannot be combined with scheduler={scheduler!r}: "
                "the scheduler's own workers do the work"
            )
        return DaskRunner(scheduler)
    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int) or workers < 1):
        raise ValueError(f"workers must be a positive int or None, got {workers!r}")
    if workers == 1:
        return InlineRunner()
    return LocalPoolRunner(workers=workers)
