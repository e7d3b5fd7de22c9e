"""The sweep pipeline: refinement finds what an exhaustive search finds; decisions behave."""

import threading
from dataclasses import replace

import pytest

from dct.budget import DEFAULT_LOCAL_FLOOR
from dct.cache import DirectoryCache
from dct.grid import Grid
from dct.pipeline import redecide, run_sweep
from dct.runner import make_runner
from dct.sampleset import discover
from tests.sets import write_set

GRID = Grid(cutoffs=(64, 20), subsamplings=("4:4:4", "4:2:0"))
EXHAUSTIVE = replace(GRID, coarse_step=1)  # every quality is "coarse": nothing left to refine


@pytest.fixture(scope="module")
def sample(tmp_path_factory):
    return discover(write_set(tmp_path_factory.mktemp("set")))


@pytest.fixture(scope="module")
def exhaustive(sample):
    return run_sweep(sample.jobs, sample.classes, grid=EXHAUSTIVE, runner=make_runner(workers=1), refine=False,
                     strategy="grid")


def with_targets(classes, **kw):
    return {name: replace(spec, **kw) for name, spec in classes.items()}


def chosen(doc):
    return {(c["name"], c["width"]): (c["setting"], c["estimated_bytes"]) for c in doc["classes"]}


@pytest.mark.parametrize("target", [0.90, 0.96])
@pytest.mark.parametrize("coverage", [0.6, 1.0])
def test_refinement_finds_the_exhaustive_choice(sample, exhaustive, target, coverage):
    classes = with_targets(sample.classes, target_ssim=target, coverage=coverage)
    refined = run_sweep(sample.jobs, classes, grid=GRID, runner=make_runner(workers=1), strategy="grid")
    truth = redecide(exhaustive.curves, classes)
    assert chosen(refined.document) == chosen(truth)
    # ...while computing far fewer settings than the full grid.
    assert refined.settings_evaluated < 0.6 * exhaustive.settings_evaluated


def test_higher_target_never_cheaper(sample, exhaustive):
    previous = {}
    for target in (0.85, 0.90, 0.93, 0.95, 0.97, 0.98):
        doc = redecide(exhaustive.curves, with_targets(sample.classes, target_ssim=target, local_floor=0))
        for c in doc["classes"]:
            if c["setting"] is None:
                previous[c["name"]] = float("inf")
                continue
            assert c["estimated_bytes"] >= previous.get(c["name"], 0)
            previous[c["name"]] = c["estimated_bytes"]


def test_flat_graphics_get_a_different_budget_from_noisy_photos(exhaustive):
    doc = exhaustive.document
    by_name = {c["name"]: c for c in doc["classes"]}
    flat, photo = by_name["flat"], by_name["photo"]
    assert flat["setting"] != photo["setting"]
    assert flat["setting"]["quality"] < photo["setting"]["quality"]
    assert flat["bpp"] < photo["bpp"] / 3


def test_document_shape(exhaustive):
    doc = exhaustive.document
    assert doc["schema_version"] == 2
    c = doc["classes"][0]
    for key in ("name", "image_count", "setting", "quant_tables", "estimated_bytes", "coverage_met", "ssim_min", "savings_vs_current"):
        assert key in c
    assert set(c["setting"]) == {"quality", "cutoff", "subsampling"}
    assert len(c["quant_tables"]["luma"]) == 8 and len(c["quant_tables"]["luma"][0]) == 8
    assert c["local_floor"] == DEFAULT_LOCAL_FLOOR
    img = doc["images"][0]
    assert {"path", "class", "estimated_bytes", "ssim"} <= set(img)
    assert len(doc["images"]) == 6 and doc["rejected"] == []


def test_pool_gives_the_same_answer_as_one_worker(sample):
    one = run_sweep(sample.jobs, sample.classes, grid=GRID, runner=make_runner(workers=1))
    with make_runner(workers=2) as pool:
        two = run_sweep(sample.jobs, sample.classes, grid=GRID, runner=pool)
    a, b = dict(one.document), dict(two.document)
    a.pop("created"), b.pop("created")
    assert a == b


def test_cache_resumes_without_recomputing(sample, tmp_path):
    cache = DirectoryCache(tmp_path / "cache")
    first = run_sweep(sample.jobs, sample.classes, grid=GRID, runner=make_runner(workers=1), cache=cache)
    assert first.evaluated > 0 and first.reused == 0
    counts = []
    again = run_sweep(sample.jobs, sample.classes, grid=GRID, runner=make_runner(workers=1), cache=cache,
                      on_reused=counts.append)
    assert again.evaluated == 0 and again.reused == first.evaluated
    assert counts == list(range(1, again.reused + 1))
    assert chosen(again.document) == chosen(first.document)


def test_cancel_and_progress(sample):
    cancel = threading.Event()
    seen = []

    def progress(done, total):
        seen.append((done, total))
        if done >= 2:
            cancel.set()

    out = run_sweep(sample.jobs, sample.classes, grid=GRID, runner=make_runner(workers=1), progress=progress, cancel=cancel)
    assert out.cancelled and out.document == {}
    assert seen[0] == (0, 6) and max(d for d, _ in seen) < 6


def test_unknown_class_is_an_error(sample):
    with pytest.raises(ValueError, match="jobs name classes without a ClassSpec"):
        run_sweep(sample.jobs, {}, grid=GRID, runner=make_runner(workers=1))


def fallback(doc):
    return {(c["name"], c["width"]): c["plain_fallback"] and (c["plain_fallback"]["setting"], c["plain_fallback"]["estimated_bytes"])
            for c in doc["classes"]}


@pytest.mark.parametrize("target", [0.90, 0.96])
def test_refinement_finds_the_exhaustive_plain_quality_fallback(sample, exhaustive, target):
    """The cutoff-64 fallback is refined as finely as the choice: equal to the exhaustive search's."""
    from dct.contract import validate_document

    classes = with_targets(sample.classes, target_ssim=target, coverage=0.6)
    refined = run_sweep(sample.jobs, classes, grid=GRID, runner=make_runner(workers=1), strategy="grid")
    truth = redecide(exhaustive.curves, classes)
    assert fallback(refined.document) == fallback(truth)
    assert any(v is not None for v in fallback(truth).values())
    plain = run_sweep(sample.jobs, classes, grid=GRID, runner=make_runner(workers=1), plain_only=True,
                      strategy="grid")
    assert chosen(plain.document) == chosen(redecide(exhaustive.curves, classes, plain_only=True))
    assert plain.document["choice"] == "plain_quality" and refined.document["choice"] == "custom_tables"
    for c in plain.document["classes"]:
        assert c["setting"] is None or c["setting"]["cutoff"] == 64
        if c["setting"]:
            assert c["plain_fallback"]["extra_bytes"] == 0
    for doc in (refined.document, truth, plain.document):
        validate_document(doc)
