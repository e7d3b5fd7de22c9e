"""Form fields checked for people, not scripts: every bad field at once, in plain words, by field.

``webapp.validation`` keeps the precise messages the JSON API answers with (a script wants
``classes['photo'].target_ssim must be ...``). A person filling in the set page or the results
table wants to know which box is wrong and what to type instead, for every wrong box at once. The
functions here run the same validators field by field and return ``FieldError`` items that the
templates show once, above the form, and mark on the fields themselves.
"""

from __future__ import annotations

from dataclasses import dataclass

from webapp import validation

# What each kind of field accepts, said as advice.
ADVICE = {
    "target_ssim": "enter a number above 0 and at most 1, such as 0.95",
    "coverage": "enter a share above 0 and at most 1, such as 0.9 for 90 %",
    "widths": f"enter whole pixel widths from 1 to {validation.MAX_WIDTH} separated by commas, or leave it blank "
              "for the uploaded width",
    "local_floor": "enter a number from 0 to 1 (0 turns the check off), or leave it blank for the default",
    "chroma_floor": "enter a number above 0 and at most 1, or leave it blank to use the target",
    "quality": "enter a whole number from 1 to 100",
    "cutoff": "enter a whole number from 1 to 64 (64 keeps every coefficient)",
}
LABELS = {
    "target_ssim": "Target SSIM", "coverage": "Coverage", "widths": "Delivery widths",
    "local_floor": "Local floor", "chroma_floor": "Chroma floor", "quality": "Quality", "cutoff": "Cutoff",
}


@dataclass(frozen=True)
class FieldError:
    field: str  # the form field's name, e.g. "t-0"
    message: str


def _typed(raw) -> str:
    text = str(raw).strip()
    return f" (you typed “{text}”)" if text else ""


def message(kind: str, raw, class_name: str | None = None) -> str:
    where = f" for “{class_name}”" if class_name else ""
    return f"{LABELS[kind]}{where}: {ADVICE[kind]}{_typed(raw)}."


def _check(kind: str, raw):
    if kind in ("target_ssim", "coverage"):
        return validation.fraction(raw, kind)
    if kind == "chroma_floor":
        return validation.fraction(raw, kind, allow_blank=True)
    if kind == "local_floor":
        return validation.floor(raw, kind)
    if kind == "widths":
        return validation.widths(raw, kind)
    raise AssertionError(kind)


# Field-name prefixes of the set page's targets table (see templates/_partials/class_targets.html).
PREFIX = {"target_ssim": "t", "coverage": "c", "widths": "w", "local_floor": "lf", "chroma_floor": "cf"}


def check_class_rows(form) -> list[FieldError]:
    """Every bad value in the set page's per-class rows (fields cls-N with t-N, c-N, w-N, lf-N, cf-N)."""
    errors = []
    for key in form:
        if not key.startswith("cls-"):
            continue
        i, name = key[4:], form[key]
        for kind, prefix in PREFIX.items():
            field = f"{prefix}-{i}"
            raw = form.get(field, "")
            try:
                _check(kind, raw)
            except ValueError:
                errors.append(FieldError(field, message(kind, raw, name)))
    return errors


def check_current(form) -> list[FieldError]:
    """The set page's "current default" fields."""
    errors = []
    for kind, field, lo, hi in (("quality", "cur_quality", 1, 100), ("cutoff", "cur_cutoff", 1, 64)):
        raw = form.get(field, "")
        text = str(raw).strip()
        if not (text.isdigit() and lo <= int(text) <= hi):
            errors.append(FieldError(field, message(kind, raw)))
    return errors


def check_table_change(form) -> list[FieldError]:
    """A target or coverage typed into the results table (fields target_ssim, coverage of one class)."""
    name = form.get("class", "")
    errors = []
    for kind in ("target_ssim", "coverage"):
        if kind in form:
            try:
                _check(kind, form[kind])
            except ValueError:
                errors.append(FieldError(kind, message(kind, form[kind], name)))
    return errors


MAX_SET_NAME = 120


def set_name(value) -> str:
    """A sample set's name as typed: 1 to 120 characters, no control characters."""
    text = value.strip() if isinstance(value, str) else ""
    if not text:
        raise ValueError("Name: type a name for the set, such as “Autumn catalogue”.")
    if len(text) > MAX_SET_NAME or any(ord(c) < 32 or ord(c) == 127 for c in text):
        raise ValueError(f"Name: use at most {MAX_SET_NAME} characters, without line breaks or control characters.")
    return text
