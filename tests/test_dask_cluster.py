"""DaskRunner against a real dask.distributed cluster on 127.0.0.1.

The cluster is ``distributed.LocalCluster`` with two worker processes (each under its own nanny),
one thread each. The reference for results is the local process pool (and, through it, the task
function called directly, see tests/test_runner.py). A real sweep (``dct.pipeline.run_sweep``) over a small generated sample set must give exactly the
local pool's curves and decisions on the cluster, also when a worker dies during it. The
worker-loss tests kill a worker process
with SIGKILL while tasks are in flight and relies on the scheduler's own rescheduling; the
scheduler's per-prefix ``suspicious`` counter proves that a running task was really lost and rerun.
"""

from __future__ import annotations

import contextlib
import os
import signal
import socket
import threading
import time
from dataclasses import replace
from pathlib import Path

import pytest

from tests import _runner_tasks as tasks
from dct.grid import Grid
from dct.pipeline import run_sweep
from dct.runner import DaskRunner, LocalPoolRunner, RunnerError, TaskFailed, make_runner
from dct.sampleset import discover
from tests.sets import write_set

distributed = pytest.importorskip("distributed")

pytestmark = pytest.mark.slow

ITEMS = [(v, 0.02) for v in (3, 0, 7, -2, 11, 5, -9, 2, 4, 6)]


@contextlib.contextmanager
def new_cluster(n_workers: int = 2):
    # The nannies run in this process and leave their workers' settings (MALLOC_TRIM_THRESHOLD_,
    # OMP/OPENBLAS/MKL_NUM_THREADS=1) in os.environ: put it back for the tests that follow.
    saved = dict(os.environ)
    try:
        with _local_cluster(n_workers) as cluster:
            yield cluster
    finally:
        os.environ.clear()
        os.environ.update(saved)


def _local_cluster(n_workers: int):
    return distributed.LocalCluster(
        n_workers=n_workers,
        processes=True,
        threads_per_worker=1,
        host="127.0.0.1",
        # Not None: the scheduler then still opens its HTTP server, on the fixed port 8787, and
        # warns when another cluster on this machine holds it. Port 0 lets the OS choose.
        dashboard_address="127.0.0.1:0",
    )


@pytest.fixture(scope="module")
def cluster():
    with new_cluster() as c:
        yield c


def collect(runner, fn, items, **kw):
    got = {}
    for index, result in runner.map_unordered(fn, items, **kw):
        assert index not in got, f"index {index} yielded twice"
        got[index] = result
    return got


def test_same_results_as_local_pool(cluster):
    with LocalPoolRunner(workers=2) as pool:
        local = collect(pool, tasks.square_after, ITEMS)
    with DaskRunner(cluster.scheduler_address) as runner:
        remote = collect(runner, tasks.square_after, ITEMS)
        assert runner.description == f"dask scheduler {cluster.scheduler_address}, 2 workers (2 threads)"
    assert remote == local  # TaskFailed compares by (index, message)
    assert remote[3] == TaskFailed(3, "ValueError: negative value -2")
    assert "square_after" in remote[3].detail


def test_work_runs_on_the_workers(cluster):
    with DaskRunner(cluster.scheduler_address) as runner:
        pids = set(collect(runner, tasks.pid_after, [0.2] * 6).values())
        worker_pids = set(runner.connect().run(os.getpid).values())
    assert os.getpid() not in pids
    assert pids <= worker_pids and len(pids) == 2


@pytest.mark.skipif(not hasattr(__import__("ctypes").CDLL(None), "mallinfo2"), reason="needs glibc >= 2.33")
def test_workers_serve_big_arrays_from_the_heap(cluster):
    # Reference: glibc's mallinfo2(). The nanny's MALLOC_TRIM_THRESHOLD_ pins the mmap threshold
    # at 128 kB, so without the runner's fix a 4 MB array would be one fresh mmap.
    with DaskRunner(cluster.scheduler_address) as runner:
        client = runner.connect()
        env = client.run(lambda: os.environ.get("MALLOC_TRIM_THRESHOLD_"))
        assert set(env.values()) == {"65536"}  # dask's default: the situation the fix is for
        got = collect(runner, tasks.mmapped_bytes_for_array, [4 * 2**20] * 4)
    assert max(got.values()) == 0


def test_identical_items_stay_separate(cluster):
    # Equal arguments must not be merged into one task (keys are explicit and unique).
    with DaskRunner(cluster.scheduler_address) as runner:
        got = collect(runner, tasks.square_after, [(3, 0.0)] * 5)
        again = collect(runner, tasks.square_after, [(3, 0.0)] * 5)
    assert got == again == {i: 9 for i in range(5)}


def test_environment_variable_selects_the_cluster(cluster, monkeypatch):
    monkeypatch.setenv("EIGHTFOLD_SCHEDULER", cluster.scheduler_address)
    with make_runner(use_env=True) as runner:
        assert isinstance(runner, DaskRunner)
        assert collect(runner, tasks.square_after, [(6, 0.0)]) == {0: 36}


def test_cancel_stops_promptly(cluster):
    cancel = threading.Event()
    seen = []
    with DaskRunner(cluster.scheduler_address) as runner:
        for index, _ in runner.map_unordered(tasks.square_after, [(v, 0.3) for v in range(40)], cancel=cancel):
            seen.append(index)
            if len(seen) == 2:
                cancel.set()
                cancel_at = time.monotonic()
        assert time.monotonic() - cancel_at < 0.3
        assert 2 <= len(seen) < 6
        # Still usable afterwards, and nothing of the cancelled run is left on the scheduler.
        assert collect(runner, tasks.square_after, [(8, 0.0)]) == {0: 64}
        deadline = time.monotonic() + 5
        while cluster.scheduler.tasks and time.monotonic() < deadline:
            time.sleep(0.05)
        assert not cluster.scheduler.tasks


def test_unreachable_scheduler_is_a_clear_error():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]  # free now, and nothing listens there
    runner = DaskRunner(f"tcp://127.0.0.1:{port}", connect_timeout_s=1)
    with pytest.raises(RunnerError, match=f"cannot reach the dask scheduler at 'tcp://127.0.0.1:{port}'"):
        runner.map_unordered(tasks.square_after, [(1, 0.0)])
    runner.close()


def test_scheduler_without_workers_is_a_clear_error():
    with new_cluster(n_workers=0) as empty, DaskRunner(empty.scheduler_address, worker_wait_s=1) as runner:
        with pytest.raises(RunnerError, match="no workers"):
            runner.map_unordered(tasks.square_after, [(1, 0.0)])


@pytest.mark.parametrize(
    "kw, bad",
    [({"retries": -1}, "-1"), ({"connect_timeout_s": 0}, "0"), ({"worker_wait_s": "5"}, "'5'")],
)
def test_bad_options_are_refused(kw, bad):
    with pytest.raises(ValueError, match=bad):
        DaskRunner("tcp://127.0.0.1:8786", **kw)


@pytest.mark.parametrize("bad", ["", "  ", None, 8786])
def test_bad_address_is_refused(bad):
    with pytest.raises(ValueError, match="address"):
        DaskRunner(bad)


def kill_a_busy_worker(cluster, client) -> int:
    """SIGKILL the process of a worker that is running a task now; returns its pid."""
    deadline = time.monotonic() + 10
    while time.monotonic() < deadline:
        busy = [addr for addr, ws in cluster.scheduler.workers.items() if ws.processing]
        if busy:
            pid = client.run(os.getpid, workers=[busy[0]])[busy[0]]
            os.kill(pid, signal.SIGKILL)
            return pid
        time.sleep(0.01)
    raise AssertionError("no worker was busy within 10 s")


def test_workers_joining_mid_run_get_work():
    with new_cluster(n_workers=1) as c, DaskRunner(c.scheduler_address) as runner:
        pids, seen_descriptions = [], set()
        for i, (index, pid) in enumerate(runner.map_unordered(tasks.pid_after, [0.3] * 30)):
            pids.append(pid)
            seen_descriptions.add(runner.description)
            if i == 0:
                c.scale(3)
        assert len(pids) == 30
        assert len(set(pids)) == 3  # the two new workers took part
        # The runner noticed them (and so widened what it keeps in flight) during the run.
        assert f"dask scheduler {c.scheduler_address}, 3 workers (3 threads)" in seen_descriptions


def test_worker_killed_mid_run_still_gives_every_result():
    items = [(v, 0.4) for v in range(12)]
    with new_cluster() as c, DaskRunner(c.scheduler_address) as runner:
        victim = None
        got = {}
        for index, result in runner.map_unordered(tasks.square_after, items):
            got[index] = result
            if victim is None:
                victim = kill_a_busy_worker(c, runner.connect())
        assert got == {i: v * v for i, (v, _) in enumerate(items)}
        # The scheduler saw a running task lose its worker and gave it to another.
        assert sum(p.suspicious for p in c.scheduler.task_prefixes.values()) >= 1
        # The nanny replaced the dead process.
        c.wait_for_workers(2, timeout=20)
        assert victim not in runner.connect().run(os.getpid).values()


# A real sweep: the small generated set shared with tests/test_pipeline.py, on a reduced grid.
GRID = Grid(cutoffs=(64, 20), subsamplings=("4:4:4", "4:2:0"))


@pytest.fixture(scope="module")
def sample(tmp_path_factory):
    return discover(write_set(tmp_path_factory.mktemp("set")))


@pytest.fixture(scope="module")
def local_sweep(sample):
    with LocalPoolRunner(workers=2) as pool:
        return run_sweep(sample.jobs, sample.classes, grid=GRID, runner=pool)


def as_uploads(jobs):
    # What the web app sends: the file's bytes instead of a path the workers might not see.
    return [replace(j, source=Path(j.source).read_bytes()) for j in jobs]


def decisions(outcome):
    return {k: v for k, v in outcome.document.items() if k != "created"}  # only the clock may differ


def test_real_sweep_same_on_cluster_as_local_pool(cluster, sample, local_sweep):
    with DaskRunner(cluster.scheduler_address) as runner:
        remote = run_sweep(as_uploads(sample.jobs), sample.classes, grid=GRID, runner=runner)
    chosen = [c["setting"] for c in local_sweep.document["classes"]]
    assert len(chosen) == 2 and None not in chosen  # both classes decided: the comparison means something
    assert remote.curves == local_sweep.curves
    assert decisions(remote) == decisions(local_sweep)
    assert remote.evaluated == local_sweep.evaluated > len(sample.jobs)  # coarse pass and refinement


def test_real_sweep_survives_a_worker_killed_mid_run(sample, local_sweep):
    with new_cluster() as c, DaskRunner(c.scheduler_address) as runner:
        killed = []

        def progress(done, total):
            if done >= 1 and not killed:
                killed.append(kill_a_busy_worker(c, runner.connect()))

        remote = run_sweep(as_uploads(sample.jobs), sample.classes, grid=GRID, runner=runner, progress=progress)
        assert killed
        assert sum(p.suspicious for p in c.scheduler.task_prefixes.values()) >= 1
    assert remote.curves == local_sweep.curves
    assert decisions(remote) == decisions(local_sweep)


def test_web_app_sweeps_on_the_cluster_named_by_the_environment(tmp_path, monkeypatch):
    # EIGHTFOLD_SCHEDULER sends the web app's sweeps to the cluster; the answer equals a local run.
    from tests import test_web_sweeps as web

    local = web.make_app(tmp_path / "local")
    local_client = local.test_client()
    set_id = web.upload(local_client)
    sweep = local_client.post(f"/api/sample-sets/{set_id}/sweeps", json=web.REQUEST).get_json()["id"]
    expected = web.wait_done(local_client, sweep)["result"]

    with new_cluster() as fresh:  # a cluster of its own, so its task record is this test's alone
        monkeypatch.setenv("EIGHTFOLD_SCHEDULER", fresh.scheduler_address)
        remote = web.make_app(tmp_path / "remote", SWEEP_WORKERS=None)
        client = remote.test_client()
        set_id = web.upload(client)
        sweep = client.post(f"/api/sample-sets/{set_id}/sweeps", json=web.REQUEST).get_json()["id"]
        body = web.wait_done(client, sweep)
        # The work really ran on the cluster: its scheduler has seen the search's evaluate_search tasks.
        with DaskRunner(fresh.scheduler_address) as runner:
            prefixes = runner.connect().run_on_scheduler(lambda dask_scheduler: list(dask_scheduler.task_prefixes))
    assert body["status"] == "done"
    assert any(p.startswith("evaluate_search") for p in prefixes), prefixes
    got = body["result"]
    assert {k: v for k, v in got.items() if k != "created"} == {k: v for k, v in expected.items() if k != "created"}
