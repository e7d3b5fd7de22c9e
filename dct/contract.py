"""A budget as a contract: load and validate a budget document, check images against it, export it.

A *budget document* is what ``eightfold sweep --json`` writes, and what the web app's budget
download (and its JSON API) returns: per class and delivery width, a setting and its exact
quantization tables, with the targets the decision used. Its JSON Schema (draft 2020-12) ships
beside this module as ``budget.schema.json``; every document is validated against it on the way in
and on the way out.

Three uses, shared by the command line (``eightfold check``, ``eightfold export``) and the web
budget page:

* **Check.** Each image is encoded at its class's setting with the real encoder (Pillow/libjpeg,
  the budget's own tables and subsampling, optimized Huffman tables), decoded, and measured
  (``dct.evaluate.measure_jpeg``). The verdict is the sweep's own per-image rule,
  ``dct.budget.accepts``, against the class's targets; a class passes when at least ``coverage``
  of its images do.
* **Export for Pillow.** ``Image.save`` keyword arguments: ``qtables``, ``subsampling``,
  ``optimize``, and never ``quality`` (Pillow scales custom tables by ``quality`` when both are
  given).
* **Export for cjpeg.** The text file libjpeg's ``cjpeg -qtables`` reads (per the ``wizard.txt``
  that ships with libjpeg-turbo: 64 decimal values per table in natural order, ``#`` comments), and
  the command line. Without ``-quality`` cjpeg uses such tables as given; ``-qslots 0,1`` puts
  table 0 on luma and table 1 on both chroma components; ``-sample`` sets the luma sampling factors
  (chroma stays 1x1). Tested by running cjpeg and reading the file back with Pillow.
"""

from __future__ import annotations

import json
import math
import os
import shlex
from dataclasses import dataclass, field
from functools import lru_cache
from importlib import resources
from xml.etree import ElementTree as ET

import numpy as np

from . import budget
from .tables import SAMPLING_FACTORS, Setting

__all__ = [
    "BudgetError",
    "ClassBudget",
    "Budget",
    "CheckJob",
    "ImageCheck",
    "CheckReport",
    "schema",
    "validate_document",
    "parse_document",
    "load_document",
    "select",
    "pillow_kwargs",
    "pillow_snippet",
    "cjpeg_tables_text",
    "cjpeg_args",
    "cjpeg_command",
    "export_text",
    "export_entries",
    "measure_of",
    "check_image",
    "run_check_job",
    "summarize_checks",
]

SCHEMA_FILE = "budget.schema.json"
READS_VERSIONS = (1, 2)  # what load_document reads; 1 lacks only the plain-quality fields
WRITES_VERSION = 2  # dct.report.SCHEMA_VERSION
CJPEG_TABLES_FILE = "eightfold-qtables.txt"
_PILLOW_SUBSAMPLING = {"4:4:4": "4:4:4", "4:2:2": "4:2:2", "4:2:0": "4:2:0"}  # Pillow's own spelling


class BudgetError(ValueError):
    """A budget document that cannot be used; ``str(exc)`` says why, for the user."""


# --------------------------------------------------------------------------------------------------
# The schema and loading


@lru_cache(maxsize=1)
def schema() -> dict:
    """The budget document's JSON Schema (draft 2020-12), as shipped in the package."""
    text = resources.files(__package__).joinpath(SCHEMA_FILE).read_text(encoding="utf-8")
    return json.loads(text)


@lru_cache(maxsize=1)
def _validator():
    import jsonschema

    cls = jsonschema.Draft202012Validator
    cls.check_schema(schema())
    return cls(schema(), format_checker=cls.FORMAT_CHECKER)


def validate_document(doc) -> None:
    """Raise :class:`BudgetError` naming where ``doc`` breaks the schema (up to three places)."""
    errors = sorted(_validator().iter_errors(doc), key=lambda e: list(e.absolute_path))
    if not errors:
        return
    parts = []
    for e in errors[:3]:
        where = "/".join(str(p) for p in e.absolute_path) or "(top level)"
        parts.append(f"at {where}: {_short(e.message)}")
    more = f" (and {len(errors) - 3} more)" if len(errors) > 3 else ""
    raise BudgetError("not a valid budget document: " + "; ".join(parts) + more)


def _short(message: str, limit: int = 160) -> str:
    return message if len(message) <= limit else message[: limit - 1] + "…"


@dataclass(frozen=True)
class ClassBudget:
    """One class at one delivery width: what an encoder must do, and what images must reach."""

    name: str
    width: int | None
    setting: Setting
    luma: tuple[int, ...]  # 64 values, natural (row-major) order
    chroma: tuple[int, ...]
    targets: budget.Targets
    plain_fallback: dict | None = None  # the document's entry (None: none qualifies, or version 1)

    @property
    def label(self) -> str:
        return self.name if self.width is None else f"{self.name} @ {self.width} px"

    def tables(self) -> tuple[np.ndarray, np.ndarray]:
        return (np.array(self.luma, dtype=np.int32).reshape(8, 8), np.array(self.chroma, dtype=np.int32).reshape(8, 8))


@dataclass
class Budget:
    document: dict
    version: int
    choice: str
    classes: list[ClassBudget]  # only entries with a setting
    undecided: list[str] = field(default_factory=list)  # class names without a setting
    notes: list[str] = field(default_factory=list)  # what loading an older version filled in

    def names(self) -> list[str]:
        return sorted({c.name for c in self.classes} | set(self.undecided))

    def entries_for(self, name: str) -> list[ClassBudget]:
        return [c for c in self.classes if c.name == name]


def parse_document(doc) -> Budget:
    """Validate a budget document (already parsed JSON) and read its class budgets.

    Version 1 documents (before the plain-quality fallback) load with ``choice`` "custom_tables"
    and no fallback. A newer version than this Eightfold knows is refused with the reason.
    """
    if not isinstance(doc, dict):
        raise BudgetError(f"not a budget document: expected a JSON object, got a JSON {_json_type(doc)}")
    if "schema_version" not in doc:
        hint = ""
        if "images" in doc and "classes" in doc and isinstance(doc.get("classes"), dict):
            hint = " (this looks like a curves file from 'eightfold sweep --curves'; use 'eightfold decide' on it)"
        raise BudgetError("not a budget document: it has no schema_version" + hint)
    version = doc["schema_version"]
    if isinstance(version, int) and not isinstance(version, bool) and version > max(READS_VERSIONS):
        raise BudgetError(
            f"this budget document has schema_version {version}, newer than this Eightfold reads "
            f"({', '.join(map(str, READS_VERSIONS))}); upgrade Eightfold to use it"
        )
    validate_document(doc)
    notes = []
    choice = doc.get("choice", "custom_tables")
    if version == 1:
        notes.append("schema_version 1 document: settings were chosen among custom tables; it names no "
                     "plain-quality fallback (sweep again for one)")
    classes, undecided = [], []
    for entry in doc["classes"]:
        if entry["setting"] is None:
            undecided.append(entry["name"])
            continue
        setting = Setting.from_dict(entry["setting"])
        luma = tuple(v for row in entry["quant_tables"]["luma"] for v in row)
        chroma = tuple(v for row in entry["quant_tables"]["chroma"] for v in row)
        expect = setting.tables()
        if luma != tuple(expect[0].ravel().tolist()) or chroma != tuple(expect[1].ravel().tolist()):
            raise BudgetError(
                f"class {entry['name']!r}: its quant_tables are not the tables of its setting "
                f"{setting.label()}; the document was edited or damaged"
            )
        targets = budget.Targets(
            target_ssim=entry["target_ssim"],
            coverage=entry["coverage"],
            chroma_floor=entry["chroma_floor"],
            local_floor=entry["local_floor"],
            # documents from before the visible-damage check carry no limits: the defaults apply
            edge_floor=entry.get("edge_floor", budget.DEFAULT_EDGE_FLOOR),
            blocking_limit=entry.get("blocking_limit", budget.DEFAULT_BLOCKING_LIMIT),
        )
        classes.append(ClassBudget(entry["name"], entry["width"], setting, luma, chroma, targets,
                                   entry.get("plain_fallback")))
    return Budget(document=doc, version=version, choice=choice, classes=classes,
                  undecided=sorted(set(undecided)), notes=notes)


def load_document(path) -> Budget:
    """Read, parse and validate a budget document file (see :func:`parse_document`)."""
    label = os.fspath(path)
    try:
        with open(path, "rb") as fh:
            raw = fh.read()
    except FileNotFoundError:
        raise BudgetError(f"{label}: no such file") from None
    except IsADirectoryError:
        raise BudgetError(f"{label}: is a folder, not a budget document") from None
    except OSError as exc:
        raise BudgetError(f"{label}: cannot read it ({exc.strerror or exc})") from None
    try:
        doc = json.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise BudgetError(f"{label}: not a budget document (not UTF-8 text)") from None
    except json.JSONDecodeError as exc:
        raise BudgetError(f"{label}: not a budget document (invalid JSON at line {exc.lineno}: {exc.msg})") from None
    try:
        return parse_document(doc)
    except BudgetError as exc:
        raise BudgetError(f"{label}: {exc}") from None


def _json_type(value) -> str:
    return {list: "array", str: "string", bool: "boolean", type(None): "null"}.get(
        type(value), "number" if isinstance(value, (int, float)) else type(value).__name__)


def select(b: Budget, class_name: str | None) -> list[ClassBudget]:
    """The entries of one class (all when ``class_name`` is None); BudgetError for an unknown class."""
    if class_name is None:
        return list(b.classes)
    found = b.entries_for(class_name)
    if not found:
        if class_name in b.undecided:
            raise BudgetError(f"class {class_name!r} has no setting in this budget (nothing met its targets)")
        raise BudgetError(f"no class {class_name!r} in this budget (it has: {', '.join(b.names()) or 'none'})")
    return found


# --------------------------------------------------------------------------------------------------
# Exports


def pillow_kwargs(entry: ClassBudget) -> dict:
    """Keyword arguments for ``PIL.Image.save(fp, "JPEG", **kwargs)`` that apply this budget.

    ``qtables`` holds the luma and chroma tables (64 values each, natural order); for a grayscale
    ("L") image pass ``qtables[:1]``. There is no ``quality``: beside ``qtables`` Pillow would scale
    the tables by it.
    """
    return {
        "qtables": [list(entry.luma), list(entry.chroma)],
        "subsampling": _PILLOW_SUBSAMPLING[entry.setting.subsampling],
        "optimize": True,
    }


def pillow_snippet(entry: ClassBudget) -> str:
    """A ready-to-run Python snippet that saves ``in.png`` as ``out.jpg`` with this budget."""
    kw = pillow_kwargs(entry)
    rows = lambda t: ",\n".join("        " + ", ".join(f"{v:3d}" for v in t[i : i + 8]) for i in range(0, 64, 8))
    return (
        f"# Eightfold budget: {entry.label}, {entry.setting.label()}\n"
        "from PIL import Image\n\n"
        "QTABLES = [\n"
        f"    [  # luma, natural (row-major) order\n{rows(kw['qtables'][0])},\n    ],\n"
        f"    [  # chroma\n{rows(kw['qtables'][1])},\n    ],\n"
        "]\n\n"
        "im = Image.open(\"in.png\")\n"
        "if im.mode not in (\"L\", \"RGB\"):\n"
        "    im = im.convert(\"RGB\")  # composite any alpha first if it matters\n"
        "# no quality= here: Pillow would scale these tables by it\n"
        "im.save(\"out.jpg\", \"JPEG\", qtables=QTABLES[:1] if im.mode == \"L\" else QTABLES,\n"
        f"        subsampling={kw['subsampling']!r}, optimize={kw['optimize']!r})\n"
    )


def cjpeg_tables_text(entry: ClassBudget) -> str:
    """The ``cjpeg -qtables`` file: table 0 (luma) and table 1 (chroma), 8 rows of 8 integers each."""
    def block(values):
        return "\n".join(" ".join(f"{v:3d}" for v in values[i : i + 8]) for i in range(0, 64, 8))

    return (
        f"# Eightfold budget: {entry.label}, {entry.setting.label()}\n"
        "# natural (row-major) order, not zigzag; use without -quality so cjpeg takes them as they are\n"
        f"# table 0: luma\n{block(entry.luma)}\n"
        f"# table 1: chroma\n{block(entry.chroma)}\n"
    )


def cjpeg_sample(subsampling: str) -> str:
    """``-sample`` argument: luma sampling factors, chroma 1x1 (``SAMPLING_FACTORS`` in dct.tables)."""
    h, v = SAMPLING_FACTORS[subsampling]
    return f"{h}x{v},1x1,1x1"


def cjpeg_args(entry: ClassBudget, *, tables_file: str = CJPEG_TABLES_FILE, source: str = "in.ppm",
               output: str = "out.jpg") -> list[str]:
    """cjpeg's arguments (after the program name) for this budget; ``source`` is PPM, PGM, BMP or Targa."""
    return [
        "-qtables", tables_file,
        "-qslots", "0,1",
        "-sample", cjpeg_sample(entry.setting.subsampling),
        "-optimize",
        "-baseline",
        "-outfile", output,
        source,
    ]  # fmt: skip


def cjpeg_command(entry: ClassBudget, *, tables_file: str = CJPEG_TABLES_FILE, source: str = "in.ppm",
                  output: str = "out.jpg") -> str:
    """The full cjpeg command line, shell-quoted."""
    return shlex.join(["cjpeg", *cjpeg_args(entry, tables_file=tables_file, source=source, output=output)])


def export_text(b: Budget | None, fmt: str, class_name: str | None = None) -> str:
    """What ``eightfold export`` prints: ``pillow`` (JSON kwargs and a snippet), ``cjpeg`` or ``schema``."""
    if fmt == "schema":
        return json.dumps(schema(), indent=2) + "\n"
    return export_entries(select(b, class_name), fmt)


def export_entries(entries: list[ClassBudget], fmt: str) -> str:
    """The ``pillow`` or ``cjpeg`` export of some class entries, one block each."""
    if fmt not in ("pillow", "cjpeg"):
        raise BudgetError(f"unknown export format {fmt!r} (allowed: pillow, cjpeg, schema)")
    if not entries:
        raise BudgetError("no class in this budget has a setting to export")
    out = []
    for e in entries:
        if fmt == "pillow":
            out.append(f"## {e.label}: {e.setting.label()}\n"
                       f"# keyword arguments for Image.save(fp, \"JPEG\", **kwargs)\n"
                       f"{json.dumps(pillow_kwargs(e))}\n\n{pillow_snippet(e)}")
        else:
            name = _tables_file_name(e) if len(entries) > 1 else CJPEG_TABLES_FILE
            out.append(f"## {e.label}: {e.setting.label()}\n"
                       f"# This block is a cjpeg -qtables file ('#' lines are comments). Saved as {name}:\n"
                       f"#   {cjpeg_command(e, tables_file=name)}\n{cjpeg_tables_text(e)}")
    return "\n".join(out)


def _tables_file_name(e: ClassBudget) -> str:
    width = "" if e.width is None else f"-{e.width}"
    safe = "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in e.name)
    return f"eightfold-qtables-{safe}{width}.txt"


# --------------------------------------------------------------------------------------------------
# Checking images


@dataclass(frozen=True)
class CheckJob:
    """One image to check against the entries of its class (plain values: it pickles cheaply)."""

    key: str
    source: str | bytes
    class_name: str
    background: tuple[int, int, int]
    entries: tuple[ClassBudget, ...]
    class_error: str | None = None  # the class has no entry in the budget: why (after decoding)


@dataclass
class ImageCheck:
    """One image at one class entry (or a file that could not be checked at all)."""

    path: str
    class_name: str
    width: int | None = None
    setting: str | None = None
    actual_bytes: int | None = None
    ssim: float | None = None
    ssim_cb: float | None = None
    ssim_cr: float | None = None
    ssim_local: float | None = None
    edge_ssim: float | None = None
    blocking: float | None = None
    passes: bool = False
    reasons: list[str] = field(default_factory=list)
    error: str | None = None  # broken file, too small, or a class the budget lacks
    skipped: bool = False  # not an image and not named like one (a README): listed, not a failure

    def as_dict(self) -> dict:
        return {
            "path": self.path, "class": self.class_name, "width": self.width, "setting": self.setting,
            "actual_bytes": self.actual_bytes,
            "ssim": _round(self.ssim), "ssim_cb": _round(self.ssim_cb), "ssim_cr": _round(self.ssim_cr),
            "ssim_local": _round(self.ssim_local), "edge_ssim": _round(self.edge_ssim),
            "blocking": _round(self.blocking), "passes": self.passes, "reasons": list(self.reasons),
            "error": self.error, "skipped": self.skipped,
        }  # fmt: skip


def _round(v):
    return None if v is None else round(float(v), 6)


_CHECK_NAMES = {"ssim": "luma SSIM", "ssim_cb": "Cb SSIM", "ssim_cr": "Cr SSIM", "ssim_local": "local SSIM",
                "edge_ssim": "edge SSIM", "blocking": "blocking"}


def measure_of(figures: dict) -> budget.Measure:
    """The decision's per-image measure from real-file figures (``dct.evaluate.encode_and_measure``)."""
    return budget.Measure(
        estimated_bytes=figures["actual_bytes"],
        ssim=figures["actual_ssim"],
        ssim_cb=figures["actual_ssim_cb"],
        ssim_cr=figures["actual_ssim_cr"],
        ssim_local=figures["actual_ssim_local"],
        edge_ssim=figures.get("actual_edge_ssim", 1.0),
        blocking=figures.get("actual_blocking", 0.0),
    )


def check_image(pixels: np.ndarray, entry: ClassBudget, *, path: str = "") -> ImageCheck:
    """Encode decoded pixels at one class entry with Pillow, decode, measure and judge.

    Parameters
    ----------
    pixels : ndarray, shape (H, W, 3) or (H, W), uint8
        The image at its own size; it is resized to the entry's width first (never upscaled).
    entry : ClassBudget
    """
    from .evaluate import encode_and_measure
    from .io import resize_to_width
    from .simulate import MIN_SIDE

    out = ImageCheck(path=path, class_name=entry.name, width=entry.width, setting=entry.setting.label())
    sized = resize_to_width(pixels, entry.width)
    h, w = sized.shape[:2]
    if h < MIN_SIDE or w < MIN_SIDE:
        out.error = f"image too small: {w}x{h} pixels; SSIM needs at least {MIN_SIDE}x{MIN_SIDE}"
        out.reasons = [out.error]
        return out
    luma, chroma = entry.tables()
    figures = encode_and_measure(sized, luma=luma, chroma=chroma, subsampling=entry.setting.subsampling)
    m = measure_of(figures)
    out.actual_bytes, out.ssim, out.ssim_cb, out.ssim_cr, out.ssim_local, out.edge_ssim, out.blocking = (
        m.estimated_bytes, m.ssim, m.ssim_cb, m.ssim_cr, m.ssim_local, m.edge_ssim, m.blocking)
    out.passes = budget.accepts(m, entry.targets)
    if not out.passes:
        out.reasons = [f"{_CHECK_NAMES.get(name, name)} {value:.4f} {'>' if name == 'blocking' else '<'} {floor:g}"
                       for name, value, floor in budget.failed_checks(m, entry.targets)]
        if not out.reasons:  # a check this module does not name yet: the rule still decides
            out.reasons = ["fails the sweep's per-image checks"]
    return out


def run_check_job(job: CheckJob) -> list[dict]:
    """Decode one file and check it at each of its class's entries (a runner task; never raises on the file)."""
    from threadpoolctl import threadpool_limits

    from .io import ImageRejected, decode_image

    try:
        decoded = decode_image(job.source, background=job.background)
    except ImageRejected as exc:
        row = ImageCheck(path=job.key, class_name=job.class_name, error=str(exc), reasons=[str(exc)])
        # A stray README beside the images is no broken image; a .jpg that does not decode is.
        row.skipped = str(exc).startswith("not an image file") and not _named_like_an_image(job.key)
        return [row.as_dict()]
    if job.class_error is not None:
        return [ImageCheck(path=job.key, class_name=job.class_name, error=job.class_error,
                           reasons=[job.class_error]).as_dict()]
    with threadpool_limits(limits=1, user_api="blas"):
        return [check_image(decoded.pixels, e, path=job.key).as_dict() for e in job.entries]


IMAGE_SUFFIXES = (".jpg", ".jpeg", ".jpe", ".jfif", ".png", ".gif", ".webp", ".tif", ".tiff", ".bmp", ".avif",
                  ".heic", ".heif", ".ppm", ".pgm", ".tga")


def _named_like_an_image(key: str) -> bool:
    return key.lower().endswith(IMAGE_SUFFIXES)


@dataclass
class ClassOutcome:
    name: str
    width: int | None
    setting: str
    coverage: float
    checked: int  # images at this entry, broken ones included
    passing: int

    @property
    def share(self) -> float:
        return self.passing / self.checked if self.checked else 0.0

    @property
    def meets(self) -> bool:
        # as dct.budget counts coverage: at least ceil(coverage * n) images must pass
        return self.checked > 0 and self.passing >= max(1, math.ceil(self.coverage * self.checked - 1e-9))

    def as_dict(self) -> dict:
        return {"class": self.name, "width": self.width, "setting": self.setting, "coverage": self.coverage,
                "images": self.checked, "passing": self.passing, "share_passing": round(self.share, 6),
                "meets_coverage": self.meets}


EXIT_OK, EXIT_FAILED, EXIT_USAGE, EXIT_NOTHING = 0, 1, 2, 4


@dataclass
class CheckReport:
    budget_label: str
    images: list[ImageCheck]
    classes: list[ClassOutcome]
    notes: list[str] = field(default_factory=list)

    @property
    def errors(self) -> list[ImageCheck]:
        """Files that could not be checked: broken, too small, or of a class the budget lacks."""
        return [i for i in self.images if i.error is not None and not i.skipped]

    @property
    def skipped(self) -> list[ImageCheck]:
        return [i for i in self.images if i.skipped]

    @property
    def usable(self) -> int:
        return sum(1 for i in self.images if i.error is None)

    @property
    def exit_code(self) -> int:
        if self.usable == 0:
            return EXIT_NOTHING
        if self.errors or any(not c.meets for c in self.classes):
            return EXIT_FAILED
        return EXIT_OK

    def as_dict(self) -> dict:
        return {
            "budget": self.budget_label,
            "passed": self.exit_code == EXIT_OK,
            "exit_code": self.exit_code,
            "classes": [c.as_dict() for c in self.classes],
            "images": [i.as_dict() for i in self.images],
            "notes": list(self.notes),
        }

    def failing(self, c: ClassOutcome) -> list[ImageCheck]:
        return [i for i in self._of(c) if not i.passes]

    def _of(self, c: ClassOutcome) -> list[ImageCheck]:
        return [i for i in self.images if i.class_name == c.name and (i.width == c.width or i.setting is None)]

    def format_table(self) -> str:
        head = ["image", "class", "width", "setting", "KB", "SSIM", "Cb", "Cr", "local", "result"]
        rows = []
        for i in self.images:
            f = lambda v: "-" if v is None else f"{v:.4f}"
            result = "ok" if i.passes else (("skipped: " if i.skipped else "ERROR: ") + i.error if i.error
                                            else "FAIL: " + "; ".join(i.reasons))
            rows.append([i.path, i.class_name, "as is" if i.width is None else str(i.width), i.setting or "-",
                         "-" if i.actual_bytes is None else f"{i.actual_bytes / 1000:,.1f}",
                         f(i.ssim), f(i.ssim_cb), f(i.ssim_cr), f(i.ssim_local), result])
        widths = [max(len(r[k]) for r in rows + [head]) for k in range(len(head))]
        line = lambda r: "  ".join(v.ljust(w) if k in (0, 1, 3, 9) else v.rjust(w)
                                   for k, (v, w) in enumerate(zip(r, widths))).rstrip()
        out = [line(head), line(["-" * w for w in widths])] + [line(r) for r in rows]
        out.append("")
        for c in self.classes:
            verdict = "meets" if c.meets else "MISSES"
            width = "" if c.width is None else f" @ {c.width} px"
            out.append(f"{c.name}{width} ({c.setting}): {c.passing} of {c.checked} images pass "
                       f"({c.share:.0%}); {verdict} its coverage of {c.coverage:.0%}")
        for i in self.errors:
            out.append(f"error: {i.path}: {i.error}")
        for i in self.skipped:
            out.append(f"skipped: {i.path}: {i.error}")
        out += [f"note: {n}" for n in self.notes]
        verdict = {EXIT_OK: "PASSED", EXIT_FAILED: "FAILED", EXIT_NOTHING: "NO USABLE IMAGE"}[self.exit_code]
        out.append(f"{verdict}: {self.usable} image check(s) against {self.budget_label}")
        return "\n".join(out)

    def junit_xml(self) -> str:
        """JUnit XML: one testcase per image and class entry, one per class for its coverage.

        An image below the checks is a ``<failure>`` when its class misses its coverage; when the
        class still meets it, the testcase passes and says so in ``<system-out>`` (the exit code
        and the report agree). Broken files and images of unknown classes are ``<error>``; a file
        that is neither an image nor named like one (a README) is ``<skipped>``.
        """
        suites = ET.Element("testsuites", name="eightfold check")
        groups: dict[str, list] = {}
        for c in self.classes:
            groups.setdefault(c.name, []).append(c)
        names = list(groups) + sorted({i.class_name for i in self.errors + self.skipped} - set(groups))
        for name in names:
            suite = ET.SubElement(suites, "testsuite", name=f"eightfold.{name}")
            n_fail = n_err = n = 0
            for c in groups.get(name, []):
                for i in self._of(c):
                    if i.setting is None:
                        continue
                    n += 1
                    case = ET.SubElement(suite, "testcase", classname=f"eightfold.{name}",
                                         name=_case_name(i))
                    figures = _figures(i)
                    if i.error:
                        n_err += 1
                        ET.SubElement(case, "error", message=i.error, type="unusable").text = f"{i.path}: {i.error}"
                    elif not i.passes and not c.meets:
                        n_fail += 1
                        msg = "; ".join(i.reasons)
                        ET.SubElement(case, "failure", message=msg, type="below-budget").text = (
                            f"{i.path} at {i.setting}: {msg}\n{figures}")
                    else:
                        note = "" if i.passes else (f"below the checks ({'; '.join(i.reasons)}), within the class's "
                                                    f"coverage allowance\n")
                        ET.SubElement(case, "system-out").text = note + figures
                n += 1
                case = ET.SubElement(suite, "testcase", classname=f"eightfold.{name}",
                                     name=f"coverage{'' if c.width is None else f' @ {c.width} px'}")
                summary = (f"{c.passing} of {c.checked} images pass ({c.share:.1%}); coverage "
                           f"{c.coverage:.1%} needed at {c.setting}")
                if c.meets:
                    ET.SubElement(case, "system-out").text = summary
                else:
                    n_fail += 1
                    failing = ", ".join(i.path for i in self.failing(c))
                    ET.SubElement(case, "failure", message=summary, type="coverage").text = (
                        f"{summary}\nfailing: {failing}")
            for i in self.errors:
                if i.class_name != name or i.setting is not None:
                    continue  # errors at a class entry (too small) are in the entry's testcases
                n += 1
                n_err += 1
                case = ET.SubElement(suite, "testcase", classname=f"eightfold.{name}", name=i.path)
                ET.SubElement(case, "error", message=i.error, type="unusable").text = f"{i.path}: {i.error}"
            n_skip = 0
            for i in self.skipped:
                if i.class_name == name:
                    n += 1
                    n_skip += 1
                    case = ET.SubElement(suite, "testcase", classname=f"eightfold.{name}", name=i.path)
                    ET.SubElement(case, "skipped", message=i.error)
            suite.set("tests", str(n))
            suite.set("skipped", str(n_skip))
            suite.set("failures", str(n_fail))
            suite.set("errors", str(n_err))
        ET.indent(suites)
        return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(suites, encoding="unicode") + "\n"


def _case_name(i: ImageCheck) -> str:
    return i.path if i.width is None else f"{i.path} @ {i.width} px"


def _figures(i: ImageCheck) -> str:
    parts = [f"bytes {i.actual_bytes}", f"luma SSIM {i.ssim:.4f}"] if i.ssim is not None else []
    if i.ssim_cb is not None:
        parts += [f"Cb SSIM {i.ssim_cb:.4f}", f"Cr SSIM {i.ssim_cr:.4f}"]
    if i.ssim_local is not None:
        parts.append(f"local SSIM {i.ssim_local:.4f}")
    return ", ".join(parts)


def summarize_checks(b: Budget, rows: list[dict], *, label: str) -> CheckReport:
    """Gather per-image check rows (``ImageCheck.as_dict``) into per-class coverage outcomes."""
    images = [ImageCheck(path=r["path"], class_name=r["class"], width=r["width"], setting=r["setting"],
                         actual_bytes=r["actual_bytes"], ssim=r["ssim"], ssim_cb=r["ssim_cb"],
                         ssim_cr=r["ssim_cr"], ssim_local=r["ssim_local"], passes=r["passes"],
                         reasons=list(r["reasons"]), error=r["error"]) for r in rows]
    for i, r in zip(images, rows):
        i.skipped = bool(r.get("skipped"))
    images.sort(key=lambda i: (i.path, i.width or 0))
    classes = []
    for e in b.classes:
        mine = [i for i in images if i.class_name == e.name]
        if not mine:
            continue
        at = [i for i in mine if i.width == e.width and i.setting is not None]
        broken = [i for i in mine if i.setting is None and not i.skipped]  # undecodable: fails at every width
        classes.append(ClassOutcome(e.name, e.width, e.setting.label(), e.targets.coverage,
                                    checked=len(at) + len(broken), passing=sum(1 for i in at if i.passes)))
    return CheckReport(budget_label=label, images=images, classes=classes, notes=list(b.notes))

