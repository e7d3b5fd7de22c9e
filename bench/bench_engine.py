"""Engine speed and memory: dct.sweep against the brute-force way, measured in the same run.

Workload: 16 qualities (20..95 step 5) x 2 subsamplings (4:4:4, 4:2:0) on a ~1 MP and a ~4 MP photo
mosaic. The brute-force way does, per setting, a Pillow encode with optimize=True, a decode and
scikit-image SSIM; it is timed twice: luma SSIM only, and with Cb/Cr SSIM too (the outputs the
engine gives). Then the peak memory of a 24 MP sweep is measured in a fresh process.

    python bench/bench_engine.py [--quick]
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys

import numpy as np
from threadpoolctl import threadpool_limits

sys.path.insert(0, __file__.rsplit("/", 2)[0])

import dct  # noqa: E402
from dct.color import rgb_to_ycbcr  # noqa: E402
from bench.common import Timer, brute_force_point, photo_mosaic  # noqa: E402

MEMORY_CHILD = """
import resource, sys, json
import numpy as np
sys.path.insert(0, {root!r})
import dct
from bench.common import photo_mosaic
img = photo_mosaic(4000, 6000, seed=3)
base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
settings = [dct.Setting(q, 64, s) for q in (30, 60, 90) for s in ("4:4:4", "4:2:0")]
points = dct.sweep(img, settings)
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({{"peak_mb": peak / 1024, "before_sweep_mb": base / 1024, "image_mb": img.nbytes / 2**20,
                  "settings": len(points)}}))
"""


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="fewer settings and no 4 MP image (smoke run)")
    args = ap.parse_args()
    qualities = range(20, 96, 5) if not args.quick else (30, 70)
    settings = [dct.Setting(q, 64, s) for q in qualities for s in ("4:4:4", "4:2:0")]
    sizes = [(1024, 1024), (2048, 2048)] if not args.quick else [(512, 512)]
    print(f"{len(settings)} settings per image; numpy {np.__version__}")
    print(f"{'image':>11}  {'engine s':>9}  {'brute luma s':>12}  {'brute all s':>11}  {'x luma':>7}  {'x all':>7}  {'max |dSSIM|':>11}  {'max bytes err':>13}")
    rows = []
    for h, w in sizes:
        img = photo_mosaic(h, w, seed=h)
        with threadpool_limits(limits=1, user_api="blas"), Timer() as t_engine:
            points = dct.sweep(img, settings)  # one core, as each worker process runs it
        with Timer() as t_luma:
            orig = rgb_to_ycbcr(img)
            for s in settings:
                brute_force_point(img, s, chroma=False, orig=orig)
        with Timer() as t_all:
            orig = rgb_to_ycbcr(img)
            brute = [brute_force_point(img, s, chroma=True, orig=orig) for s in settings]
        d_ssim = max(abs(p.ssim - b["ssim"]) for p, b in zip(points, brute))
        d_bytes = max(abs(p.estimated_bytes - b["bytes"]) / b["bytes"] for p, b in zip(points, brute))
        row = dict(mp=h * w / 1e6, engine=t_engine.seconds, luma=t_luma.seconds, all=t_all.seconds)
        rows.append(row)
        print(f"{h * w / 1e6:8.1f} MP  {t_engine.seconds:9.2f}  {t_luma.seconds:12.2f}  {t_all.seconds:11.2f}  "
              f"{t_luma.seconds / t_engine.seconds:7.1f}  {t_all.seconds / t_engine.seconds:7.1f}  {d_ssim:11.4f}  {d_bytes:13.2%}")
    for r in rows:
        print(f"per setting at {r['mp']:.1f} MP: engine {1000 * r['engine'] / len(settings):.0f} ms, "
              f"brute force {1000 * r['luma'] / len(settings):.0f} ms (luma SSIM) / {1000 * r['all'] / len(settings):.0f} ms (luma+chroma)")
    if not args.quick:
        root = __file__.rsplit("/", 2)[0]
        out = subprocess.run([sys.executable, "-c", MEMORY_CHILD.format(root=root)], capture_output=True, text=True, check=True)
        mem = json.loads(out.stdout)
        print(f"24 MP sweep ({mem['settings']} settings): peak RSS {mem['peak_mb']:.0f} MB "
              f"(process before the sweep: {mem['before_sweep_mb']:.0f} MB, the RGB image itself {mem['image_mb']:.0f} MB)")


if __name__ == "__main__":
    main()
