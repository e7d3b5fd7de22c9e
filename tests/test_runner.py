"""Tests for dct.runner: in-process and local-pool runners, and make_runner's choice.

The reference for every result is the task function itself, called directly in this process
(plain Python arithmetic), so a runner that loses, duplicates or mixes up items fails.
Real worker processes are used throughout; nothing is mocked.
"""

from __future__ import annotations

import os
import subprocess
import sys
import threading
import time

import pytest

from tests import _runner_tasks as tasks
from dct.runner import (
    DaskRunner,
    InlineRunner,
    LocalPoolRunner,
    Runner,
    RunnerError,
    TaskFailed,
    make_runner,
)

ITEMS = [(v, 0.01) for v in (3, 0, 7, -2, 11, 5, -9, 2)]


def expected(fn, items):
    """What each index should hold: fn(item) here, or the failure's type name."""
    out = {}
    for i, item in enumerate(items):
        try:
            out[i] = fn(item)
        except Exception as exc:
            out[i] = type(exc).__name__
    return out


def collect(runner: Runner, fn, items, **kw):
    got = {}
    for index, result in runner.map_unordered(fn, items, **kw):
        assert index not in got, f"index {index} yielded twice"
        got[index] = result
    return got


def normalised(got):
    return {i: (r.message.split(":")[0] if isinstance(r, TaskFailed) else r) for i, r in got.items()}


@pytest.fixture(scope="module")
def pool():
    with LocalPoolRunner(workers=2) as runner:
        yield runner


def test_inline_and_pool_match_direct_calls(pool):
    want = expected(tasks.square_after, ITEMS)
    with InlineRunner() as inline:
        got_inline = collect(inline, tasks.square_after, ITEMS)
    got_pool = collect(pool, tasks.square_after, ITEMS)
    assert normalised(got_inline) == want
    assert normalised(got_pool) == want
    # TaskFailed compares by (index, message), so the two runners agree exactly.
    assert got_inline == got_pool


def test_failure_is_reported_for_its_item_only(pool):
    got = collect(pool, tasks.square_after, ITEMS)
    failed = {i for i, r in got.items() if isinstance(r, TaskFailed)}
    assert failed == {3, 6}
    assert got[3].index == 3
    assert got[3].message == "ValueError: negative value -2"
    assert "square_after" in got[3].detail  # the worker's traceback came back
    assert str(got[6]) == "item 6: ValueError: negative value -9"
    assert got[4] == 121


def test_inline_runs_in_this_process():
    with InlineRunner() as inline:
        got = collect(inline, tasks.pid_after, [0.0, 0.0])
    assert set(got.values()) == {os.getpid()}


def test_pool_runs_elsewhere_and_is_reused_across_calls(pool):
    first = set(collect(pool, tasks.pid_after, [0.2] * 4).values())
    second = set(collect(pool, tasks.pid_after, [0.2] * 4).values())
    assert os.getpid() not in first
    assert len(first) == 2  # both workers took part
    assert second <= first  # same processes, not a fresh pool per call


def test_results_stream_in_completion_order(pool):
    collect(pool, tasks.pid_after, [0.0, 0.0])  # make sure both workers are up
    items = [(1, 1.2), (2, 0.05), (3, 0.05), (4, 0.05)]
    start = time.monotonic()
    order, times = [], []
    for index, _ in pool.map_unordered(tasks.square_after, items):
        order.append(index)
        times.append(time.monotonic() - start)
    assert sorted(order) == [0, 1, 2, 3]
    # The slow item finishes last, and the quick ones were handed over long before it did.
    assert order[-1] == 0
    assert times[0] < 0.8 < times[-1]


def test_cancel_stops_promptly(pool):
    collect(pool, tasks.pid_after, [0.0, 0.0])
    cancel = threading.Event()
    items = [(v, 0.3) for v in range(40)]
    seen = []
    start = time.monotonic()
    for index, _ in pool.map_unordered(tasks.square_after, items, cancel=cancel):
        seen.append(index)
        if len(seen) == 2:
            cancel.set()
            cancel_at = time.monotonic()
    ended = time.monotonic()
    assert 2 <= len(seen) < 6
    assert ended - cancel_at < 0.3
    assert ended - start < 3.0  # 40 items x 0.3 s on 2 workers would take 6 s
    # The pool is still usable after a cancelled run.
    assert collect(pool, tasks.square_after, [(4, 0.0)]) == {0: 16}


def test_cancel_from_another_thread_while_waiting(pool):
    cancel = threading.Event()
    timer = threading.Timer(0.3, cancel.set)
    start = time.monotonic()
    timer.start()
    try:
        got = collect(pool, tasks.square_after, [(v, 1.5) for v in range(4)], cancel=cancel)
    finally:
        timer.cancel()
    assert got == {}
    assert time.monotonic() - start < 1.0
    # Only the two running items were left to finish (1.5 s each, started at 0 s), not the
    # other two: the next call is answered soon after they end.
    assert collect(pool, tasks.square_after, [(2, 0.0)]) == {0: 4}
    assert time.monotonic() - start < 2.5


def test_inline_cancel_between_items():
    cancel = threading.Event()
    seen = []
    with InlineRunner() as inline:
        for index, _ in inline.map_unordered(tasks.square_after, [(v, 0.0) for v in range(5)], cancel=cancel):
            seen.append(index)
            cancel.set()
    assert seen == [0]


def test_consumer_stopping_early_leaves_pool_usable(pool):
    it = pool.map_unordered(tasks.square_after, [(v, 0.1) for v in range(20)])
    next(it)
    it.close()
    assert collect(pool, tasks.square_after, [(5, 0.0), (6, 0.0)]) == {0: 25, 1: 36}


def test_dead_worker_fails_only_its_own_item():
    items = [(v, 0.05) for v in range(8)]
    items[3] = (-1, 0.0)  # this one kills its worker process
    with LocalPoolRunner(workers=2) as runner:
        got = collect(runner, tasks.die_on, items)
        assert sorted(got) == list(range(8))
        assert isinstance(got[3], TaskFailed)
        assert "worker process died" in got[3].message
        assert {i: r for i, r in got.items() if i != 3} == {i: v * v for i, (v, _) in enumerate(items) if i != 3}
        # A fresh pool took over, and stays usable.
        assert collect(runner, tasks.square_after, [(9, 0.0)]) == {0: 81}


def test_workers_that_cannot_start_are_a_clear_error():
    # A script on stdin cannot be re-imported by forkserver children, so no worker ever starts.
    script = (
        "from dct.runner import LocalPoolRunner, RunnerError\n"
        "try:\n"
        "    list(LocalPoolRunner(workers=2).map_unordered(abs, [1, -2]))\n"
        "except RunnerError as exc:\n"
        "    print('RunnerError:', exc)\n"
    )
    proc = subprocess.run(
        [sys.executable, "-"], input=script, capture_output=True, text=True, timeout=60
    )
    assert "RunnerError: the local worker processes could not start" in proc.stdout, proc.stderr[-2000:]


needs_cores = pytest.mark.skipif(
    (os.cpu_count() or 1) < 2 or not os.path.exists("/proc/self/maps") or "OPENBLAS_NUM_THREADS" in os.environ,
    reason="OpenBLAS defaults to one thread per core: with one core (or a user setting) there is nothing to check",
)


@needs_cores
def test_pool_workers_run_blas_on_one_thread(pool):
    # Reference: OpenBLAS's own openblas_get_num_threads(), per loaded copy (numpy's and scipy's).
    here = tasks.blas_threads()
    assert here and max(here.values()) == os.cpu_count()  # this process keeps the default
    (workers,) = {tuple(sorted(r.items())) for r in collect(pool, tasks.blas_threads, [0, 1]).values()}
    assert dict(workers).keys() == here.keys()
    assert set(dict(workers).values()) == {1}


@needs_cores
def test_blas_limited_even_when_numpy_loads_before_the_worker_starts(tmp_path):
    # A main module that imports numpy is re-imported in every child before the pool's
    # initializer runs, so the environment variables come too late there.
    script = tmp_path / "main_with_numpy.py"
    script.write_text(
        "import numpy\n"
        "from dct.runner import LocalPoolRunner\n"
        "from tests import _runner_tasks as tasks\n"
        "if __name__ == '__main__':\n"
        "    with LocalPoolRunner(workers=2) as pool:\n"
        "        print(sorted({v for _, r in pool.map_unordered(tasks.blas_threads, [0, 1]) for v in r.values()}))\n"
    )
    env = {**os.environ, "PYTHONPATH": os.path.dirname(os.path.dirname(os.path.abspath(__file__)))}
    proc = subprocess.run([sys.executable, str(script)], capture_output=True, text=True, timeout=120, env=env)
    assert proc.stdout.strip() == "[1]", proc.stderr[-2000:]


@pytest.mark.skipif(not hasattr(__import__("ctypes").CDLL(None), "mallinfo2"), reason="needs glibc >= 2.33")
def test_pool_workers_keep_big_arrays_on_the_heap_under_dask_malloc_setting(tmp_path):
    # Reference: glibc's mallinfo2(). MALLOC_TRIM_THRESHOLD_ (dask's nanny sets it, and leaves it
    # in the environment of the process that hosts a LocalCluster) pins the mmap threshold at
    # 128 kB; the pool's initializer restores heap allocation for arrays up to 32 MB.
    script = tmp_path / "main_malloc.py"
    script.write_text(
        "from dct.runner import LocalPoolRunner\n"
        "from tests import _runner_tasks as tasks\n"
        "if __name__ == '__main__':\n"
        "    with LocalPoolRunner(workers=2) as pool:\n"
        "        print(max(r for _, r in pool.map_unordered(tasks.mmapped_bytes_for_array, [4 * 2**20] * 4)))\n"
    )
    env = {
        **os.environ,
        "PYTHONPATH": os.path.dirname(os.path.dirname(os.path.abspath(__file__))),
        "MALLOC_TRIM_THRESHOLD_": "65536",
    }
    env.pop("MALLOC_MMAP_THRESHOLD_", None)
    proc = subprocess.run([sys.executable, str(script)], capture_output=True, text=True, timeout=120, env=env)
    assert proc.stdout.strip() == "0", proc.stderr[-2000:]


def test_closed_runner_refuses_work():
    runner = LocalPoolRunner(workers=2)
    assert collect(runner, tasks.square_after, [(2, 0.0)]) == {0: 4}
    runner.close()
    runner.close()  # twice is fine
    with pytest.raises(RunnerError, match="closed"):
        runner.map_unordered(tasks.square_after, [(2, 0.0)])


def test_unpicklable_function_is_refused_up_front(pool):
    with pytest.raises(ValueError, match="picklable"):
        pool.map_unordered(lambda x: x, [1])


@pytest.mark.parametrize("bad", ["stop", 1])
def test_cancel_must_be_an_event(bad):
    with InlineRunner() as inline, pytest.raises(ValueError, match=repr(bad)):
        inline.map_unordered(tasks.square_after, [(1, 0.0)], cancel=bad)


def test_fn_must_be_callable():
    with InlineRunner() as inline, pytest.raises(ValueError, match="'square'"):
        inline.map_unordered("square", [1])


def test_empty_items(pool):
    assert collect(pool, tasks.square_after, []) == {}
    with InlineRunner() as inline:
        assert collect(inline, tasks.square_after, []) == {}


def test_task_failed_pickles():
    import pickle

    failure = TaskFailed(4, "ValueError: x", "trace")
    back = pickle.loads(pickle.dumps(failure))
    assert (back.index, back.message, back.detail) == (4, "ValueError: x", "trace")


def test_descriptions():
    assert LocalPoolRunner(workers=2).description == "local pool, 2 processes"
    assert LocalPoolRunner(workers=1).description == "local pool, 1 process"
    assert InlineRunner().description == "in-process, 1 worker"
    assert DaskRunner("tcp://127.0.0.1:8786").description == "dask scheduler tcp://127.0.0.1:8786 (not connected yet)"


def test_make_runner_choices(monkeypatch):
    monkeypatch.delenv("EIGHTFOLD_SCHEDULER", raising=False)
    assert isinstance(make_runner(workers=1), InlineRunner)
    two = make_runner(workers=2)
    assert isinstance(two, LocalPoolRunner) and two.workers == 2
    default = make_runner()
    assert isinstance(default, LocalPoolRunner) and default.workers == (os.cpu_count() or 1)
    dask = make_runner(scheduler="tcp://10.0.0.5:8786")
    assert isinstance(dask, DaskRunner) and dask.address == "tcp://10.0.0.5:8786"


def test_make_runner_reads_environment_only_when_asked(monkeypatch):
    monkeypatch.setenv("EIGHTFOLD_SCHEDULER", "tcp://10.0.0.7:8786")
    from_env = make_runner(use_env=True)
    assert isinstance(from_env, DaskRunner) and from_env.address == "tcp://10.0.0.7:8786"
    assert isinstance(make_runner(workers=2), LocalPoolRunner)  # use_env defaults to False
    explicit = make_runner(scheduler="tcp://10.0.0.8:8786", use_env=True)
    assert explicit.address == "tcp://10.0.0.8:8786"  # an explicit scheduler wins
    monkeypatch.setenv("EIGHTFOLD_SCHEDULER", "  ")
    assert isinstance(make_runner(workers=1, use_env=True), InlineRunner)


@pytest.mark.parametrize("bad", [0, -1, True, 2.5, "2"])
def test_make_runner_rejects_bad_workers(bad):
    with pytest.raises(ValueError, match="workers"):
        make_runner(workers=bad)
    with pytest.raises(ValueError, match=repr(bad).replace(".", r"\.")):
        LocalPoolRunner(workers=bad)


def test_make_runner_rejects_workers_with_scheduler():
    with pytest.raises(ValueError, match="cannot be combined"):
        make_runner(workers=2, scheduler="tcp://127.0.0.1:8786")


def test_pool_refuses_fork():
    with pytest.raises(ValueError, match="'fork'"):
        LocalPoolRunner(workers=2, start_method="fork")


def test_pool_workers_exit_when_the_parent_is_killed(tmp_path):
    # kill -9 gives the parent no chance to shut its pool down; the workers' own guards must end them
    # (measured before the guards: workers lived on for 60-90 s, until their current item finished).
    import psutil

    script = tmp_path / "main_killed.py"
    script.write_text(
        "import sys, threading, time\n"
        "from dct.runner import LocalPoolRunner\n"
        "from tests import _runner_tasks as tasks\n"
        "if __name__ == '__main__':\n"
        "    pool = LocalPoolRunner(workers=2)\n"
        "    threading.Thread(target=lambda: list(pool.map_unordered(tasks.pid_after, [120, 120])), daemon=True).start()\n"
        "    time.sleep(300)\n"
    )
    env = {**os.environ, "PYTHONPATH": os.path.dirname(os.path.dirname(os.path.abspath(__file__)))}
    proc = subprocess.Popen([sys.executable, str(script)], env=env)
    try:
        parent = psutil.Process(proc.pid)
        deadline = time.monotonic() + 60
        workers = []
        while time.monotonic() < deadline:
            workers = [p for p in parent.children(recursive=True) if p.is_running()]
            if len(workers) >= 3:  # the forkserver and its two workers
                break
            time.sleep(0.2)
        assert len(workers) >= 3, f"pool never started: {workers}"
        proc.kill()
        proc.wait(timeout=10)
        gone, alive = psutil.wait_procs(workers, timeout=10)
        assert not alive, f"still running 10 s after kill -9 of the parent: {[p.pid for p in alive]}"
    finally:
        if proc.poll() is None:
            proc.kill()
