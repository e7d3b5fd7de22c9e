"""What fine grain costs before and after the visible-damage check replaced the 16x16 local floor.

Photos from scikit-image's bundled samples, 256x256 crops, with luminance grain of sigma 6 levels
(fixed seeds) as film or a small sensor leaves it. Every image is swept on the coarse grid
(every 5th quality, all cutoffs, 4:4:4 and 4:2:0); the class is then decided twice from the same
curves: with the old default checks (target 0.95, chroma floor, local floor 0.85) and with the new
ones (target 0.95, chroma floor, edge floor and blocking limit). Prints the chosen setting and
bytes of each.

    python bench/grain_budget.py
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
from skimage import data

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from dct.budget import Measure, Targets, decide_class  # noqa: E402
from dct.grid import DEFAULT_GRID  # noqa: E402
from dct.simulate import sweep  # noqa: E402


def grainy(seed: int) -> np.ndarray:
    src = [data.astronaut(), data.coffee(), data.chelsea(), data.rocket()][seed]
    rng = np.random.default_rng(seed)
    y, x = rng.integers(0, src.shape[0] - 256), rng.integers(0, src.shape[1] - 256)
    crop = src[y : y + 256, x : x + 256].astype(float)
    return np.clip(crop + rng.normal(0, 6, (256, 256, 1)), 0, 255).round().astype(np.uint8)


def main():
    from threadpoolctl import threadpool_limits

    threadpool_limits(1, "blas")  # as the workers run (dct.evaluate)
    settings = DEFAULT_GRID.coarse_settings()
    table = {}
    for i in range(4):
        points = sweep(grainy(i), settings)
        table[f"photo{i}"] = {p.setting: Measure(p.estimated_bytes, p.ssim, p.ssim_cb, p.ssim_cr, p.ssim_local,
                                                 p.edge_ssim, p.blocking) for p in points}
    rules = {"before (local floor 0.85)": Targets(local_floor=0.85, edge_floor=0, blocking_limit=0),
             "now (visible-damage check)": Targets(),
             "mean SSIM and chroma only": Targets(edge_floor=0, blocking_limit=0)}
    for name, t in rules.items():
        d = decide_class(table, t)
        if d.setting is None:
            print(f"{name:30s} no setting qualifies")
            continue
        print(f"{name:30s} {d.setting.label():18s} {d.summary.total_bytes / 4000:7.1f} KB per image")


if __name__ == "__main__":
    main()
