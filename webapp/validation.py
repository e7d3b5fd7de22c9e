"""Checking what people type or post: targets, widths, settings, class names, sign-offs.

Every function raises ``ValueError`` with a message naming the bad value (``{x!r}``) and what is
allowed; blueprints turn it into a 400 (JSON ``{"error": ...}`` or an inline form message).
Parsed class specs are plain JSON-able dicts; :func:`class_spec` turns one into ``dct.sampleset.ClassSpec``.
"""

from __future__ import annotations

import math

from dct.tables import SUBSAMPLINGS, Setting

DEFAULT_TARGET_SSIM = 0.95
DEFAULT_COVERAGE = 0.9
DEFAULT_CURRENT = {"quality": 85, "cutoff": 64, "subsampling": "4:2:0"}
MAX_WIDTH = 8192
MAX_NAME = 80
MAX_COMMENT = 2000
CLASS_KEYS = ("target_ssim", "coverage", "width", "widths", "local_floor", "chroma_floor")
# Which settings a sweep's decisions choose among (dct.report.CHOICES): any grid setting, or only
# cutoff 64, which is all an encoder's quality number can express.
CHOICES = ("custom_tables", "plain_quality")
CHOICE_WORDS = {"custom_tables": "custom tables", "plain_quality": "quality number only"}


def _blank(value) -> bool:
    return value is None or (isinstance(value, str) and value.strip() == "")


def fraction(value, name: str, *, allow_blank: bool = False):
    """A number in (0, 1]: SSIM targets, floors and coverage shares."""
    if allow_blank and _blank(value):
        return None
    if isinstance(value, bool):
        raise ValueError(f"{name} must be a number greater than 0 and at most 1, got {value!r}")
    try:
        number = float(value.strip()) if isinstance(value, str) else float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a number greater than 0 and at most 1, got {value!r}") from None
    if not math.isfinite(number) or not 0 < number <= 1:
        raise ValueError(f"{name} must be a number greater than 0 and at most 1, got {value!r}")
    return number


def floor(value, name: str):
    """An optional SSIM floor in [0, 1]; blank/None = the engine's default, 0 turns the check off."""
    if _blank(value):
        return None
    msg = f"{name} must be a number from 0 to 1, or blank for the default, got {value!r}"
    if isinstance(value, bool):
        raise ValueError(msg)
    try:
        number = float(value.strip()) if isinstance(value, str) else float(value)
    except (TypeError, ValueError):
        raise ValueError(msg) from None
    if not math.isfinite(number) or not 0 <= number <= 1:
        raise ValueError(msg)
    return number


def widths(value, name: str = "width") -> list:
    """Delivery widths: blank/None = as uploaded; an int, a list of ints, or text like ``"480, 960"``."""
    if _blank(value):
        return [None]
    if isinstance(value, str):
        parts = [p.strip() for p in value.replace(";", ",").split(",") if p.strip()]
    elif isinstance(value, (list, tuple)):
        parts = list(value)
    else:
        parts = [value]
    out: list = []
    for part in parts:
        if _blank(part):
            w = None
        else:
            w = _width(part, name)
        if w not in out:
            out.append(w)
    return out or [None]


def _width(part, name):
    msg = f"{name} must be a whole number of pixels from 1 to {MAX_WIDTH}, or blank for as uploaded, got {part!r}"
    if isinstance(part, bool):
        raise ValueError(msg)
    if isinstance(part, str):
        if not part.isdigit():
            raise ValueError(msg)
        w = int(part)
    elif isinstance(part, int):
        w = part
    elif isinstance(part, float) and part.is_integer():
        w = int(part)
    else:
        raise ValueError(msg)
    if not 1 <= w <= MAX_WIDTH:
        raise ValueError(msg)
    return w


def _int(value, name):
    if isinstance(value, bool):
        raise ValueError(f"{name} must be a whole number, got {value!r}")
    if isinstance(value, str) and value.strip().lstrip("-").isdigit():
        return int(value.strip())
    if isinstance(value, int):
        return value
    if isinstance(value, float) and value.is_integer():
        return int(value)
    raise ValueError(f"{name} must be a whole number, got {value!r}")


def setting(raw, name: str = "current") -> dict:
    """An encoder setting from a dict with quality, cutoff (default 64), subsampling (default 4:2:0)."""
    if raw is None:
        return dict(DEFAULT_CURRENT)
    if not isinstance(raw, dict):
        raise ValueError(f"{name} must be an object with quality, cutoff and subsampling, got {raw!r}")
    unknown = sorted(set(raw) - {"quality", "cutoff", "subsampling"})
    if unknown:
        raise ValueError(f"unknown key {unknown[0]!r} in {name} (allowed: quality, cutoff, subsampling)")
    quality = _int(raw.get("quality", DEFAULT_CURRENT["quality"]), f"{name}.quality")
    cutoff = _int(raw.get("cutoff", DEFAULT_CURRENT["cutoff"]), f"{name}.cutoff")
    subsampling = raw.get("subsampling", DEFAULT_CURRENT["subsampling"])
    if subsampling not in SUBSAMPLINGS:
        raise ValueError(f"{name}.subsampling must be one of {', '.join(SUBSAMPLINGS)}, got {subsampling!r}")
    try:
        return Setting(quality, cutoff, subsampling).as_dict()
    except ValueError as exc:
        raise ValueError(f"{name}: {exc}") from None


def class_entry(name: str, raw, *, defaults: dict) -> dict:
    """One class's spec dict from an API object, falling back to ``defaults`` for missing keys."""
    where = f"classes[{name!r}]"
    if not isinstance(raw, dict):
        raise ValueError(f"{where} must be an object, got {raw!r}")
    unknown = sorted(set(raw) - set(CLASS_KEYS))
    if unknown:
        raise ValueError(f"unknown key {unknown[0]!r} in {where} (allowed: {', '.join(CLASS_KEYS)})")
    if "width" in raw and "widths" in raw:
        raise ValueError(f"{where} gives both 'width' and 'widths'; give one")
    spec = dict(defaults)
    if "target_ssim" in raw:
        spec["target_ssim"] = fraction(raw["target_ssim"], f"{where}.target_ssim")
    if "coverage" in raw:
        spec["coverage"] = fraction(raw["coverage"], f"{where}.coverage")
    if "width" in raw:
        spec["widths"] = widths(raw["width"], f"{where}.width")
    if "widths" in raw:
        spec["widths"] = widths(raw["widths"], f"{where}.widths")
    if "local_floor" in raw:
        spec["local_floor"] = floor(raw["local_floor"], f"{where}.local_floor")
    if "chroma_floor" in raw:
        spec["chroma_floor"] = fraction(raw["chroma_floor"], f"{where}.chroma_floor", allow_blank=True)
    return spec


def default_spec(target_ssim=DEFAULT_TARGET_SSIM, coverage=DEFAULT_COVERAGE) -> dict:
    return {"target_ssim": target_ssim, "coverage": coverage, "widths": [None], "local_floor": None,
            "chroma_floor": None}


def sweep_request(payload, class_names: list[str]) -> dict:
    """Sweep parameters from the API body: ``{"classes": {name: spec}, "current": setting}``."""
    if payload is None:
        payload = {}
    if not isinstance(payload, dict):
        raise ValueError(f"request body must be a JSON object, got {payload!r}")
    allowed = {"target_ssim", "coverage", "classes", "current", "choice"}
    unknown = sorted(set(payload) - allowed)
    if unknown:
        raise ValueError(f"unknown key {unknown[0]!r} (allowed: {', '.join(sorted(allowed))})")
    target = fraction(payload.get("target_ssim", DEFAULT_TARGET_SSIM), "target_ssim")
    coverage = fraction(payload.get("coverage", DEFAULT_COVERAGE), "coverage")
    raw_classes = payload.get("classes")
    if raw_classes is None:
        raw_classes = {}
    if not isinstance(raw_classes, dict):
        raise ValueError(f"classes must be an object keyed by class name, got {raw_classes!r}")
    for name in raw_classes:
        if name not in class_names:
            raise ValueError(f"unknown class {name!r} (this set has: {', '.join(class_names)})")
    base = default_spec(target, coverage)
    classes = {
        name: class_entry(name, raw_classes[name], defaults=base) if name in raw_classes else dict(base)
        for name in class_names
    }
    return {"classes": classes, "current": setting(payload.get("current")),
            "choice": choice(payload.get("choice", CHOICES[0]))}


def choice(value) -> str:
    """``custom_tables`` or ``plain_quality``."""
    if value not in CHOICES:
        raise ValueError(f"choice must be one of {', '.join(CHOICES)}, got {value!r}")
    return value


def plain_only(params: dict) -> bool:
    """Whether a sweep's (or snapshot's) decisions choose among cutoff-64 settings only."""
    return params.get("choice") == "plain_quality"  # params from before the choice existed: custom


def target_changes(payload, params: dict) -> dict:
    """New params after a targets change (edit link): same shape as :func:`sweep_request`'s ``classes``.

    Widths cannot change here: they need new encodings, which a re-decision does not make.
    """
    if not isinstance(payload, dict):
        raise ValueError(f"request body must be a JSON object, got {payload!r}")
    unknown = sorted(set(payload) - {"classes", "current", "choice"})
    if unknown:
        raise ValueError(f"unknown key {unknown[0]!r} (allowed: choice, classes, current)")
    raw_classes = payload.get("classes")
    if raw_classes is None:
        raw_classes = {}
    if not isinstance(raw_classes, dict):
        raise ValueError(f"classes must be an object keyed by class name, got {raw_classes!r}")
    names = list(params["classes"])
    new_classes = {k: dict(v) for k, v in params["classes"].items()}
    for name, raw in raw_classes.items():
        if name not in names:
            raise ValueError(f"unknown class {name!r} (this set has: {', '.join(names)})")
        if isinstance(raw, dict) and ("width" in raw or "widths" in raw):
            raise ValueError("widths cannot change without a new sweep; start one from the sample set")
        new_classes[name] = class_entry(name, raw, defaults=new_classes[name])
    current = setting(payload["current"]) if "current" in payload else params["current"]
    picked = choice(payload["choice"]) if "choice" in payload else params.get("choice", CHOICES[0])
    return {**params, "classes": new_classes, "current": current, "choice": picked}


def class_name(value) -> str:
    if not isinstance(value, str) or not value.strip():
        raise ValueError(f"class must be a non-empty name, got {value!r}")
    name = value.strip()
    if len(name) > MAX_NAME or "/" in name or any(ord(c) < 32 or ord(c) == 127 for c in name):
        raise ValueError(f"class must be at most {MAX_NAME} characters without '/' or control characters, got {value!r}")
    return name


def signoff(payload, class_names: list[str]) -> dict:
    if not isinstance(payload, dict):
        raise ValueError(f"request body must be a JSON object, got {payload!r}")
    allowed = {"class", "name", "verdict", "comment"}
    unknown = sorted(set(payload) - allowed)
    if unknown:
        raise ValueError(f"unknown key {unknown[0]!r} (allowed: class, comment, name, verdict)")
    cls = payload.get("class")
    if cls not in class_names:
        raise ValueError(f"class must be one of this budget's classes ({', '.join(class_names)}), got {cls!r}")
    name = payload.get("name")
    if not isinstance(name, str) or not name.strip() or len(name.strip()) > MAX_NAME:
        raise ValueError(f"name must be 1 to {MAX_NAME} characters, got {name!r}")
    verdict = payload.get("verdict")
    if verdict not in ("approve", "needs work"):
        raise ValueError(f"verdict must be 'approve' or 'needs work', got {verdict!r}")
    comment = payload.get("comment", "")
    if comment is None:
        comment = ""
    if not isinstance(comment, str):
        raise ValueError(f"comment must be text of at most {MAX_COMMENT} characters, got {comment!r}")
    if len(comment) > MAX_COMMENT:
        raise ValueError(f"comment must be text of at most {MAX_COMMENT} characters, got {len(comment)} characters")
    return {"class_name": cls, "name": name.strip(), "verdict": verdict, "comment": comment.strip()}


def class_spec(name: str, spec: dict):
    """The pipeline's ``ClassSpec`` for one stored spec dict."""
    from dct.sampleset import ClassSpec

    return ClassSpec(
        name=name,
        target_ssim=spec["target_ssim"],
        coverage=spec["coverage"],
        chroma_floor=spec.get("chroma_floor"),
        local_floor=spec.get("local_floor"),
        widths=tuple(spec.get("widths") or [None]),
    )


def class_specs(params: dict) -> dict:
    return {name: class_spec(name, spec) for name, spec in params["classes"].items()}


def current_setting(params: dict) -> Setting:
    return Setting.from_dict(params["current"])


MAX_JSON_BYTES = 1_000_000  # a sweep request is a few KB; the whole upload cap is for images


def json_payload(raw: bytes, *, max_depth: int = 32):
    """A request body parsed as JSON: ``{}`` when empty; ``ValueError`` when too big, too deep or not JSON."""
    import json

    if not raw:
        return {}
    if len(raw) > MAX_JSON_BYTES:
        raise ValueError(f"request body too large for JSON: {len(raw):,} bytes, at most {MAX_JSON_BYTES:,}")
    try:
        data = json.loads(raw)
    except RecursionError:
        raise ValueError(f"request body is nested too deeply (at most {max_depth} levels)") from None
    except ValueError:  # UnicodeDecodeError and JSONDecodeError are both ValueErrors
        raise ValueError("request body must be JSON (Content-Type: application/json)") from None
    stack = [(data, 1)]
    while stack:  # iterative: the depth check itself must not recurse
        value, depth = stack.pop()
        if depth > max_depth:
            raise ValueError(f"request body is nested too deeply (at most {max_depth} levels)")
        if isinstance(value, dict):
            stack.extend((v, depth + 1) for v in value.values())
        elif isinstance(value, list):
            stack.extend((v, depth + 1) for v in value)
    return data
