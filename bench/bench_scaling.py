"""Images per second on the local process pool and on a dask.distributed cluster, and what that
means for a large catalogue.

Workload: ``--images`` photo-like images of about 1 MP (816x1224, tiled from scikit-image's bundled
sample photos, see bench/common.py), sent as JPEG bytes (quality 92) the way web uploads travel,
each evaluated by ``dct.evaluate.evaluate_image`` at its own width on a small grid (qualities
40..95 step 5, no cutoff, 4:4:4 and 4:2:0: 24 settings).

Configurations: the local pool with 1 and 2 processes, and a ``distributed.LocalCluster`` on
127.0.0.1 with 1 and 2 worker processes (one thread each). Start-up (processes, imports, a first
tiny job per worker) is timed apart from the run. The dask transfer cost is measured separately by
mapping a function that only returns its payload's length over the same jobs: scheduling plus
moving the bytes, no computing.

    python bench/bench_scaling.py [--images 12] [--configs pool1,pool2,dask1,dask2]

Run it on an otherwise idle machine: it prints the load average it started with.
"""

from __future__ import annotations

import argparse
import os
import pickle
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bench.common import photo_mosaic  # noqa: E402
from dct.evaluate import evaluate_image  # noqa: E402
from dct.io import encode_jpeg  # noqa: E402
from dct.runner import DaskRunner, LocalPoolRunner, TaskFailed  # noqa: E402
from dct.sampleset import ImageJob  # noqa: E402
from dct.tables import Setting  # noqa: E402

SIZE = (816, 1224)  # height, width: 0.999 MP
SETTINGS = tuple(Setting(q, 64, s) for s in ("4:4:4", "4:2:0") for q in range(40, 96, 5))
CATALOGUE = 100_000
WORKER_COUNTS = (2, 16, 64, 256)


def payload_size(job: ImageJob) -> int:
    """Dask transfer probe: the job travels to a worker, only its length comes back."""
    return len(job.source)


def make_jobs(n: int, size=SIZE, seed0: int = 500) -> list[ImageJob]:
    jobs = []
    for i in range(n):
        data = encode_jpeg(photo_mosaic(*size, seed=seed0 + i), quality=92)
        jobs.append(ImageJob(f"img{i:03d}.jpg", "catalogue", data, (None,), (255, 255, 255), SETTINGS))
    return jobs


def timed_map(runner, fn, jobs):
    start = time.perf_counter()
    results = dict(runner.map_unordered(fn, jobs))
    seconds = time.perf_counter() - start
    failed = [r for r in results.values() if isinstance(r, TaskFailed) or getattr(r, "error", None)]
    if failed or len(results) != len(jobs):
        raise SystemExit(f"benchmark run lost or failed items: {failed[:3]!r}")
    return seconds, [results[i] for i in range(len(jobs))]


def run_config(name: str, jobs, warm_jobs):
    """Returns (workers, startup_s, run_s, results, transfer_s or None)."""
    kind, workers = name[:-1], int(name[-1])
    cluster = None
    start = time.perf_counter()
    if kind == "pool":
        runner = LocalPoolRunner(workers=workers)
    else:
        from distributed import LocalCluster

        cluster = LocalCluster(
            n_workers=workers, processes=True, threads_per_worker=1, host="127.0.0.1", dashboard_address="127.0.0.1:0"
        )
        runner = DaskRunner(cluster.scheduler_address)
    try:
        timed_map(runner, evaluate_image, warm_jobs[:workers])  # imports and caches in every worker
        startup = time.perf_counter() - start
        seconds, results = timed_map(runner, evaluate_image, jobs)
        transfer = timed_map(runner, payload_size, jobs)[0] if kind == "dask" else None
        return workers, startup, seconds, results, transfer
    finally:
        runner.close()
        if cluster is not None:
            cluster.close()


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--images", type=int, default=12, help="images in the run (default 12)")
    parser.add_argument("--configs", default="pool1,pool2,dask1,dask2", help="comma-separated subset")
    args = parser.parse_args(argv)
    configs = [c.strip() for c in args.configs.split(",") if c.strip()]
    allowed = {"pool1", "pool2", "dask1", "dask2"}
    if args.images < 1 or not configs or set(configs) - allowed:
        parser.error(f"--images must be >= 1 and --configs a subset of {sorted(allowed)}, got {args!r}")

    cores = os.cpu_count() or 1
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"machine: {cores} cores, load average {load:.2f} at start"
          + ("  (busy: numbers are pessimistic)" if load > 0.5 * cores else ""))
    jobs = make_jobs(args.images)
    warm = make_jobs(2, size=(64, 64), seed0=900)
    mean_bytes = sum(len(j.source) for j in jobs) / len(jobs)
    job_bytes = sum(len(pickle.dumps(j)) for j in jobs) / len(jobs)
    print(f"workload: {len(jobs)} images of {SIZE[1]}x{SIZE[0]} px, JPEG bytes {mean_bytes / 1e3:.0f} kB mean "
          f"(pickled job {job_bytes / 1e3:.0f} kB), {len(SETTINGS)} settings per image")

    rows, reference = [], None
    for name in configs:
        workers, startup, seconds, results, transfer = run_config(name, jobs, warm)
        same = None
        if reference is None:
            reference = results
        else:
            same = [r.as_dict() for r in results] == [r.as_dict() for r in reference]
        rows.append((name, workers, startup, seconds, transfer, same))

    print()
    print(f"{'runner':<8} {'workers':>7} {'start s':>8} {'run s':>8} {'img/s':>7} {'s/img/worker':>13} "
          f"{'transfer ms/img':>16} {'same results':>13}")
    for name, workers, startup, seconds, transfer, same in rows:
        per_worker = seconds * workers / len(jobs)
        tr = f"{1e3 * transfer / len(jobs):.1f}" if transfer is not None else "-"
        sm = "reference" if same is None else ("yes" if same else "NO")
        print(f"{name:<8} {workers:>7} {startup:>8.2f} {seconds:>8.2f} {len(jobs) / seconds:>7.3f} "
              f"{per_worker:>13.2f} {tr:>16} {sm:>13}")

    by_name = {r[0]: r for r in rows}
    bases = [by_name[n] for n in ("dask1", "dask2", "pool1", "pool2") if n in by_name][:2]
    per_worker = {b[0]: b[3] * b[1] / len(jobs) for b in bases}
    per_image = per_worker[bases[0][0]]
    print()
    print(f"Extrapolation to a {CATALOGUE:,}-image catalogue (hours), from the measured seconds per image per worker:")
    print("  workers " + "".join(f"{f'{name} ({s:.2f} s)':>20}" for name, s in per_worker.items()))
    for n in WORKER_COUNTS:
        print(f"  {n:>7} " + "".join(f"{CATALOGUE * s / n / 3600:>20.2f}" for s in per_worker.values()))
    print("Assumptions: linear scaling (each worker a core as fast as these, with nothing else on it);")
    print(f"  images of about 1 MP and this {len(SETTINGS)}-setting grid; a full sweep evaluates the coarse grid")
    print("  plus a refinement pass, so scale by (settings evaluated per image) / "
          f"{len(SETTINGS)} (time per image grows about linearly with settings, after one transform per mode).")
    if "dask1" in by_name and by_name["dask1"][4] is not None:
        transfer = by_name["dask1"][4] / len(jobs)
        print(f"  Transfer measured: {1e3 * transfer:.1f} ms per image on 127.0.0.1 (scheduling + {mean_bytes / 1e3:.0f} kB"
              f" of bytes), {100 * transfer / per_image:.1f}% of the compute; already inside the dask figures above.")
        gb = CATALOGUE * mean_bytes / 1e9
        print(f"  Not measured: a real network. {gb:.1f} GB of JPEG bytes for the catalogue is about "
              f"{gb * 8 / 1 / 60:.1f} min at 1 Gbit/s through the scheduler's network link, if the scheduler"
              " forwards every payload; give workers paths on shared storage to avoid that.")
        print(f"  The probe's {1e3 * transfer:.1f} ms per image is an upper bound on the per-task overhead: "
              f"{CATALOGUE:,} tasks would add {CATALOGUE * transfer / 3600:.2f} h if none of it overlapped "
              "with computing (the runner keeps a second task queued per worker, so most of it does).")
    if "pool1" in by_name and "pool2" in by_name:
        p1, p2 = by_name["pool1"], by_name["pool2"]
        print(f"  Measured scaling here: pool 1 -> 2 processes gave x{p1[3] / p2[3]:.2f} (ideal x2.00)"
              + (f"; dask 1 -> 2 workers x{by_name['dask1'][3] / by_name['dask2'][3]:.2f}"
                 if "dask1" in by_name and "dask2" in by_name else "")
              + f" on {cores} cores, with the client and scheduler sharing them.")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
