"""The ``eightfold`` console script: ``sweep``, ``decide``, ``check`` and ``export`` on the command
line, ``serve`` and ``demo`` for the app.

Exit codes of ``eightfold sweep``: 0 when every class has a setting; 3 when some class has no
setting in the grid that meets its targets (the document still lists it, with a message); 4 when no
file of the sample set could be used; 2 for bad options (click's usage errors); 1 otherwise.

Exit codes of ``eightfold check``: 0 when every class meets its coverage; 1 when some class does not,
or a file could not be checked (broken, too small, or of a class the budget lacks); 2 for bad usage
(including a budget file that is not a valid budget document); 4 when no image could be checked.
"""

from __future__ import annotations

import dataclasses
import json
import sys
import threading
from dataclasses import replace
from pathlib import Path

import click

from . import budget, contract, report
from .cache import DirectoryCache, default_cache_dir, fingerprint
from .grid import DEFAULT_CURRENT, DEFAULT_GRID, Grid
from .tables import SUBSAMPLINGS, Setting

EXIT_UNMET = 3
EXIT_NOTHING_USABLE = 4


def _int_list(text: str, name: str) -> tuple[int, ...]:
    """"20-95" or "20-95/5" or "64,40,20" -> ints."""
    out: list[int] = []
    try:
        for part in text.split(","):
            part = part.strip()
            if "-" in part:
                span, _, step = part.partition("/")
                lo, hi = (int(v) for v in span.split("-"))
                out.extend(range(lo, hi + 1, int(step or 1)))
            elif part:
                out.append(int(part))
    except ValueError:
        raise click.BadParameter(f"expected numbers like '20-95' or '64,40,20', got {text!r}", param_hint=name)
    if not out:
        raise click.BadParameter(f"no values in {text!r}", param_hint=name)
    return tuple(out)


def _unit_interval(ctx, param, value):
    if value is not None and not 0 < value <= 1:
        raise click.BadParameter(f"must be in (0, 1], got {value}")
    return value


def _floor(ctx, param, value):
    if value is not None and not 0 <= value <= 1:
        raise click.BadParameter(f"must be in [0, 1], got {value}")
    return value


@click.group()
@click.version_option(package_name="eightfold")
def main():
    """Eightfold: choose per-class JPEG quality budgets from a sample set of a site's images."""


@main.command()
@click.argument("sample_dir", type=click.Path(exists=True, file_okay=False, path_type=Path))
@click.option("--target-ssim", type=float, callback=_unit_interval, help=f"Luma SSIM each image must reach [default {budget.DEFAULT_TARGET_SSIM}].")
@click.option("--coverage", type=float, callback=_unit_interval, help=f"Share of a class's images that must reach it [default {budget.DEFAULT_COVERAGE}].")
@click.option("--chroma-floor", type=float, callback=_floor, help="Cb and Cr SSIM floor [default: the target].")
@click.option("--local-floor", type=float, callback=_floor, help=f"Floor for the worst 5% of 16x16-tile SSIM; 0 turns it off [default {budget.DEFAULT_LOCAL_FLOOR}].")
@click.option("--current-quality", type=click.IntRange(1, 100), default=DEFAULT_CURRENT.quality, show_default=True, help="Quality of the setting in use today.")
@click.option("--current-cutoff", type=click.IntRange(1, 64), default=DEFAULT_CURRENT.cutoff, show_default=True, help="Zigzag cutoff of the setting in use today (64 = all coefficients).")
@click.option("--current-subsampling", type=click.Choice(SUBSAMPLINGS), default=DEFAULT_CURRENT.subsampling, show_default=True)
@click.option("--classes", "classes_file", type=click.Path(exists=True, dir_okay=False, path_type=Path), help="classes.toml (default: SAMPLE_DIR/classes.toml if present).")
@click.option("--json", "json_out", type=click.Path(dir_okay=False, path_type=Path), help="Write the result document here ('-' for stdout).")
@click.option("--csv", "csv_out", type=click.Path(dir_okay=False, path_type=Path), help="Write one CSV row per class here.")
@click.option("--curves", "curves_out", type=click.Path(dir_okay=False, path_type=Path), help="Save every image's curves, for 'eightfold decide'.")
@click.option("--verify", is_flag=True, help="Re-encode every image at its chosen setting with Pillow and report actual bytes and SSIM.")
@click.option("--workers", type=click.IntRange(1, None), help="Local worker processes [default: all cores].")
@click.option("--scheduler", help="Run on a dask.distributed scheduler, e.g. tcp://HOST:8786.")
@click.option("--qualities", default="20-95", show_default=True, help="Quality grid.")
@click.option("--cutoffs", default=",".join(map(str, DEFAULT_GRID.cutoffs)), show_default=True, help="Zigzag cutoffs.")
@click.option("--subsamplings", default=",".join(DEFAULT_GRID.subsamplings), show_default=True, help="Subsampling modes.")
@click.option("--strategy", type=click.Choice(["search", "grid"]), default="search", show_default=True,
              help="search: forecast every setting, evaluate exactly only where each class's decision lies. "
                   "grid: evaluate the coarse grid on every image, then refine (curves for any later target).")
@click.option("--no-refine", is_flag=True, help="With --strategy grid: evaluate only the coarse grid (every 5th quality).")
@click.option("--plain-quality", is_flag=True, help="Choose only cutoff-64 settings: what an encoder's quality number (and a subsampling mode) can give.")
@click.option("--cache-dir", type=click.Path(file_okay=False, path_type=Path), help=f"Where finished per-image results are kept [default {default_cache_dir()}].")
@click.option("--no-cache", is_flag=True, help="Do not read or write the result cache.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
def sweep(sample_dir, target_ssim, coverage, chroma_floor, local_floor, current_quality, current_cutoff, current_subsampling,
          classes_file, json_out, csv_out, curves_out, verify, workers, scheduler, qualities, cutoffs, subsamplings,
          strategy, no_refine, plain_quality, cache_dir, no_cache, quiet):
    """Sweep SAMPLE_DIR (one sub-folder per class) and print each class's cheapest setting."""
    from tqdm import tqdm

    from .pipeline import run_sweep
    from .runner import RunnerError, make_runner
    from .sampleset import ClassSpec, discover

    try:
        grid = Grid(
            qualities=_int_list(qualities, "--qualities"),
            cutoffs=_int_list(cutoffs, "--cutoffs"),
            subsamplings=tuple(s.strip() for s in subsamplings.split(",") if s.strip()),
        )
    except ValueError as exc:
        raise click.BadParameter(str(exc))
    current = Setting(current_quality, current_cutoff, current_subsampling)
    overrides = {
        k: v
        for k, v in dict(target_ssim=target_ssim, coverage=coverage, chroma_floor=chroma_floor, local_floor=local_floor).items()
        if v is not None
    }
    defaults = replace(ClassSpec(name="default"), **overrides)
    try:
        sample = discover(sample_dir, classes_file=classes_file, defaults=defaults)
    except ValueError as exc:
        raise click.ClickException(str(exc))
    if sample.skipped:
        n = len(sample.skipped)
        click.echo(f"skipped {n} text file{'s' if n != 1 else ''} (not images): {', '.join(sample.skipped)}", err=True)
    if not sample.jobs:
        click.echo(f"no image files found in {sample_dir}", err=True)
        sys.exit(EXIT_NOTHING_USABLE)

    cache = None if no_cache else DirectoryCache(cache_dir or default_cache_dir())
    try:
        runner = make_runner(workers=workers, scheduler=scheduler)
    except (ValueError, RunnerError) as exc:
        raise click.ClickException(str(exc))
    # The bar counts image passes (the forecasts, then each round of exact evaluations), not images.
    bar = tqdm(total=len(sample.jobs), unit="pass", desc="image passes", disable=quiet, file=sys.stderr)

    def progress(done, total):
        bar.total = total
        bar.n = done
        bar.refresh()

    try:
        with runner:
            outcome = run_sweep(sample.jobs, sample.classes, current=current, grid=grid, runner=runner,
                                progress=progress, cache=cache, refine=not no_refine, rejected=sample.rejected,
                                plain_only=plain_quality, strategy=strategy)
            bar.close()
            doc = outcome.document
            if verify:
                _verify(doc, sample, runner, cache, quiet)
    except RunnerError as exc:
        bar.close()
        raise click.ClickException(str(exc))
    except KeyboardInterrupt:
        bar.close()
        click.echo("interrupted; finished images are kept in the cache and reused on the next run", err=True)
        sys.exit(130)

    for w in outcome.warnings:
        click.echo(f"warning: {w}", err=True)
    if plain_quality and 64 not in grid.cutoffs:
        click.echo("warning: --plain-quality needs cutoff 64 in --cutoffs; no class can have a setting", err=True)
    text = _document_text(doc)
    if json_out is not None:
        if str(json_out) == "-":
            click.echo(text)
        else:
            json_out.write_text(text + "\n", encoding="utf-8")
    if csv_out is not None:
        csv_out.write_text(report.document_to_csv(doc), encoding="utf-8")
    if curves_out is not None:
        classes = {n: dataclasses.asdict(s) for n, s in sample.classes.items()}
        curves_out.write_text(json.dumps({"classes": classes, **outcome.curves}) + "\n", encoding="utf-8")
    if str(json_out) != "-":
        click.echo(report.format_table(doc))
        click.echo(
            f"{outcome.evaluated} image passes computed, {outcome.reused} reused from the cache; "
            f"{outcome.settings_evaluated} settings evaluated in all"
            + (f", {outcome.failed_by_luma} more seen to fail by their luma SSIM alone" if outcome.failed_by_luma else "")
            + f" ({runner.description})"
        )
    if not doc["classes"]:
        sys.exit(EXIT_NOTHING_USABLE)
    if any(c["setting"] is None for c in doc["classes"]):
        sys.exit(EXIT_UNMET)


@main.command()
@click.argument("curves_file", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.option("--target-ssim", type=float, callback=_unit_interval, help="New luma SSIM target for every class.")
@click.option("--coverage", type=float, callback=_unit_interval, help="New coverage for every class.")
@click.option("--chroma-floor", type=float, callback=_floor)
@click.option("--local-floor", type=float, callback=_floor)
@click.option("--plain-quality", is_flag=True, help="Choose only cutoff-64 settings (quality number only).")
@click.option("--json", "json_out", type=click.Path(dir_okay=False, path_type=Path), help="Write the document here ('-' for stdout).")
def decide(curves_file, target_ssim, coverage, chroma_floor, local_floor, plain_quality, json_out):
    """Decide again from curves saved by 'eightfold sweep --curves', with new targets (no encoding).

    Only the settings the sweep evaluated are candidates: run the sweep again (its cache makes that
    cheap) for a search around the new targets, or sweep with '--strategy grid' for curves that
    answer any target.
    """
    from .pipeline import redecide
    from .sampleset import ClassSpec

    try:
        saved = json.loads(curves_file.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, ValueError) as exc:
        raise click.BadParameter(f"{curves_file} is not a curves file from 'eightfold sweep --curves' "
                                 f"(not JSON: {exc})", param_hint="CURVES_FILE")
    if isinstance(saved, dict) and "schema_version" in saved and isinstance(saved.get("classes"), list):
        raise click.BadParameter(
            f"{curves_file} is a result document ('eightfold sweep --json'), not a curves file; "
            "save curves with 'eightfold sweep SAMPLE_DIR --curves FILE' and decide from that",
            param_hint="CURVES_FILE")
    if not isinstance(saved, dict) or not isinstance(saved.get("classes"), dict) or not isinstance(saved.get("images"), list):
        raise click.BadParameter(f"{curves_file} is not a curves file from 'eightfold sweep --curves': it needs "
                                 "'classes' (an object) and 'images' (a list)", param_hint="CURVES_FILE")
    try:
        overrides = {k: v for k, v in dict(target_ssim=target_ssim, coverage=coverage, chroma_floor=chroma_floor,
                                           local_floor=local_floor).items() if v is not None}
        classes = {}
        for name, d in saved["classes"].items():
            d = dict(d, widths=tuple(d["widths"]), background=tuple(d["background"]))
            classes[name] = dataclasses.replace(ClassSpec(**d), **overrides)
        doc = redecide(saved, classes, plain_only=plain_quality)
    except (ValueError, KeyError, TypeError, AttributeError) as exc:
        raise click.BadParameter(f"{curves_file} is not a usable curves file from 'eightfold sweep --curves': "
                                 f"{type(exc).__name__}: {exc}", param_hint="CURVES_FILE")
    text = _document_text(doc)
    if json_out is not None and str(json_out) != "-":
        json_out.write_text(text + "\n", encoding="utf-8")
    if str(json_out) == "-":
        click.echo(text)
    else:
        click.echo(report.format_table(doc))
    if any(c["setting"] is None for c in doc["classes"]):
        sys.exit(EXIT_UNMET)


def _document_text(doc: dict) -> str:
    """The document as JSON, validated against the shipped schema first (a failure is our bug)."""
    try:
        contract.validate_document(doc)
    except contract.BudgetError as exc:
        raise click.ClickException(f"internal error, the document breaks its own schema: {exc}")
    return json.dumps(doc, indent=2)


def _verify(doc, sample, runner, cache, quiet):
    """Re-encode each image at its class's chosen setting(s) with Pillow; add actual figures to doc."""
    from tqdm import tqdm

    from .evaluate import VerifyJob, verify_image
    from .runner import TaskFailed

    chosen = {(c["name"], c["width"]): Setting.from_dict(c["setting"]) for c in doc["classes"] if c["setting"]}
    jobs = []
    reported = {i["path"] for i in doc["images"]}
    for job in sample.jobs:
        pairs = tuple((w, chosen[(job.class_name, w)]) for w in job.widths if (job.class_name, w) in chosen)
        if pairs and job.key in reported:
            jobs.append(VerifyJob(job.key, job.source, job.background, pairs))
    actual = {}
    todo = []
    for j in jobs:
        fp = fingerprint("verify", j.source, {"background": list(j.background), "pairs": [[w, s.as_dict()] for w, s in j.settings_by_width]})
        hit = cache.get(fp) if cache is not None else None
        if hit is not None:
            actual[j.key] = hit
        else:
            todo.append((j, fp))
    for index, result in tqdm(runner.map_unordered(verify_image, [j for j, _ in todo]), total=len(todo),
                              unit="img", desc="verify", disable=quiet, file=sys.stderr):
        if isinstance(result, TaskFailed):
            continue
        actual[todo[index][0].key] = result
        if cache is not None:
            cache.put(todo[index][1], result)
    for img in doc["images"]:
        for entry in actual.get(img["path"], {}).get("widths", []):
            if entry["width"] == img["width"]:
                img.update({k: (round(v, 6) if isinstance(v, float) else v) for k, v in entry.items() if k != "width"})
    for c in doc["classes"]:
        if not c["setting"]:
            continue
        imgs = [i for i in doc["images"] if i["class"] == c["name"] and i["width"] == c["width"] and "actual_bytes" in i]
        if not imgs:
            continue
        total = sum(i["actual_bytes"] for i in imgs)
        targets = budget.Targets(target_ssim=c["target_ssim"], coverage=c["coverage"],
                                 chroma_floor=c["chroma_floor"], local_floor=c["local_floor"],
                                 edge_floor=c.get("edge_floor", budget.DEFAULT_EDGE_FLOOR),
                                 blocking_limit=c.get("blocking_limit", budget.DEFAULT_BLOCKING_LIMIT))
        # the sweep's own per-image rule on the real files (older cache entries lack the local figure)
        meets = [budget.accepts(contract.measure_of(i), targets) if "actual_ssim_local" in i
                 else i["actual_ssim"] >= c["target_ssim"] for i in imgs]
        c["verified"] = {
            "actual_bytes": total,
            "bytes_error": (c["estimated_bytes"] - total) / total,
            "actual_share_meeting": sum(meets) / len(meets),
            "actual_ssim_min": min(i["actual_ssim"] for i in imgs),
        }


def _load_budget(budget_file) -> "contract.Budget":
    try:
        return contract.load_document(budget_file)
    except contract.BudgetError as exc:
        raise click.BadParameter(str(exc), param_hint="BUDGET")


def _width_option(ctx, param, value):
    if value is None or value == "original":
        return value
    try:
        w = int(value)
    except ValueError:
        w = 0
    if w < 1:
        raise click.BadParameter(f"must be a positive width in pixels or 'original', got {value!r}")
    return w


def _check_jobs(b, paths, class_name):
    """(jobs, unusable rows): files under PATHs with their classes, as a sample set names them."""
    import os

    from .sampleset import UNCLASSIFIED, discover

    known = {c.name for c in b.classes}
    jobs, rows, seen = [], [], set()

    def add(label, source, cls, background=(255, 255, 255)):
        if label in seen:
            return
        seen.add(label)
        if class_name is not None:
            cls = class_name
        entries = tuple(b.entries_for(cls))
        why = None
        if not entries:  # reported once the file is known to be an image (a stray README is only skipped)
            why = (f"class {cls!r} has no setting in this budget" if cls in b.undecided
                   else f"class {cls!r} is not in this budget (it has: {', '.join(b.names()) or 'none'})")
        jobs.append(contract.CheckJob(label, source, cls, background, entries, class_error=why))

    for path in paths:
        if path.is_dir():
            try:
                sample = discover(path)
            except ValueError as exc:
                raise click.BadParameter(str(exc), param_hint="PATH")
            own = path.resolve().name
            for job in sample.jobs:
                cls = job.class_name
                # a file directly in the folder given takes that folder's name when it is a budget class
                if "/" not in job.key and cls == UNCLASSIFIED and own in known:
                    cls = own
                add(os.path.join(str(path), job.key), job.source, cls, job.background)
            for r in sample.rejected:
                cls = class_name or (r.path.partition("/")[0] if "/" in r.path else own)
                label = os.path.join(str(path), r.path)
                seen.add(label)
                rows.append(contract.ImageCheck(path=label, class_name=cls, error=r.error, reasons=[r.error]).as_dict())
            for key in sample.skipped:  # README and other text files beside the images: listed, not failed
                label = os.path.join(str(path), key)
                seen.add(label)
                why = "not an image file (a text file beside the images)"
                rows.append(contract.ImageCheck(path=label, class_name=class_name or own, error=why, reasons=[why],
                                                skipped=True).as_dict())
        else:
            add(str(path), str(path.resolve()), path.resolve().parent.name)
    return jobs, rows


@main.command()
@click.argument("budget_file", metavar="BUDGET", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.argument("paths", metavar="PATH...", nargs=-1, required=True, type=click.Path(exists=True, path_type=Path))
@click.option("--class", "class_name", help="Check every image as this class (default: from folder names).")
@click.option("--json", "json_out", type=click.Path(dir_okay=False, path_type=Path), help="Write the results as JSON here ('-' for stdout).")
@click.option("--junit", "junit_out", type=click.Path(dir_okay=False, path_type=Path), help="Write JUnit XML here: a testcase per image and per class.")
@click.option("--workers", type=click.IntRange(1, None), help="Local worker processes [default: all cores].")
@click.option("--quiet", is_flag=True, help="No progress bar.")
def check(budget_file, paths, class_name, json_out, junit_out, workers, quiet):
    """Check images against a frozen budget: encode each at its class's setting with Pillow and measure it.

    BUDGET is a document from 'eightfold sweep --json' or a budget downloaded from the web app. Classes
    come from folder names, as in a sample set (a PATH folder's first-level sub-folders, or its own
    name for files directly in it, or a file's parent folder), or from --class. Each image must pass
    the sweep's own per-image checks (luma SSIM target, chroma floor, local floor) on the real file;
    a class passes when at least its coverage share of images do.

    Exit codes: 0 every class meets its coverage; 1 some class does not, or a file could not be
    checked; 2 bad usage; 4 no usable image.
    """
    from tqdm import tqdm

    from .runner import RunnerError, TaskFailed, make_runner

    b = _load_budget(budget_file)
    if class_name is not None:
        try:
            contract.select(b, class_name)
        except contract.BudgetError as exc:
            raise click.BadParameter(str(exc), param_hint="--class")
    jobs, rows = _check_jobs(b, paths, class_name)
    try:
        runner = make_runner(workers=workers)
    except (ValueError, RunnerError) as exc:
        raise click.ClickException(str(exc))
    bar = tqdm(total=len(jobs), unit="img", desc="check", disable=quiet or not jobs, file=sys.stderr)
    try:
        with runner:
            for index, result in runner.map_unordered(contract.run_check_job, jobs):
                if isinstance(result, TaskFailed):
                    job = jobs[index]
                    why = f"check failed: {result.message}"
                    result = [contract.ImageCheck(path=job.key, class_name=job.class_name, error=why,
                                                  reasons=[why]).as_dict()]
                rows.extend(result)
                bar.update(1)
    except RunnerError as exc:
        raise click.ClickException(str(exc))
    finally:
        bar.close()
    outcome = contract.summarize_checks(b, rows, label=str(budget_file))
    if junit_out is not None:
        junit_out.write_text(outcome.junit_xml(), encoding="utf-8")
    if json_out is not None:
        text = json.dumps(outcome.as_dict(), indent=2)
        if str(json_out) == "-":
            click.echo(text)
        else:
            json_out.write_text(text + "\n", encoding="utf-8")
    if str(json_out) != "-":
        click.echo(outcome.format_table())
    sys.exit(outcome.exit_code)


@main.command()
@click.argument("budget_file", metavar="[BUDGET]", required=False, type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.option("--format", "fmt", type=click.Choice(["pillow", "cjpeg", "schema"]), required=True,
              help="pillow: Image.save keyword arguments and a snippet; cjpeg: a -qtables file and the command; schema: the budget document's JSON Schema.")
@click.option("--class", "class_name", help="Only this class [default: every class with a setting].")
@click.option("--width", callback=_width_option, help="Only this delivery width (pixels, or 'original').")
@click.option("-o", "--output", type=click.Path(dir_okay=False, path_type=Path), help="Write here instead of stdout.")
def export(budget_file, fmt, class_name, width, output):
    """Print a budget's settings in a form an encoder takes (or the budget document's JSON Schema).

    With --format cjpeg and one class entry, the whole output is itself a valid 'cjpeg -qtables'
    file: the command line is in its comment lines.
    """
    if fmt == "schema":
        text = contract.export_text(None, "schema")
    else:
        if budget_file is None:
            raise click.UsageError(f"--format {fmt} needs a BUDGET file")
        b = _load_budget(budget_file)
        try:
            entries = contract.select(b, class_name)
        except contract.BudgetError as exc:
            raise click.BadParameter(str(exc), param_hint="--class")
        if width is not None:
            want = None if width == "original" else width
            entries = [e for e in entries if e.width == want]
            if not entries:
                raise click.BadParameter(f"no class entry at width {width!r} in this budget", param_hint="--width")
        if fmt == "cjpeg" and output is not None and len(entries) > 1:
            raise click.UsageError(
                f"{len(entries)} class entries match: a -qtables file holds one; pick one with --class (and --width)")
        text = contract.export_entries(entries, fmt)
        for note in b.notes:
            click.echo(f"note: {note}", err=True)
    if output is None:
        click.echo(text, nl=False)
    else:
        output.write_text(text, encoding="utf-8")


def _server_options(command):
    """--host, --port, --data-dir and --no-login, shared by serve and demo."""
    command = click.option("--no-login", is_flag=True,
                           help="Serve a non-loopback --host without a password (a trusted network only).")(command)
    command = click.option("--data-dir", type=click.Path(file_okay=False, path_type=Path),
                           help="Database and stored images [default: the instance folder].")(command)
    command = click.option("--port", default=8000, show_default=True, type=click.IntRange(1, 65535))(command)
    return click.option("--host", default="127.0.0.1", show_default=True)(command)


@main.command()
@_server_options
def serve(host, port, data_dir, no_login):
    """Start the web app on a production WSGI server (waitress).

    With EIGHTFOLD_PASSWORD (or EIGHTFOLD_PASSWORD_FILE) set, the owner's pages need a login.
    """
    _run_server(host, port, data_dir, demo=False, no_login=no_login)


@main.command()
@_server_options
def demo(host, port, data_dir, no_login):
    """Start the web app with the demo sample set loaded and its sweep running."""
    _run_server(host, port, data_dir, demo=True, no_login=no_login)



def _run_server(host, port, data_dir, *, demo, no_login):
    from webapp.server import PortBusy, serve as run

    try:
        run(host=host, port=port, data_dir=str(data_dir) if data_dir else None, demo=demo, no_login=no_login)
    except PortBusy as exc:
        raise click.ClickException(str(exc))


if __name__ == "__main__":  # pragma: no cover
    main()
