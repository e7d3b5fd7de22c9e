"""Finding a sample set's files and sorting them into classes.

A sample set is a folder of a site's images. Each image belongs to one class, and each class has its
own targets (SSIM, coverage, floors), delivery widths and background colour.

Without a classes file, classes are the first-level sub-folders: ``hero/a.jpg`` and
``hero/2024/b.png`` are class "hero"; files directly in the sample folder are class "unclassified".

Classes file
------------
``<sample folder>/classes.toml`` is read when it exists (or pass ``classes_file=``). Every table and
key is optional::

    # Applies to every class, including folder classes not listed below.
    [defaults]
    target_ssim = 0.95       # in (0, 1]
    coverage = 0.9           # share of a class's images that must reach the target, in (0, 1]
    chroma_floor = 0.93      # in (0, 1]; omit to use target_ssim
    local_floor = 0.8        # in [0, 1]; 0 turns the local check off; omit for the engine default
    widths = [1200, 600, "original"]   # positive ints; "original" = the image's own width
    background = "#ffffff"   # "#rrggbb" or "#rgb": colour under transparent pixels

    [[class]]
    name = "product"                          # required
    patterns = ["product/*", "*-packshot.*"]  # optional
    target_ssim = 0.96                        # any key from [defaults] may follow
    widths = [1200, 600]

Patterns use ``fnmatch`` wildcards (``*``, ``?``, ``[seq]``) and ignore letter case. A pattern with a
``/`` is matched against the whole path relative to the sample folder (``*`` may cross folders); a
pattern without one is matched against the file name alone. Rules are tried in file order, and the
first matching pattern wins. Files no pattern matches fall back to their folder class. A ``[[class]]``
without patterns just sets the options for the folder class of that name (or "unclassified").

Options are layered: ``ClassSpec`` defaults, then the ``defaults=`` argument of ``discover``, then
the file's ``[defaults]``, then the class's own table.

Which files
-----------
Every regular file is a candidate, except hidden files and folders (a name starting with "."), the
classes file, and documentation or text files that sit beside the images (``README``, ``*.md``,
``*.txt`` and the like, by name; ``SampleSet.skipped`` lists them, so they are not lost, only not
reported as broken images). Discovery does not decode; workers do, and turn decode failures into
rejections. Entries discovery cannot use (broken links, unlistable folders, sockets,
link loops) are listed in ``SampleSet.rejected`` with a reason. Everything is sorted, so the same
folder always gives the same set.
"""

from __future__ import annotations

import dataclasses
import fnmatch
import os
import re
import stat
import sys
from dataclasses import dataclass, field

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on 3.10 only
    import tomli as tomllib

__all__ = [
    "CLASSES_FILE",
    "UNCLASSIFIED",
    "ClassSpec",
    "ClassesFile",
    "ImageJob",
    "Rejection",
    "SampleSet",
    "assign_class",
    "discover",
    "folder_class",
    "load_classes_file",
    "load_classes_toml",
    "parse_classes_toml",
]

CLASSES_FILE = "classes.toml"
UNCLASSIFIED = "unclassified"
ORIGINAL_WIDTH = "original"  # how a classes file spells a width of None

_HEX_COLOUR = re.compile(r"#([0-9a-fA-F]{3}|[0-9a-fA-F]{6})")
_OPTION_KEYS = ("target_ssim", "coverage", "chroma_floor", "local_floor", "widths", "background")


@dataclass(frozen=True)
class ClassSpec:
    """Targets and delivery options for one class of images.

    Attributes
    ----------
    name : str
    target_ssim : float
        SSIM each covered image must reach, in (0, 1].
    coverage : float
        Share of the class's images that must reach the target, in (0, 1].
    chroma_floor : float or None
        Chroma SSIM floor in (0, 1]; None means the same as ``target_ssim``.
    local_floor : float or None
        Worst-spot SSIM floor in [0, 1]; None means the engine's default, 0 turns it off.
    widths : tuple of (int or None)
        Delivery widths in pixels; None is the image's own width. Non-empty, no repeats.
    background : tuple of 3 int
        sRGB colour under transparent pixels.
    """

    name: str
    target_ssim: float = 0.95
    coverage: float = 0.9
    chroma_floor: float | None = None
    local_floor: float | None = None
    widths: tuple[int | None, ...] = (None,)
    background: tuple[int, int, int] = (255, 255, 255)

    def __post_init__(self):
        if not isinstance(self.name, str) or not self.name.strip():
            raise ValueError(f"name must be a non-empty string, got {self.name!r}")
        if "/" in self.name or any(ord(c) < 32 or ord(c) == 127 for c in self.name):
            raise ValueError(f"name must not contain '/' or control characters, got {self.name!r}")
        object.__setattr__(self, "target_ssim", _unit("target_ssim", self.target_ssim))
        object.__setattr__(self, "coverage", _unit("coverage", self.coverage))
        if self.chroma_floor is not None:
            object.__setattr__(self, "chroma_floor", _unit("chroma_floor", self.chroma_floor))
        if self.local_floor is not None:
            object.__setattr__(self, "local_floor", _unit("local_floor", self.local_floor, zero_ok=True))
        object.__setattr__(self, "widths", _widths(self.widths))
        object.__setattr__(self, "background", _background(self.background))


@dataclass(frozen=True)
class ImageJob:
    """What a worker receives for one image; plain values only, so it pickles cheaply.

    Attributes
    ----------
    key : str
        Stable id: the path relative to the sample folder, with '/' separators.
    class_name : str
    source : str or bytes
        Absolute path, or the file's bytes (web uploads).
    widths : tuple of (int or None)
    background : tuple of 3 int
    settings : tuple of dct.tables.Setting or None
        None means the pipeline's default grid.
    """

    key: str
    class_name: str
    source: str | bytes
    widths: tuple[int | None, ...]
    background: tuple[int, int, int]
    settings: tuple | None = None


@dataclass
class Rejection:
    """A file that could not be used, and why (a short reason for people, no traceback)."""

    path: str
    error: str


@dataclass
class SampleSet:
    """The result of ``discover``.

    Attributes
    ----------
    root : str
        Absolute path of the sample folder.
    classes : dict of str to ClassSpec
        Every class with at least one job, in sorted order of name.
    jobs : list of ImageJob
        Sorted by key.
    rejected : list of Rejection
        Entries refused at discovery, sorted by path (relative, '/' separators).
    skipped : list of str
        Documentation and text files left out by name (see :func:`is_text_file`), sorted.
    """

    root: str
    classes: dict[str, ClassSpec]
    jobs: list[ImageJob]
    rejected: list[Rejection] = field(default_factory=list)
    skipped: list[str] = field(default_factory=list)


# Files that travel with image folders but are never images: judged by name only (a text file
# named like an image still goes to the decoder and is reported as not an image).
TEXT_SUFFIXES = frozenset({".md", ".markdown", ".txt", ".rst", ".toml", ".json", ".csv", ".tsv", ".yaml", ".yml",
                           ".html", ".htm", ".xml", ".pdf", ".log", ".py", ".sh"})
TEXT_STEMS = frozenset({"readme", "license", "licence", "notice", "changelog", "authors", "copying"})


def is_text_file(name: str) -> bool:
    """True for documentation/text file names (README, notes.md, LICENSE.txt, ...)."""
    base = name.rsplit("/", 1)[-1].lower()
    _, dot, suffix = base.rpartition(".")
    return ("." + suffix) in TEXT_SUFFIXES if dot else base in TEXT_STEMS


@dataclass(frozen=True)
class ClassesFile:
    """A parsed classes file.

    Attributes
    ----------
    rules : tuple of (str, str)
        ``(pattern, class name)`` in priority order.
    specs : dict of str to ClassSpec
        Each ``[[class]]`` entry, options layered over ``defaults``.
    defaults : ClassSpec
        The base for classes the file does not list (named "unclassified"; only the options count).
    """

    rules: tuple[tuple[str, str], ...]
    specs: dict[str, ClassSpec]
    defaults: ClassSpec

    def spec_for(self, name: str) -> ClassSpec:
        """The spec for class ``name``: its own entry, or the defaults under that name."""
        spec = self.specs.get(name)
        return spec if spec is not None else dataclasses.replace(self.defaults, name=name)


# --------------------------------------------------------------------------------------------------
# Classes file


def load_classes_toml(path, *, defaults: ClassSpec | None = None) -> tuple[list[tuple[str, str]], dict[str, ClassSpec]]:
    """Read a classes file: its ``(pattern, class)`` rules and the specs of the classes it lists.

    Use ``load_classes_file`` to also get the layered defaults for classes it does not list.

    Raises
    ------
    ValueError
        The file is missing, is not valid TOML, or holds a bad value; the message names the file
        and the key.
    """
    parsed = load_classes_file(path, defaults=defaults)
    return list(parsed.rules), dict(parsed.specs)


def load_classes_file(path, *, defaults: ClassSpec | None = None) -> ClassesFile:
    """Read and validate a classes file (format in the module docstring)."""
    label = os.fspath(path)
    try:
        with open(path, "rb") as fh:
            raw = fh.read()
    except FileNotFoundError:
        raise ValueError(f"{label}: classes file not found") from None
    except OSError as exc:
        raise ValueError(f"{label}: cannot read classes file ({exc.strerror or exc})") from None
    return parse_classes_toml(raw, defaults=defaults, label=label)


def parse_classes_toml(
    text: str | bytes, *, defaults: ClassSpec | None = None, label: str = CLASSES_FILE
) -> ClassesFile:
    """Parse classes-file text (e.g. from a web upload); ``label`` names it in error messages."""
    if isinstance(text, bytes):
        try:
            text = text.decode("utf-8")
        except UnicodeDecodeError:
            raise ValueError(f"{label}: not UTF-8 text") from None
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{label}: invalid TOML: {exc}") from None

    unknown = sorted(set(doc) - {"defaults", "class"})
    if unknown:
        raise ValueError(f"{label}: unknown top-level key {unknown[0]!r} (allowed: 'defaults', 'class')")

    base = dataclasses.replace(defaults, name=UNCLASSIFIED) if defaults else ClassSpec(UNCLASSIFIED)
    table = doc.get("defaults", {})
    if not isinstance(table, dict):
        raise ValueError(f"{label}: 'defaults' must be a table ([defaults])")
    base = _apply_options(base, table, label, "defaults", allowed=_OPTION_KEYS)

    entries = doc.get("class", [])
    if not isinstance(entries, list) or not all(isinstance(e, dict) for e in entries):
        raise ValueError(f"{label}: 'class' must be an array of tables ([[class]])")
    rules: list[tuple[str, str]] = []
    specs: dict[str, ClassSpec] = {}
    for i, entry in enumerate(entries, start=1):
        where = f"class #{i}"
        name = entry.get("name")
        if not isinstance(name, str):
            raise ValueError(f"{label}: {where}: 'name' must be a string, got {name!r}")
        where = f"class {name!r}"
        if name in specs:
            raise ValueError(f"{label}: {where}: name is listed twice")
        try:
            spec = dataclasses.replace(base, name=name)
        except ValueError as exc:
            raise ValueError(f"{label}: {where}: {exc}") from None
        specs[name] = _apply_options(spec, entry, label, where, allowed=("name", "patterns") + _OPTION_KEYS)
        patterns = entry.get("patterns", [])
        if not isinstance(patterns, list):
            raise ValueError(f"{label}: {where}: 'patterns' must be a list of strings, got {patterns!r}")
        for pattern in patterns:
            if not isinstance(pattern, str) or not pattern.strip():
                raise ValueError(f"{label}: {where}: 'patterns' must hold non-empty strings, got {pattern!r}")
            rules.append((pattern, name))
    return ClassesFile(rules=tuple(rules), specs=specs, defaults=base)


def _apply_options(spec: ClassSpec, table: dict, label: str, where: str, *, allowed) -> ClassSpec:
    for key in table:
        if key not in allowed:
            raise ValueError(
                f"{label}: {where}: unknown key {key!r} (allowed: {', '.join(repr(k) for k in allowed)})"
            )
    for key in _OPTION_KEYS:
        if key not in table:
            continue
        value = table[key]
        try:
            if key == "widths":
                if not isinstance(value, list):
                    raise ValueError(f"widths must be a list, got {value!r}")
                value = tuple(None if w == ORIGINAL_WIDTH else w for w in value)
            elif key == "background":
                value = _parse_hex(value)
            spec = dataclasses.replace(spec, **{key: value})
        except ValueError as exc:
            raise ValueError(f"{label}: {where}: {key}: {exc}") from None
    return spec


def _parse_hex(value) -> tuple[int, int, int]:
    if not isinstance(value, str) or not _HEX_COLOUR.fullmatch(value):
        raise ValueError(f"background must be a hex colour '#rrggbb' or '#rgb', got {value!r}")
    digits = value[1:]
    if len(digits) == 3:
        digits = "".join(c * 2 for c in digits)
    return tuple(int(digits[i : i + 2], 16) for i in (0, 2, 4))


# --------------------------------------------------------------------------------------------------
# Classes of keys


def folder_class(key: str) -> str:
    """The class of a relative key from its first folder ("unclassified" for top-level files)."""
    head, sep, _ = key.partition("/")
    return head if sep else UNCLASSIFIED


def assign_class(key: str, rules) -> str:
    """The class of ``key``: the first rule whose pattern matches, else the folder class.

    Parameters
    ----------
    key : str
        Path relative to the sample folder, '/' separators.
    rules : iterable of (pattern, class name)
    """
    folded = key.casefold()
    base = folded.rsplit("/", 1)[-1]
    for pattern, name in rules:
        target = folded if "/" in pattern else base
        if fnmatch.fnmatchcase(target, pattern.casefold()):
            return name
    return folder_class(key)


# --------------------------------------------------------------------------------------------------
# Discovery


def discover(sample_dir, *, classes_file=None, defaults: ClassSpec | None = None) -> SampleSet:
    """Find every candidate image under ``sample_dir`` and its class.

    Parameters
    ----------
    sample_dir : str or os.PathLike
    classes_file : str or os.PathLike, optional
        A classes file; by default ``<sample_dir>/classes.toml`` when it exists.
    defaults : ClassSpec, optional
        Base options for every class (the name is ignored); a classes file refines them.

    Raises
    ------
    ValueError
        ``sample_dir`` is not a readable folder, or the classes file is bad.
    """
    root = os.path.abspath(os.fspath(sample_dir))
    if not os.path.isdir(root):
        what = "does not exist" if not os.path.lexists(root) else "is not a folder"
        raise ValueError(f"sample folder {os.fspath(sample_dir)!r} {what}")
    if classes_file is None and os.path.isfile(os.path.join(root, CLASSES_FILE)):
        classes_file = os.path.join(root, CLASSES_FILE)
    if classes_file is not None:
        parsed = load_classes_file(classes_file, defaults=defaults)
    else:
        base = dataclasses.replace(defaults, name=UNCLASSIFIED) if defaults else ClassSpec(UNCLASSIFIED)
        parsed = ClassesFile(rules=(), specs={}, defaults=base)

    skip = {os.path.join(root, CLASSES_FILE)}
    if classes_file is not None:
        skip.add(os.path.abspath(os.fspath(classes_file)))

    files, rejected = _walk(root, skip)
    specs: dict[str, ClassSpec] = {}
    bad_names: dict[str, str] = {}
    jobs = []
    skipped = sorted(key for key, _ in files if is_text_file(key))
    for key, path in sorted(files):
        if is_text_file(key):
            continue
        name = assign_class(key, parsed.rules)
        spec = specs.get(name)
        if spec is None:
            if name in bad_names:
                rejected.append(Rejection(key, bad_names[name]))
                continue
            try:
                spec = specs[name] = parsed.spec_for(name)
            except ValueError as exc:  # a folder name that cannot be a class name
                bad_names[name] = f"folder cannot be a class: {exc}"
                rejected.append(Rejection(key, bad_names[name]))
                continue
        jobs.append(ImageJob(key=key, class_name=name, source=path, widths=spec.widths, background=spec.background))
    return SampleSet(
        root=root,
        classes={name: specs[name] for name in sorted(specs)},
        jobs=jobs,
        rejected=sorted(rejected, key=lambda r: r.path),
        skipped=skipped,
    )


def _walk(root: str, skip: set[str]) -> tuple[list[tuple[str, str]], list[Rejection]]:
    """(key, absolute path) of candidate files, and rejections, under ``root``."""
    files: list[tuple[str, str]] = []
    rejected: list[Rejection] = []
    seen_dirs: dict[tuple[int, int], str] = {}
    st = os.stat(root)
    seen_dirs[(st.st_dev, st.st_ino)] = ""

    def visit(folder: str, prefix: str) -> None:
        try:
            with os.scandir(folder) as it:
                entries = sorted(it, key=lambda e: e.name)
        except OSError as exc:
            if not prefix:
                raise ValueError(f"sample folder {root!r} cannot be listed: {_reason(exc)}") from None
            rejected.append(Rejection(prefix.rstrip("/"), f"cannot list folder: {_reason(exc)}"))
            return
        for entry in entries:
            if entry.name.startswith("."):
                continue  # hidden: .DS_Store, .git, ._resource forks
            key = prefix + entry.name
            path = os.path.join(folder, entry.name)
            if path in skip:
                continue
            try:
                key.encode("utf-8")
            except UnicodeEncodeError:  # undecodable bytes in a POSIX file name
                rejected.append(Rejection(key.encode("utf-8", "replace").decode(), "name is not valid UTF-8"))
                continue
            try:
                st = os.stat(path)  # follows links
            except FileNotFoundError:
                reason = "broken symbolic link" if entry.is_symlink() else "file vanished"
                rejected.append(Rejection(key, reason))
                continue
            except OSError as exc:
                rejected.append(Rejection(key, f"unreadable: {_reason(exc)}"))
                continue
            if stat.S_ISDIR(st.st_mode):
                ident = (st.st_dev, st.st_ino)
                if ident in seen_dirs:
                    # A link back up (a loop) or a second way into a folder already listed.
                    first = seen_dirs[ident] or "the sample folder"
                    rejected.append(Rejection(key, f"folder link skipped: same folder as {first!r}"))
                    continue
                seen_dirs[ident] = key
                visit(path, key + "/")
            elif stat.S_ISREG(st.st_mode):
                if not os.access(path, os.R_OK):
                    rejected.append(Rejection(key, "unreadable: permission denied"))
                    continue
                files.append((key, path))
            else:
                rejected.append(Rejection(key, "not a regular file"))

    visit(root, "")
    return files, rejected


def _reason(exc: OSError) -> str:
    if isinstance(exc, PermissionError):
        return "permission denied"
    if isinstance(exc, FileNotFoundError):
        return "no such file"
    return (exc.strerror or type(exc).__name__).lower()


# --------------------------------------------------------------------------------------------------
# Validation


def _unit(key: str, value, *, zero_ok: bool = False) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or value != value:
        raise ValueError(f"{key} must be a number, got {value!r}")
    value = float(value)
    if zero_ok and not 0.0 <= value <= 1.0:
        raise ValueError(f"{key} must be in [0, 1] (0 turns it off), got {value!r}")
    if not zero_ok and not 0.0 < value <= 1.0:
        raise ValueError(f"{key} must be in (0, 1], got {value!r}")
    return value


def _widths(widths) -> tuple[int | None, ...]:
    if isinstance(widths, (str, bytes)) or not hasattr(widths, "__iter__"):
        raise ValueError(f"widths must be a sequence of positive ints or None, got {widths!r}")
    out = tuple(widths)
    if not out:
        raise ValueError("widths must not be empty")
    for w in out:
        if w is not None and (isinstance(w, bool) or not isinstance(w, int) or w < 1):
            raise ValueError(
                f"widths must be positive integers (or None, {ORIGINAL_WIDTH!r} in a classes file, "
                f"for the image's own width), got {w!r}"
            )
    if len(set(out)) != len(out):
        raise ValueError(f"widths must not repeat, got {list(out)!r}")
    return out


def _background(background) -> tuple[int, int, int]:
    try:
        values = tuple(background)
    except TypeError:
        values = ()
    if len(values) != 3 or not all(isinstance(v, int) and not isinstance(v, bool) and 0 <= v <= 255 for v in values):
        raise ValueError(f"background must be three integers 0..255 (r, g, b), got {background!r}")
    return values
