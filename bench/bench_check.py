"""What ``eightfold check`` costs per image, against the brute-force way and against a sweep, same run.

Workload: ``--images`` photo mosaics of about 1 MP (1024 x 1024), one class entry at q70 k28 4:2:0
with the default targets, one process.

* check: ``dct.contract.check_image`` (Pillow encode with the budget's tables, decode, Eightfold's SSIM
  on luma, Cb and Cr, and the local statistic), as ``eightfold check`` runs it per image and width;
* brute force: the same encode and decode measured with scikit-image's SSIM (``bench.common``), the
  way a script without Eightfold would check an image; its luma SSIM is compared with check's;
* sweep: ``dct.evaluate.evaluate_image`` on the default coarse grid (every 5th quality), the first
  pass a sweep makes of every image: what deciding again would cost instead of checking.

    python bench/bench_check.py [--images 6]

Every timing pins BLAS to one thread, as the runner's workers do.
"""

from __future__ import annotations

import argparse
import io
import sys
from pathlib import Path

from PIL import Image

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bench.common import Timer, brute_force_point, photo_mosaic  # noqa: E402
from dct import budget, contract  # noqa: E402
from dct.evaluate import evaluate_image  # noqa: E402
from dct.grid import DEFAULT_GRID  # noqa: E402
from dct.sampleset import ImageJob  # noqa: E402
from dct.tables import Setting  # noqa: E402


def main(argv=None):
    from threadpoolctl import threadpool_limits

    # As the runner's workers do (dct.evaluate, dct.contract.run_check_job): one BLAS thread, one image
    # per core; threaded BLAS on these banded products was 7x slower on this 2-core machine.
    with threadpool_limits(limits=1, user_api="blas"):
        _main(argv)


def _main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--images", type=int, default=6)
    args = ap.parse_args(argv)
    setting = Setting(70, 28, "4:2:0")
    luma, chroma = setting.tables()
    entry = contract.ClassBudget("photo", None, setting, tuple(luma.ravel()), tuple(chroma.ravel()), budget.Targets())
    images = [photo_mosaic(1024, 1024, seed=i) for i in range(args.images)]
    mp = sum(im.shape[0] * im.shape[1] for im in images) / 1e6

    check_s = brute_s = sweep_s = 0.0
    worst = 0.0
    for im in images:
        with Timer() as t:
            r = contract.check_image(im, entry)
        check_s += t.seconds
        with Timer() as t:
            b = brute_force_point(im, setting)
        brute_s += t.seconds
        worst = max(worst, abs(r.ssim - b["ssim"]))
    coarse = tuple(DEFAULT_GRID.coarse_settings())
    for i, im in enumerate(images[:2]):  # a sweep pass is slow: two images stand for all
        buf = io.BytesIO()
        Image.fromarray(im).save(buf, "PNG")
        job = ImageJob(f"i{i}", "photo", buf.getvalue(), (None,), (255, 255, 255), coarse)
        with Timer() as t:
            evaluate_image(job)
        sweep_s += t.seconds
    sweep_per_mp = sweep_s / (2 * 1024 * 1024 / 1e6)
    print(f"{args.images} images, {mp:.2f} MP, one class entry at {setting.label()}, one process")
    print(f"check:       {check_s / mp:.3f} s per MP")
    print(f"brute force: {brute_s / mp:.3f} s per MP  ({brute_s / check_s:.2f}x the check's time; "
          f"largest luma SSIM difference {worst:.2e})")
    print(f"sweep pass:  {sweep_per_mp:.3f} s per MP on the coarse grid ({len(coarse)} settings): "
          f"{sweep_per_mp / (check_s / mp):.0f}x a check")


if __name__ == "__main__":
    main()
