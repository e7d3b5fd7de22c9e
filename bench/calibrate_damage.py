"""The labelled visible-damage set against the per-image checks: the numbers behind the defaults.

Every row of ``tests/damage_set/labels.csv`` is a crop and a JPEG setting that a person judged
("visible damage at 2:1": yes or no, by looking at original and JPEG side by side). This script
simulates each with the engine and prints, for several rule sets, how many damaged and undamaged
rows each accepts (a confusion table), then the rows each rule gets wrong.

    python bench/calibrate_damage.py [--csv]
"""

from __future__ import annotations

import argparse
import csv
import sys
from pathlib import Path

import numpy as np
from PIL import Image

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from dct.budget import Measure, Targets, accepts  # noqa: E402
from dct.simulate import simulate  # noqa: E402

SET_DIR = ROOT / "tests" / "damage_set"
# The mean-SSIM target set so low that it never decides: what the other checks do on their own.
_NO_MEAN = 1e-6

RULES = {
    "before: target 0.95 + chroma floor + 16x16 local floor 0.85": Targets(local_floor=0.85, edge_floor=0, blocking_limit=0),
    "now: target 0.95 + chroma floor + visible-damage check (defaults)": Targets(),
    "16x16 local floor 0.85 alone": Targets(target_ssim=_NO_MEAN, chroma_floor=0, local_floor=0.85, edge_floor=0, blocking_limit=0),
    "visible-damage check alone (edge floor + blocking limit)": Targets(target_ssim=_NO_MEAN, chroma_floor=0),
    "visible-damage check + chroma floor 0.95, no mean target": Targets(target_ssim=_NO_MEAN, chroma_floor=0.95),
}


def load_rows() -> list[dict]:
    with (SET_DIR / "labels.csv").open(encoding="utf-8", newline="") as f:
        return list(csv.DictReader(f))


def measure_rows(rows: list[dict]) -> list[tuple[dict, Measure]]:
    out, pixels = [], {}
    for r in rows:
        if r["crop"] not in pixels:
            with Image.open(SET_DIR / f"{r['crop']}.png") as im:
                pixels[r["crop"]] = np.asarray(im.convert("RGB"))
        s = simulate(pixels[r["crop"]], int(r["quality"]), r["subsampling"], int(r["cutoff"]))
        out.append((r, Measure(s.estimated_bytes, s.ssim, s.ssim_cb, s.ssim_cr, s.ssim_local, s.edge_ssim, s.blocking)))
    return out


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--csv", action="store_true", help="also print every row's statistics")
    args = ap.parse_args()
    measured = measure_rows(load_rows())
    damaged = sum(r["damaged"] == "yes" for r, _ in measured)
    clean = len(measured) - damaged
    print(f"{len(measured)} rows: {damaged} visibly damaged at 2:1, {clean} not\n")
    print("| rule | damaged rejected | undamaged accepted |")
    print("| --- | --- | --- |")
    wrong = {}
    for name, t in RULES.items():
        rej = sum(not accepts(m, t) for r, m in measured if r["damaged"] == "yes")
        acc = sum(accepts(m, t) for r, m in measured if r["damaged"] == "no")
        print(f"| {name} | {rej} of {damaged} | {acc} of {clean} ({acc / clean:.0%}) |")
        wrong[name] = [r for r, m in measured if accepts(m, t) == (r["damaged"] == "yes")]
    for name, rows in wrong.items():
        print(f"\n{name}: wrong on " + (", ".join(f"#{r['id']} {r['crop']} q{r['quality']} ({r['damaged']})" for r in rows) or "none"))
    if args.csv:
        print("\nid,crop,quality,cutoff,subsampling,damaged,ssim,chroma,local,edge_ssim,blocking")
        for r, m in measured:
            chroma = "" if m.ssim_cb is None else f"{min(m.ssim_cb, m.ssim_cr):.4f}"
            print(f"{r['id']},{r['crop']},{r['quality']},{r['cutoff']},{r['subsampling']},{r['damaged']},"
                  f"{m.ssim:.4f},{chroma},{m.ssim_local:.4f},{m.edge_ssim:.4f},{m.blocking:.3f}")


if __name__ == "__main__":
    main()
