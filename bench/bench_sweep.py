"""The class decision for a sample set: Eightfold's sweep against the brute-force way, same run.

Workload: 60 photos of about 1 MP in 2 classes ("catalogue": photo mosaics; "lifestyle": the same
kind of pictures, softer), default grid (qualities 20..95, 6 cutoffs, 4:4:4 and 4:2:0 = 912
settings), default targets, a local process pool on all cores.

The brute-force way evaluates every grid setting of an image with a Pillow encode (optimize=True),
a decode and scikit-image SSIM (luma, Cb, Cr and the SSIM map for the local floor), then makes the
same decision. Doing that for all 60 images would take hours here, so it runs on ``--brute-images``
images per class (also on all cores) and its time is scaled linearly to the 60 images: its cost
per image does not depend on which image it is beyond the pixel count, which is the same. The
chosen settings are compared on that subset, where both ways decide on the same images.

    python bench/bench_sweep.py [--images 60] [--brute-images 2] [--quick]
"""

from __future__ import annotations

import argparse
import io
import os
import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np
from PIL import Image
from scipy import ndimage

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bench.common import PILLOW_SUBSAMPLING, photo_mosaic  # noqa: E402
from dct.budget import Measure, decide_class  # noqa: E402
from dct.color import rgb_to_ycbcr  # noqa: E402
from dct.grid import DEFAULT_GRID, Grid  # noqa: E402
from dct.pipeline import run_sweep, targets_for  # noqa: E402
from dct.quality import LOCAL_PERCENTILE, _tile_means  # noqa: E402
from dct.runner import make_runner  # noqa: E402
from dct.sampleset import discover  # noqa: E402


def make_set(root: Path, n: int, size=(880, 1200)) -> Path:
    for i in range(n):
        cls = "catalogue" if i % 2 == 0 else "lifestyle"
        img = photo_mosaic(*size, seed=100 + i)
        if cls == "lifestyle":
            img = ndimage.gaussian_filter(img.astype(float), (1.2, 1.2, 0)).clip(0, 255).astype(np.uint8)
        (root / cls).mkdir(parents=True, exist_ok=True)
        Image.fromarray(img).save(root / cls / f"{cls}-{i:03d}.png")
    return root


def _brute_settings(args):
    """All settings of one image the brute-force way; returns {setting: Measure}."""
    from skimage.metrics import structural_similarity

    path, settings = args
    rgb = np.asarray(Image.open(path).convert("RGB"))
    orig = rgb_to_ycbcr(rgb)
    out = {}
    for s in settings:
        luma, chroma = s.tables()
        buf = io.BytesIO()
        Image.fromarray(rgb).save(buf, "JPEG", qtables=[luma.ravel().tolist(), chroma.ravel().tolist()],
                                  subsampling=PILLOW_SUBSAMPLING[s.subsampling], optimize=True)
        im = Image.open(io.BytesIO(buf.getvalue()))
        im.draft("YCbCr", im.size)
        planes = np.asarray(im).astype(np.float64).transpose(2, 0, 1)
        kw = dict(gaussian_weights=True, sigma=1.5, use_sample_covariance=False, data_range=255)
        ssim_y, smap = structural_similarity(orig[0].astype(np.float64), planes[0], full=True, **kw)
        local = float(np.percentile(_tile_means(smap), LOCAL_PERCENTILE))
        cb = structural_similarity(orig[1].astype(np.float64), planes[1], **kw)
        cr = structural_similarity(orig[2].astype(np.float64), planes[2], **kw)
        out[s] = Measure(buf.tell(), ssim_y, cb, cr, local)
    return path, out


def brute_force(sample, keys, grid: Grid, workers: int):
    settings = grid.settings()
    chunks = [settings[i : i + 76] for i in range(0, len(settings), 76)]
    tasks = [(j.source, c) for j in sample.jobs if j.key in keys for c in chunks]
    table: dict[str, dict] = {}
    by_source = {j.source: j.key for j in sample.jobs}
    with ProcessPoolExecutor(workers) as pool:
        for path, part in pool.map(_brute_settings, tasks):
            table.setdefault(by_source[path], {}).update(part)
    return table


def decisions_from(table_by_key, sample):
    out = {}
    for name, spec in sample.classes.items():
        t = {k: v for k, v in table_by_key.items() if k.startswith(name + "/")}
        if t:
            out[name] = decide_class(t, targets_for(spec)).setting
    return out


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--images", type=int, default=60)
    ap.add_argument("--brute-images", type=int, default=2, help="per class")
    ap.add_argument("--quick", action="store_true", help="tiny images and grid (smoke run)")
    args = ap.parse_args()
    workers = os.cpu_count() or 1
    grid = DEFAULT_GRID if not args.quick else Grid(qualities=tuple(range(40, 96)), cutoffs=(64, 20))
    size = (880, 1200) if not args.quick else (160, 200)
    with tempfile.TemporaryDirectory() as tmp:
        root = make_set(Path(tmp), args.images, size)
        sample = discover(root)
        print(f"{len(sample.jobs)} images of {size[1]}x{size[0]} ({size[0] * size[1] / 1e6:.2f} MP) in "
              f"{len(sample.classes)} classes; grid of {len(grid.settings())} settings; {workers} workers")

        t0 = time.perf_counter()
        with make_runner(workers=workers) as runner:
            ours = run_sweep(sample.jobs, sample.classes, grid=grid, runner=runner)
        t_ours = time.perf_counter() - t0
        print(f"eightfold sweep: {t_ours:.1f} s for {len(sample.jobs)} images, "
              f"{ours.settings_evaluated / len(sample.jobs):.0f} settings per image on average")
        for c in ours.document["classes"]:
            print(f"  {c['name']}: {c['setting']}  mean {c['mean_bytes'] / 1000:.1f} KB")

        subset = []
        for name in sorted(sample.classes):
            subset += [j.key for j in sample.jobs if j.class_name == name][: args.brute_images]
        sub_jobs = [j for j in sample.jobs if j.key in subset]
        with make_runner(workers=workers) as runner:
            ours_sub = run_sweep(sub_jobs, sample.classes, grid=grid, runner=runner)
        t0 = time.perf_counter()
        table = brute_force(sample, set(subset), grid, workers)
        t_brute_sub = time.perf_counter() - t0
        t_brute = t_brute_sub * len(sample.jobs) / len(subset)
        print(f"brute force: {t_brute_sub:.1f} s for {len(subset)} images x {len(grid.settings())} settings "
              f"-> {t_brute:.0f} s scaled to {len(sample.jobs)} images")
        print(f"speed-up: {t_brute / t_ours:.1f}x")
        brute_choice = decisions_from(table, sample)
        ours_choice = {c["name"]: c["setting"] for c in ours_sub.document["classes"]}
        print("decisions on the brute-force subset (eightfold vs brute force):")
        for name in sorted(brute_choice):
            b = brute_choice[name]
            o = ours_choice.get(name)
            same = (b is None and o is None) or (
                b is not None and o is not None and o["cutoff"] == b.cutoff and o["subsampling"] == b.subsampling
                and abs(o["quality"] - b.quality) <= 1
            )
            print(f"  {name}: {o} vs {None if b is None else b.as_dict()}  {'same (±1 quality)' if same else 'DIFFERENT'}")


if __name__ == "__main__":
    main()
