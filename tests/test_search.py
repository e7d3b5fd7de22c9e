"""The forecast-guided search (dct.predict, dct.search) decides exactly as an exhaustive search does.

References: Parseval's theorem for the orthonormal DCT-II, checked with scipy.fft (dctn/idctn,
norm="ortho"); SSIM's block form is eq. 13 of Wang et al. 2004 with the block as the window.
"""

import numpy as np
import pytest
from dataclasses import replace
from PIL import Image
from scipy import fft

from dct import predict
from dct.evaluate import ImageResult
from dct.grid import Grid
from dct.pipeline import class_tables, redecide, run_sweep
from dct.quality import C1, C2
from dct.runner import make_runner
from dct.sampleset import discover
from dct.simulate import PreparedImage, SweepPoint
from dct.tables import ZIGZAG, Setting, quant_tables
from tests.sets import write_set

GRID = Grid(cutoffs=(64, 20), subsamplings=("4:4:4", "4:2:0"))
EXHAUSTIVE = replace(GRID, coarse_step=1)


def dark_ui(seed: int, size=(120, 152)) -> np.ndarray:
    """A dark-mode card: pure black with grey text-like strokes and one saturated badge. Pure black
    is where libjpeg's rounding makes SSIM dip between neighbouring qualities."""
    rng = np.random.default_rng(seed)
    img = np.zeros(size + (3,), np.uint8)
    for _ in range(14):
        y, x = rng.integers(4, size[0] - 8), rng.integers(4, size[1] - 30)
        img[y : y + 2, x : x + rng.integers(8, 26)] = rng.integers(120, 230)
    img[10:26, 10:40] = (230, 30, 60)
    return img


@pytest.fixture(scope="module")
def sample(tmp_path_factory):
    root = write_set(tmp_path_factory.mktemp("set"))
    (root / "dark").mkdir()
    for i in range(3):
        Image.fromarray(dark_ui(40 + i)).save(root / "dark" / f"dark{i}.png")
    return discover(root)


@pytest.fixture(scope="module")
def exhaustive(sample):
    return run_sweep(sample.jobs, sample.classes, grid=EXHAUSTIVE, runner=make_runner(workers=1), refine=False,
                     strategy="grid")


def decisions(doc):
    return {(c["name"], c["width"]): (c["setting"], c["estimated_bytes"],
                                      c["plain_fallback"] and c["plain_fallback"]["setting"]) for c in doc["classes"]}


def test_the_set_has_ssim_dips(sample, exhaustive):
    """The comparison below is only meaningful if SSIM is not monotone somewhere in this set."""
    results = [ImageResult.from_dict(d) for d in exhaustive.curves["images"]]
    dips = 0
    for name in sample.classes:
        for key, points in class_tables(results, name, None).items():
            for k, s in GRID.combos():
                ssim = [points[Setting(q, k, s)].ssim for q in GRID.sorted_qualities]
                dips += int(np.sum(np.diff(ssim) < -1e-4))
    assert dips > 0


@pytest.mark.parametrize("target", [0.85, 0.90, 0.93, 0.96, 0.98])
@pytest.mark.parametrize("coverage", [0.5, 1.0])
def test_search_decides_as_the_exhaustive_search(sample, exhaustive, target, coverage):
    classes = {n: replace(s, target_ssim=target, coverage=coverage) for n, s in sample.classes.items()}
    searched = run_sweep(sample.jobs, classes, grid=GRID, runner=make_runner(workers=1))
    assert decisions(searched.document) == decisions(redecide(exhaustive.curves, classes))
    # ...from a fraction of the grid's exact evaluations.
    assert searched.settings_evaluated < 0.25 * exhaustive.settings_evaluated


@pytest.mark.parametrize("target", [0.90, 0.96])
def test_search_plain_only_decides_as_the_exhaustive_search(sample, exhaustive, target):
    classes = {n: replace(s, target_ssim=target, coverage=0.6) for n, s in sample.classes.items()}
    searched = run_sweep(sample.jobs, classes, grid=GRID, runner=make_runner(workers=1), plain_only=True)
    assert decisions(searched.document) == decisions(redecide(exhaustive.curves, classes, plain_only=True))


def test_chosen_setting_is_exact_for_every_image(sample, exhaustive):
    """The chosen setting's figures are exact evaluations of every image, not forecasts."""
    searched = run_sweep(sample.jobs, sample.classes, grid=GRID, runner=make_runner(workers=1))
    truth = {d["key"]: d for d in exhaustive.curves["images"]}
    for c in searched.document["classes"]:
        if c["setting"] is None:
            continue
        setting = Setting.from_dict(c["setting"])
        for image in searched.curves["images"]:
            if image["class"] != c["name"]:
                continue
            mine = next(p for p in image["curves"][0]["points"] if Setting.from_dict(p) == setting)
            theirs = next(p for p in truth[image["key"]]["curves"][0]["points"] if Setting.from_dict(p) == setting)
            assert mine == theirs


def test_block_statistics_follow_parseval():
    """Block mean, variance and covariance from coefficients equal the pixel-domain ones (scipy.fft)."""
    rng = np.random.default_rng(3)
    x = rng.integers(0, 256, size=(50, 8, 8)).astype(np.float64)
    y = np.clip(x + rng.normal(0, 9, size=x.shape), 0, 255)
    cx = fft.dctn(x - 128, axes=(1, 2), norm="ortho").reshape(50, 64)[:, ZIGZAG]
    cy = fft.dctn(y - 128, axes=(1, 2), norm="ortho").reshape(50, 64)[:, ZIGZAG]
    mx, vx, my, vy, cov = predict.block_moments(cx, cy)
    xf, yf = x.reshape(50, 64), y.reshape(50, 64)
    np.testing.assert_allclose(mx, xf.mean(1), atol=1e-9)
    np.testing.assert_allclose(my, yf.mean(1), atol=1e-9)
    np.testing.assert_allclose(vx, xf.var(1), atol=1e-7)
    np.testing.assert_allclose(vy, yf.var(1), atol=1e-7)
    np.testing.assert_allclose(cov, ((xf - xf.mean(1, keepdims=True)) * (yf - yf.mean(1, keepdims=True))).mean(1),
                               atol=1e-7)
    # And the block SSIM is eq. 13 of Wang et al. 2004 on those moments.
    expected = ((2 * mx * my + C1) * (2 * cov + C2)) / ((mx**2 + my**2 + C1) * (vx + vy + C2))
    np.testing.assert_allclose(predict.block_ssim(cx, cy), expected, rtol=1e-12)


def test_plane_prediction_matches_direct_quantization():
    """predict_plane's cutoff sums equal quantizing with each cutoff's own table."""
    rng = np.random.default_rng(5)
    pixels = rng.integers(0, 256, size=(64, 64, 3)).astype(np.uint8)
    luma = PreparedImage(pixels).dct_coefficients("4:4:4")[0].reshape(-1, 64)
    qualities, cutoffs = (30, 75), (64, 20, 5)
    tables, _ = predict.quality_tables_zigzag(qualities)
    pred = predict.predict_plane(luma, tables, cutoffs)
    from dct.simulate import quantize

    for i, q in enumerate(qualities):
        for j, k in enumerate(cutoffs):
            table = quant_tables(q, k)[0].reshape(64)[ZIGZAG]
            qz = quantize(luma, table)
            d = qz * table.astype(np.float64)
            assert pred.nonzeros[i, j] == np.count_nonzero(qz)
            np.testing.assert_allclose(pred.ssim[i, j], predict.block_ssim(luma / 8.0, d).mean(), rtol=1e-5)


def test_forecast_tracks_exact_ssim_and_bytes():
    """On a scikit-image photo the forecast follows the exact engine: SSIM correlation > 0.99 along
    quality (chroma > 0.97), bytes within 10 % (the search only uses forecasts to decide where to look)."""
    from skimage import data

    img = data.astronaut()[::2, ::2].copy()
    prepared = PreparedImage(img)
    grid = Grid(cutoffs=(64, 28), subsamplings=("4:2:0",))
    fc = predict.forecast(prepared, grid)
    qs = (25, 40, 55, 70, 85, 95)
    exact = [prepared.evaluate(Setting(q, 64, "4:2:0")) for q in qs]
    luma, cb, cr, size = fc.column(64, "4:2:0", qs)
    assert np.corrcoef(luma, [e.ssim for e in exact])[0, 1] > 0.99
    assert np.corrcoef(cb, [e.ssim_cb for e in exact])[0, 1] > 0.97  # chroma 4:2:0: 0.98 seen
    np.testing.assert_allclose(size, [e.estimated_bytes for e in exact], rtol=0.10)


def test_an_image_failing_in_a_later_round_is_listed_and_the_rest_decide(sample, monkeypatch):
    """A worker that dies on one image after its forecast (a later round) loses only that image."""
    import dct.pipeline as pipeline
    from dct.evaluate import ImageResult, evaluate_search

    victim = sorted(j.key for j in sample.jobs if j.class_name == "photo")[0]

    def flaky(job):
        if job.key == victim and job.ladders:
            return ImageResult(job.key, job.class_name, error="evaluation failed: the worker process died")
        return evaluate_search(job)

    monkeypatch.setattr(pipeline, "evaluate_search", flaky)
    outcome = run_sweep(sample.jobs, sample.classes, grid=GRID, runner=make_runner(workers=1))
    rejected = {r["path"]: r["error"] for r in outcome.document["rejected"]}
    assert "worker process died" in rejected[victim]
    photo = next(c for c in outcome.document["classes"] if c["name"] == "photo")
    assert photo["image_count"] == len([j for j in sample.jobs if j.class_name == "photo"]) - 1
    assert photo["setting"] is not None


def test_a_grid_without_the_current_default(sample):
    """The current default (q85 k64 4:2:0) lies outside this grid in quality, cutoff and mode."""
    grid = Grid(qualities=tuple(range(30, 81, 2)), cutoffs=(28,), subsamplings=("4:4:4",))
    exhaustive = run_sweep(sample.jobs, sample.classes, grid=replace(grid, coarse_step=1),
                           runner=make_runner(workers=1), refine=False, strategy="grid")
    searched = run_sweep(sample.jobs, sample.classes, grid=grid, runner=make_runner(workers=1))
    assert decisions(searched.document) == decisions(redecide(exhaustive.curves, sample.classes))


def test_luma_verdicts_are_clear_failures_of_the_full_point(sample, exhaustive, monkeypatch):
    """Ladders end at a luma-only verdict without the rest of the point: every such verdict must be a
    clear failure of the full exact point too (so the search learns nothing the full point would
    not say), and the decision stays the exhaustive one."""
    from dct.budget import Measure, targets_for
    from dct.search import ClassSearch, clear_failure

    seen = []
    original = ClassSearch.add_failure

    def record(self, key, setting, luma):
        seen.append((key, setting, luma))
        original(self, key, setting, luma)

    monkeypatch.setattr(ClassSearch, "add_failure", record)
    searched = run_sweep(sample.jobs, sample.classes, grid=GRID, runner=make_runner(workers=1))
    assert decisions(searched.document) == decisions(redecide(exhaustive.curves, sample.classes))
    assert seen and searched.failed_by_luma == len(seen)
    truth = {d["key"]: d for d in exhaustive.curves["images"]}
    classes = {j.key: j.class_name for j in sample.jobs}
    for key, setting, luma in seen:
        point = next(p for p in truth[key]["curves"][0]["points"] if Setting.from_dict(p) == setting)
        assert luma == point["ssim"]
        assert clear_failure(Measure.of(SweepPoint.from_dict(point)), targets_for(sample.classes[classes[key]]))


def test_image_results_keep_their_verdicts_through_the_cache_format():
    result = ImageResult("a.png", "photo", failed={None: [(Setting(40, 20, "4:2:0"), 0.81)]})
    assert ImageResult.from_dict(result.as_dict()).failed == result.failed
