"""How the local floor changes each demo class's decision: the numbers behind its default.

Sweeps demo_images/ once on the coarse grid, then decides every class again for several local
floors (no new computation), printing the chosen setting, its mean SSIM and the worst image's
local SSIM (the 5th percentile of 16x16-tile mean SSIM).

    python bench/calibrate_local_floor.py [--floors 0,0.8,0.85,0.88,0.9]
"""

from __future__ import annotations

import argparse
import sys
from dataclasses import replace
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from dct.cache import DirectoryCache, default_cache_dir  # noqa: E402
from dct.pipeline import redecide, run_sweep  # noqa: E402
from dct.sampleset import discover  # noqa: E402


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--floors", default="0,0.8,0.85,0.88,0.9,0.92")
    ap.add_argument("--target", type=float, default=0.95)
    args = ap.parse_args()
    floors = [float(f) for f in args.floors.split(",")]
    sample = discover(ROOT / "demo_images")
    classes = {n: replace(s, target_ssim=args.target) for n, s in sample.classes.items()}
    out = run_sweep(sample.jobs, classes, refine=False, cache=DirectoryCache(default_cache_dir()))
    print(f"target SSIM {args.target}, coverage 0.9, coarse grid; columns: chosen setting / mean KB per image")
    print("class".ljust(14) + "".join(f"floor {f:<22}" for f in floors))
    for name in sorted(classes):
        cells = []
        for f in floors:
            doc = redecide(out.curves, {n: replace(s, local_floor=f) for n, s in classes.items()})
            c = next((c for c in doc["classes"] if c["name"] == name), None)
            if c is None:  # a class whose files were all rejected (e.g. the folder's README)
                break
            if c["setting"] is None:
                cells.append("none".ljust(28))
                continue
            s = c["setting"]
            cells.append(f"q{s['quality']} k{s['cutoff']} {s['subsampling']} {c['mean_bytes'] / 1000:6.1f}".ljust(28))
        if cells:
            print(name.ljust(14) + "".join(cells))


if __name__ == "__main__":
    main()
