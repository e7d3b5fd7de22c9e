"""Deciding a class: Eightfold's search against a well-written re-encoding script, same run, one core.

Per setting, on one photo mosaic:
  * the engine's exact evaluation (``PreparedImage.evaluate``) and its forecast, per grid setting;
  * naive brute force: Pillow encode and decode, scikit-image SSIM (luma, Cb, Cr);
  * fast brute force: Pillow encode and decode (the luma by Pillow's own conversion), SSIM through
    OpenCV's separable Gaussian and numpy with the reference statistics cached
    (``bench.common.OpenCvSsim``), the engine's visible-damage check with its reference cached too;
    and, for reference only, the same peer borrowing the engine's compiled SSIM (faster than a
    re-encoding script would be).

Per class: 7 photo mosaics, the default grid (912 settings) and default targets.
  * the script: for every cutoff x subsampling it bisects each image's lowest accepting quality with
    the fast brute force (assuming SSIM is monotone in quality), takes the coverage quantile of those
    qualities as the class's, sums real bytes there and keeps the cheapest combination;
  * Eightfold: ``run_sweep`` with one worker, no cache (what ``eightfold sweep --workers 1
    --no-cache`` runs). Both decide by ``dct.budget.accepts``; the decisions are compared.

Then the demo sweep's wall time from the CLI (2 workers, no cache) and the peak memory of a 24 MP
sweep in a fresh process.

    python bench/bench_decide.py [--quick]
"""

from __future__ import annotations

import argparse
import io
import json
import math
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from PIL import Image

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bench.common import OpenCvSsim, brute_force_point, photo_mosaic  # noqa: E402
from dct import damage  # noqa: E402
from dct.budget import Measure, accepts, targets_for  # noqa: E402
from dct.color import rgb_to_ycbcr  # noqa: E402
from dct.grid import DEFAULT_GRID  # noqa: E402
from dct.io import encode_jpeg  # noqa: E402
from dct.pipeline import run_sweep  # noqa: E402
from dct.predict import forecast  # noqa: E402
from dct.quality import ReferenceStats  # noqa: E402
from dct.runner import make_runner  # noqa: E402
from dct.sampleset import discover  # noqa: E402
from dct.simulate import PreparedImage  # noqa: E402
from dct.tables import Setting  # noqa: E402
from dct.threads import single_threaded  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


class FastBrute:
    """The fast re-encoding way for one image: real libjpeg files, OpenCV SSIM, cached references.

    Its SSIM is :class:`bench.common.OpenCvSsim`, a practitioner's OpenCV + numpy script. With
    ``engine_ssim`` it borrows the engine's compiled SSIM (``dct.quality.ReferenceStats``) instead:
    a peer faster than any re-encoding script would be, printed for reference only. The
    visible-damage check is always the engine's (``dct.damage``): the decision needs those numbers.
    """

    def __init__(self, rgb: np.ndarray, *, engine_ssim: bool = False):
        self.rgb = rgb
        ycc = rgb_to_ycbcr(rgb)
        self.engine_ssim = engine_ssim
        self.refs = [ReferenceStats(p) if engine_ssim else OpenCvSsim(p) for p in ycc]
        self.edges = damage.EdgeReference(ycc[0])
        self.seen: dict[Setting, Measure] = {}

    def _ssim(self, plane: int, decoded: np.ndarray) -> tuple[float, float, np.ndarray]:
        """(SSIM, local statistic, map); the chroma planes need only their mean."""
        if self.engine_ssim:
            r = self.refs[plane].compare(decoded, want_map=plane == 0, want_local=plane == 0)
            return r.ssim, r.local, r.ssim_map
        return self.refs[plane].compare(decoded, local=plane == 0)

    def measure(self, s: Setting) -> Measure:
        if s in self.seen:
            return self.seen[s]
        data = encode_jpeg(self.rgb, quality=s.quality, cutoff=s.cutoff, subsampling=s.subsampling)
        with Image.open(io.BytesIO(data)) as im:
            luma = np.asarray(im.convert("L"))  # the decoded RGB's luma (T.871 weights, as dct.color.luma)
        with Image.open(io.BytesIO(data)) as im:
            im.draft("YCbCr", im.size)  # libjpeg's own upsampled chroma planes
            planes = np.asarray(im).astype(np.float32).transpose(2, 0, 1)
        ssim, local, ssim_map = self._ssim(0, luma)
        seen = self.edges.measure(luma, ssim_map)
        m = Measure(len(data), ssim, self._ssim(1, planes[1])[0], self._ssim(2, planes[2])[0],
                    local, seen.edge_ssim, seen.blocking)
        self.seen[s] = m
        return m


def bisect_class(images: list[np.ndarray], targets, grid=DEFAULT_GRID):
    """The re-encoding script's class decision; returns (setting, total bytes, encodes)."""
    qs = list(grid.sorted_qualities)
    brutes = [FastBrute(im) for im in images]
    need = max(1, math.ceil(targets.coverage * len(images) - 1e-9))
    best = None
    for k, s in grid.combos():
        crossings = []
        for b in brutes:
            lo, hi = 0, len(qs)  # first index that accepts, assuming monotone
            while lo < hi:
                mid = (lo + hi) // 2
                if accepts(b.measure(Setting(qs[mid], k, s)), targets):
                    hi = mid
                else:
                    lo = mid + 1
            crossings.append(lo)
        at = sorted(crossings)[need - 1]
        if at >= len(qs):
            continue
        setting = Setting(qs[at], k, s)
        total = sum(b.measure(setting).estimated_bytes for b in brutes)
        if best is None or total < best[1]:
            best = (setting, total)
    return best, sum(len(b.seen) for b in brutes)


def per_setting(rgb: np.ndarray, settings: list[Setting], rounds: int = 5) -> dict:
    """Steady-state time per setting, as a worker meets settings one after another.

    In each round every way runs over the list on a fresh instance whose one-time work per image
    (the engine's transforms and references, the peers' reference statistics) is done before the
    clock starts, on settings outside the list, so that no timed setting is a cache hit. The ways
    take turns within a round, so the machine's drift touches them alike; the first round only warms
    up (compiled loops loaded, memory pools grown), and the median of the others is kept.
    """
    outside = [Setting(50, 64, "4:4:4"), Setting(50, 64, "4:2:0")]

    def engine():
        prepared = PreparedImage(rgb)
        for s in outside:
            prepared.evaluate(s)
        return prepared.evaluate

    def peer(engine_ssim):
        def make():
            fast = FastBrute(rgb, engine_ssim=engine_ssim)
            for s in outside:
                fast.measure(s)
            return fast.measure
        return make

    ways = {"engine_exact": engine, "fast_brute": peer(False), "fast_brute_engine_ssim": peer(True)}
    times: dict[str, list[float]] = {name: [] for name in ways}
    with single_threaded():
        for _ in range(rounds + 1):
            for name, make in ways.items():
                measure = make()
                t = time.perf_counter()
                for s in settings:
                    measure(s)
                times[name].append((time.perf_counter() - t) / len(settings))
        out = {name: statistics.median(t[1:]) for name, t in times.items()}
        out["ratios"] = [f / e for f, e in zip(times["fast_brute"][1:], times["engine_exact"][1:])]
        t = time.perf_counter()
        forecast(PreparedImage(rgb), DEFAULT_GRID)
        out["engine_forecast"] = (time.perf_counter() - t) / len(DEFAULT_GRID.settings())
        t = time.perf_counter()
        for s in settings[:4]:
            brute_force_point(rgb, s, chroma=True)
        out["naive_brute"] = (time.perf_counter() - t) / 4
    return out


MEMORY_CHILD = """
import resource, sys, time
sys.path.insert(0, {root!r})
import numpy as np
from PIL import Image
from bench.common import photo_mosaic
from dct.pipeline import run_sweep
from dct.runner import make_runner
from dct.sampleset import discover
root = {folder!r}
(__import__('pathlib').Path(root) / 'big').mkdir(exist_ok=True)
Image.fromarray(photo_mosaic(4000, 6000, seed=7)).save(root + '/big/big.png')
sample = discover(root)
t = time.perf_counter()
run_sweep(sample.jobs, sample.classes, runner=make_runner(workers=1))
print(time.perf_counter() - t, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024)
"""


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="smaller images, no 24 MP run")
    ap.add_argument("--images", type=int, default=7)
    args = ap.parse_args()
    size = (480, 640) if args.quick else (750, 1000)
    photos = [photo_mosaic(*size, seed=300 + i) for i in range(args.images)]

    settings = [Setting(q, k, s) for q in (35, 60, 85) for k in (64, 20) for s in ("4:4:4", "4:2:0")]
    ps = per_setting(photos[0], settings)
    mp = size[0] * size[1] / 1e6
    print(f"per setting, {mp:.2f} MP, one core:")
    for name in ("engine_exact", "engine_forecast", "fast_brute", "fast_brute_engine_ssim", "naive_brute"):
        print(f"  {name:22s} {ps[name] * 1000:8.2f} ms")
    print(f"  (medians of {len(ps['ratios'])} rounds; fast brute force / exact per round: "
          f"{', '.join(f'{r:.2f}' for r in ps['ratios'])})")
    print(f"  exact vs fast brute force {ps['fast_brute'] / ps['engine_exact']:.2f}x "
          f"({ps['fast_brute_engine_ssim'] / ps['engine_exact']:.2f}x against it with the engine's SSIM), "
          f"vs naive {ps['naive_brute'] / ps['engine_exact']:.2f}x")
    print(f"  forecast vs fast brute force {ps['fast_brute'] / ps['engine_forecast']:.0f}x, "
          f"vs naive {ps['naive_brute'] / ps['engine_forecast']:.0f}x")

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp) / "photos"
        folder.mkdir()
        for i, im in enumerate(photos):
            Image.fromarray(im).save(folder / f"p{i}.png")
        sample = discover(Path(tmp))
        targets = targets_for(sample.classes["photos"])
        with single_threaded():
            t = time.perf_counter()
            (script_choice, script_bytes), encodes = bisect_class(photos, targets)
            script_time = time.perf_counter() - t
        runner = make_runner(workers=1)
        t = time.perf_counter()
        outcome = run_sweep(sample.jobs, sample.classes, runner=runner)
        ours_time = time.perf_counter() - t
        runner.close()
        c = outcome.document["classes"][0]
        ours = (Setting.from_dict(c["setting"]), c["estimated_bytes"]) if c["setting"] else None
        print(f"class of {len(photos)} photos, {mp:.2f} MP each, default grid ({len(DEFAULT_GRID.settings())} settings):")
        print(f"  bisection script  {script_time:7.2f} s  ({encodes} encodes)  -> {script_choice.label()} {script_bytes} B")
        print(f"  eightfold search  {ours_time:7.2f} s  ({outcome.settings_evaluated} exact evaluations and "
              f"{outcome.failed_by_luma} luma-only clear failures, {outcome.evaluated} image passes)"
              f"  -> {ours[0].label() if ours else None} {ours and ours[1]} B")
        print(f"  ratio {script_time / ours_time:.2f}x; decisions agree: {ours == (script_choice, script_bytes)}")

    decisions = {}
    for strategy in ("search",) if args.quick else ("search", "grid"):
        with tempfile.TemporaryDirectory() as tmp:
            t = time.perf_counter()
            subprocess.run([sys.executable, "-m", "dct.cli", "sweep", str(ROOT / "demo_images"), "--workers", "2",
                            "--no-cache", "--quiet", "--strategy", strategy, "--json", f"{tmp}/doc.json"],
                           check=True, cwd=ROOT, stdout=subprocess.DEVNULL)
            elapsed = time.perf_counter() - t
            doc = json.loads(Path(f"{tmp}/doc.json").read_text())
        decisions[strategy] = {(c["name"], c["width"]): (c["setting"], c["estimated_bytes"],
                                                         c["plain_fallback"] and c["plain_fallback"]["setting"])
                               for c in doc["classes"]}
        print(f"demo sweep (25 images, CLI, 2 workers, no cache, --strategy {strategy}): {elapsed:.1f} s")
    if len(decisions) == 2:
        print(f"  same decisions and plain fallbacks in every class: {decisions['search'] == decisions['grid']}")

    if not args.quick:
        with tempfile.TemporaryDirectory() as tmp:
            out = subprocess.run([sys.executable, "-c", MEMORY_CHILD.format(root=str(ROOT), folder=tmp)],
                                 check=True, capture_output=True, text=True).stdout.split()
            print(f"24 MP sweep: {float(out[0]):.1f} s, peak RSS {float(out[1]):.0f} MB (parent), "
                  f"{float(out[2]):.0f} MB (largest worker)")


if __name__ == "__main__":
    main()
