"""A whole sweep: every image on the coarse grid, refinement where each class's decision lies, then
the decision and the document.

Size grows with quality for a fixed cutoff and subsampling, but SSIM is only nearly monotone (the DC
quantizer's rounding makes it dip now and then), so a bisection could step over the cheapest
qualifying setting. The refinement instead looks at every pair of neighbouring coarse qualities of
every cutoff/subsampling combination and evaluates the fine qualities between them when

* the pair's lower end is cheaper than the best qualifying coarse setting (otherwise nothing in
  between can be cheaper, since size is monotone), and
* the class is within ``REFINE_MARGIN`` of qualifying at one of the two ends (otherwise no quality
  in between can reach the target, as long as SSIM's dips stay smaller than the margin).

The result is the cheapest setting of the full grid under that assumption; tests compare it with
an exhaustive search. Per-image curves are kept, so a new target or coverage is answered from them
without computing again (:func:`redecide`).
"""

from __future__ import annotations

import contextlib
import tempfile
import threading
from dataclasses import dataclass, field, replace
from typing import Callable, Iterable

from . import budget, report
from .budget import targets_for
from .cache import ResultCache, fingerprint
from .evaluate import ImageResult, SearchJob, evaluate_image, evaluate_search
from .predict import Forecast
from .search import ClassSearch
from .grid import DEFAULT_CURRENT, DEFAULT_GRID, Grid
from .runner import TaskFailed, make_runner
from .sampleset import ClassSpec, ImageJob
from .tables import Setting

REFINE_MARGIN = 0.004  # SSIM; larger than the dips seen between neighbouring qualities
CURVES_SCHEMA = 1


@dataclass
class SweepOutcome:
    curves: dict  # JSON-serialisable: every image's points; feed it to redecide()
    document: dict  # the versioned result document (dct.report)
    cancelled: bool = False
    evaluated: int = 0  # image passes computed in this run
    reused: int = 0  # image passes found in the cache
    settings_evaluated: int = 0  # (image, setting) pairs in the curves, summed over images
    failed_by_luma: int = 0  # further (image, setting) pairs whose luma SSIM alone failed clearly (search)
    warnings: list[str] = field(default_factory=list)


def _job_fingerprint(job) -> str:
    if isinstance(job, SearchJob):
        # Targets matter only to ladders (where they stop): forecasts are reused across targets.
        targets = job.targets
        return fingerprint("search", job.source, {
            "widths": list(job.widths),
            "background": list(job.background),
            "targets": [targets.target_ssim, targets.coverage, targets.effective_chroma_floor, targets.local_floor,
                        targets.edge_floor, targets.blocking_limit] if job.ladders else None,
            "grid": job.grid.as_dict() if job.forecast else None,
            "points": [[w, [s.as_dict() for s in ss]] for w, ss in job.points],
            "ladders": [[w, [[[s.as_dict() for s in ladder.settings], ladder.full] for ladder in ls]]
                        for w, ls in job.ladders],
        })
    return fingerprint(
        "evaluate",
        job.source,
        {
            "widths": list(job.widths),
            "background": list(job.background),
            "settings": [s.as_dict() for s in job.settings],
        },
    )


class _Progress:
    def __init__(self, callback, on_reused=None):
        self.callback = callback
        self.on_reused = on_reused
        self.done = 0
        self.total = 0
        self.reused = 0

    def grow(self, n: int):
        self.total += n
        self._report()

    def step(self, *, reused: bool = False):
        if reused:
            self.reused += 1
            if self.on_reused is not None:
                self.on_reused(self.reused)
        self.done += 1
        self._report()

    def _report(self):
        if self.callback is not None:
            self.callback(self.done, self.total)


def _run_jobs(jobs, runner, cache, progress: _Progress, cancel, counters, fn=evaluate_image) -> dict[str, ImageResult]:
    """Evaluate jobs with ``fn`` (cache first), keyed by job key."""
    out: dict[str, ImageResult] = {}
    todo, prints = [], []
    for job in jobs:
        fp = _job_fingerprint(job)
        hit = cache.get(fp) if cache is not None else None
        if hit is not None:
            out[job.key] = ImageResult.from_dict(hit)
            counters["reused"] += 1
            progress.step(reused=True)
        else:
            todo.append(job)
            prints.append(fp)
    if not todo:
        return out
    for index, result in runner.map_unordered(fn, todo, cancel=cancel):
        job = todo[index]
        if isinstance(result, TaskFailed):
            result = ImageResult(job.key, job.class_name, error=f"evaluation failed: {result.message}")
        elif cache is not None and result.error is None:
            cache.put(prints[index], result.as_dict())
        out[job.key] = result
        counters["evaluated"] += 1
        progress.step()
    return out


def class_tables(results: Iterable[ImageResult], class_name: str, width) -> dict[str, dict[Setting, budget.Measure]]:
    """{image key: {Setting: Measure}} for one class at one width, from evaluated results."""
    table = {}
    for r in results:
        if r.error is not None or r.class_name != class_name:
            continue
        for curve in r.curves:
            if curve.width == width:
                table[r.key] = {p.setting: budget.Measure.of(p) for p in curve.points}
    return table


def plan_refinement(results: dict[str, ImageResult], classes: dict[str, ClassSpec], grid: Grid, *,
                    plain_only: bool = False) -> dict[str, set[Setting]]:
    """Fine settings to evaluate per class, where the class's decision may lie (see module docstring).

    Cutoff-64 combinations are refined up to the cheapest qualifying cutoff-64 setting, so the
    plain-quality fallback each decision reports is as fine as the choice; ``plain_only`` refines
    nothing else.
    """
    coarse = grid.coarse_qualities()
    fine = grid.sorted_qualities
    plan: dict[str, set[Setting]] = {}
    for name, spec in classes.items():
        targets = targets_for(spec)
        wanted: set[Setting] = set()
        for width in spec.widths:
            table = class_tables(results.values(), name, width)
            if not table:
                continue
            keys = sorted(table)
            summaries = {}
            for k, s in grid.combos():
                for q in coarse:
                    setting = Setting(q, k, s)
                    if all(setting in table[key] for key in keys):
                        summaries[setting] = budget.summarize(setting, [table[key][setting] for key in keys], targets)
            qualifying = [x.total_bytes for x in summaries.values() if x.qualifies]
            best = min(qualifying) if qualifying else float("inf")
            plain = [x.total_bytes for x in summaries.values() if x.qualifies and budget.is_plain(x.setting)]
            best_plain = min(plain) if plain else float("inf")
            for k, s in grid.combos():
                if plain_only and k != budget.PLAIN_CUTOFF:
                    continue
                bound = best_plain if k == budget.PLAIN_CUTOFF else best
                for qa, qb in zip(coarse, coarse[1:]):
                    a, b = summaries.get(Setting(qa, k, s)), summaries.get(Setting(qb, k, s))
                    if a is None or b is None or a.total_bytes >= bound:
                        continue
                    if max(a.class_slack, b.class_slack) < -REFINE_MARGIN:
                        continue
                    wanted.update(Setting(q, k, s) for q in fine if qa < q < qb)
        if wanted:
            plan[name] = wanted
    return plan


def _merge(base: ImageResult, extra: ImageResult) -> ImageResult:
    if extra.error is not None:
        return base
    by_width = {c.width: c for c in base.curves}
    for c in extra.curves:
        if c.width in by_width:
            known = {p.setting for p in by_width[c.width].points}
            by_width[c.width].points.extend(p for p in c.points if p.setting not in known)
    return base


def run_sweep(
    jobs: list[ImageJob],
    classes: dict[str, ClassSpec],
    *,
    current: Setting = DEFAULT_CURRENT,
    grid: Grid = DEFAULT_GRID,
    runner=None,
    progress: Callable[[int, int], None] | None = None,
    on_reused: Callable[[int], None] | None = None,
    cancel: threading.Event | None = None,
    cache: ResultCache | None = None,
    refine: bool = True,
    rejected: Iterable = (),
    plain_only: bool = False,
    strategy: str = "search",
) -> SweepOutcome:
    """Sweep a sample set and decide every class.

    Parameters
    ----------
    jobs : list of ImageJob
        Their ``settings`` are ignored: the pipeline sets them (coarse grid, then refinement).
    classes : {name: ClassSpec}
        Targets, coverage, floors and widths per class; every job's class must be here.
    current : Setting
        The setting in use today; always evaluated, for the savings figure.
    grid : Grid
    runner : dct.runner.Runner, optional
        Where the work runs; by default a local process pool on all cores (closed afterwards).
    progress : callable(done, total), optional
        Called as image passes finish; ``total`` grows once when the refinement pass is planned.
    on_reused : callable(count), optional
        Called with the running count of passes taken from the cache (they count as done at once,
        so a time-left estimate should leave them out).
    cancel : threading.Event, optional
        Stops the sweep early; the outcome then has ``cancelled=True`` and no decisions.
    cache : ResultCache, optional
        Finished image passes are stored here and reused, so an interrupted sweep resumes.
    refine : bool
        False evaluates only the coarse grid (faster, coarser decisions).
    rejected : iterable of objects with ``path`` and ``error``
        Files refused before the sweep (discovery), listed in the document.
    plain_only : bool
        Choose only cutoff-64 settings (``dct.budget.decide_class``); the grid is still evaluated whole,
        so the document can show what custom tables would save.
    strategy : {"search", "grid"}
        "search" (the default) forecasts every setting in the coefficient domain and evaluates exactly
        only where a class's decision lies (``dct.search``); the curves then hold those points.
        "grid" evaluates the whole coarse grid on every image and refines (``refine``), for curves
        that answer any later target.
    """
    if strategy not in ("search", "grid"):
        raise ValueError(f"strategy must be 'search' or 'grid', got {strategy!r}")
    missing = sorted({j.class_name for j in jobs} - set(classes))
    if missing:
        raise ValueError(f"jobs name classes without a ClassSpec: {missing!r}")
    own_runner = runner is None
    runner = runner or make_runner()
    counters = {"evaluated": 0, "reused": 0}
    tracker = _Progress(progress, on_reused)
    coarse_settings = list(dict.fromkeys(grid.coarse_settings() + [current]))
    try:
        if strategy == "search":
            results = _search(jobs, classes, current, grid, runner, cache, tracker, cancel, counters, plain_only)
            if results is None:
                return _cancelled(counters)
            return _outcome(jobs, results, classes, current, grid, rejected, plain_only, counters)
        tracker.grow(len(jobs))
        first = [replace(j, settings=tuple(coarse_settings)) for j in jobs]
        results = _run_jobs(first, runner, cache, tracker, cancel, counters)
        if cancel is not None and cancel.is_set():
            return _cancelled(counters)
        if refine:
            plan = plan_refinement(results, classes, grid, plain_only=plain_only)
            second = [
                replace(j, settings=tuple(sorted(plan[j.class_name])))
                for j in jobs
                if j.class_name in plan and results.get(j.key) is not None and results[j.key].error is None
            ]
            tracker.grow(len(second))
            extra = _run_jobs(second, runner, cache, tracker, cancel, counters)
            if cancel is not None and cancel.is_set():
                return _cancelled(counters)
            for key, r in extra.items():
                results[key] = _merge(results[key], r)
    finally:
        if own_runner:
            runner.close()
    return _outcome(jobs, results, classes, current, grid, rejected, plain_only, counters)


def _outcome(jobs, results, classes, current, grid, rejected, plain_only, counters) -> SweepOutcome:
    ordered = [results[j.key] for j in sorted(jobs, key=lambda j: j.key)]
    curves = {
        "schema_version": CURVES_SCHEMA,
        "grid": grid.as_dict(),
        "current": current.as_dict(),
        "images": [r.as_dict() for r in ordered],
        "rejected": [{"path": r.path, "error": r.error} for r in rejected],
    }
    document = redecide(curves, classes, current=current, plain_only=plain_only)
    return SweepOutcome(
        curves=curves,
        document=document,
        evaluated=counters["evaluated"],
        reused=counters["reused"],
        settings_evaluated=sum(len(c.points) for r in ordered for c in r.curves),
        failed_by_luma=counters.get("failed_by_luma", 0),
        warnings=[f"{r.key}: {w}" for r in ordered for w in r.warnings],
    )


def _search(jobs, classes, current, grid, runner, cache, tracker, cancel, counters, plain_only):
    """Forecast every image, then run every class's search (``dct.search``) in shared rounds: each
    round is one job per image that still has something to evaluate. None when cancelled."""
    from .runner import LocalPoolRunner

    # A local pool's workers share prepared images in a folder private to this user, removed at the
    # end; other runners' workers keep them in memory only.
    shared = isinstance(runner, LocalPoolRunner)
    with tempfile.TemporaryDirectory(prefix="eightfold-prepared-") if shared else contextlib.nullcontext() as store:
        return _search_rounds(jobs, classes, current, grid, runner, cache, tracker, cancel, counters, plain_only, store)


def _search_rounds(jobs, classes, current, grid, runner, cache, tracker, cancel, counters, plain_only, store):
    by_key = {j.key: j for j in jobs}

    def job_for(j: ImageJob, **kw) -> SearchJob:
        return SearchJob(j.key, j.class_name, j.source, tuple(j.widths), tuple(j.background),
                         targets_for(classes[j.class_name]), store=store, **kw)

    first = [job_for(j, grid=grid, forecast=True, points=tuple((w, (current,)) for w in j.widths)) for j in jobs]
    tracker.grow(len(first))
    results = _run_jobs(first, runner, cache, tracker, cancel, counters, fn=evaluate_search)
    if cancel is not None and cancel.is_set():
        return None
    searches: dict[tuple[str, object], ClassSearch] = {}
    for name, spec in classes.items():
        members = [r for r in results.values() if r.class_name == name and r.error is None]
        for width in spec.widths:
            forecasts = {r.key: Forecast.from_dict(r.forecasts[width]) for r in members if width in r.forecasts}
            if not forecasts:
                continue
            search = ClassSearch(forecasts, targets_for(spec), grid, plain_only=plain_only)
            for r in members:
                for curve in r.curves:
                    if curve.width == width:
                        for p in curve.points:
                            search.add(r.key, p.setting, budget.Measure.of(p))
            searches[(name, width)] = search
    while True:
        asked: dict[str, dict] = {}
        for (name, width), search in searches.items():
            for key, ladders in search.requests().items():
                asked.setdefault(key, {})[width] = tuple(ladders)
        if not asked:
            break
        round_jobs = [job_for(by_key[key], ladders=tuple(per_width.items())) for key, per_width in sorted(asked.items())]
        tracker.grow(len(round_jobs))
        extra = _run_jobs(round_jobs, runner, cache, tracker, cancel, counters, fn=evaluate_search)
        if cancel is not None and cancel.is_set():
            return None
        for key, r in extra.items():
            if r.error is not None:
                # A later round failed on this image (a worker died, say): it is listed as rejected
                # with the reason, and every class decides on its other images.
                results[key].error = r.error
                results[key].curves = []
                for search in searches.values():
                    search.drop(key)
                continue
            results[key] = _merge(results[key], r)
            counters["failed_by_luma"] = counters.get("failed_by_luma", 0) + sum(len(v) for v in r.failed.values())
            for curve in r.curves:
                search = searches.get((r.class_name, curve.width))
                if search is not None:
                    for p in curve.points:
                        search.add(key, p.setting, budget.Measure.of(p))
            for width, pairs in r.failed.items():
                search = searches.get((r.class_name, width))
                if search is not None:
                    for setting, luma in pairs:
                        search.add_failure(key, setting, luma)
    for r in results.values():
        r.forecasts, r.failed = {}, {}  # working data: the curves hold the exact points only
    return results


def _cancelled(counters) -> SweepOutcome:
    return SweepOutcome(curves={}, document={}, cancelled=True, evaluated=counters["evaluated"], reused=counters["reused"])


def redecide(curves: dict, classes: dict[str, ClassSpec], *, current: Setting | None = None,
             plain_only: bool = False) -> dict:
    """Decide every class again from stored curves (no encoding): the document for these targets.

    ``plain_only`` chooses among cutoff-64 settings only (a pipeline that takes a quality number).
    """
    if current is None:
        current = Setting.from_dict(curves["current"])
    results = [ImageResult.from_dict(d) for d in curves["images"]]
    decisions = []
    for name in sorted(classes):
        spec = classes[name]
        for width in spec.widths:
            table = class_tables(results, name, width)
            if not table:
                continue
            decision = budget.decide_class(table, targets_for(spec), current=current, plain_only=plain_only)
            decisions.append((spec, width, decision))
    rejected = list(curves.get("rejected", []))
    rejected += [{"path": r.key, "error": r.error} for r in results if r.error is not None]
    return report.build_document(
        decisions=decisions,
        results=results,
        rejected=rejected,
        current=current,
        grid=curves.get("grid"),
        plain_only=plain_only,
    )
