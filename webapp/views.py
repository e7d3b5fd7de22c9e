"""Shared view helpers: htmx detection, error pages vs JSON errors, number formatting filters."""

from __future__ import annotations

import json
import logging

from flask import jsonify, render_template, request
from werkzeug.exceptions import HTTPException, RequestEntityTooLarge

log = logging.getLogger(__name__)
HTMX_FILE = "htmx-2.0.11.min.js"


def is_htmx() -> bool:
    return request.headers.get("HX-Request") == "true"


def wants_json() -> bool:
    return request.path.startswith("/api/")


def json_error(message: str, status: int, **extra):
    body = {"error": message}
    body.update(extra)
    return jsonify(body), status


def kb(value) -> str:
    """Bytes as KB (1 KB = 1000 bytes), one decimal, thousands separated."""
    if value is None:
        return "–"
    return f"{value / 1000:,.1f}"


def kb_signed(value) -> str:
    """A byte difference as signed KB: ``+12.3`` / ``−4.0`` (a real minus sign)."""
    if value is None:
        return "–"
    text = f"{abs(value) / 1000:,.1f}"
    if text.strip("0.,") == "":
        return text
    return ("+" if value > 0 else "\u2212") + text


def saving(saved_bytes, savings=None, digits: int = 1) -> str:
    """"saves 258.7 KB (−34.0 %)" / "costs 63.3 KB more (+209.0 %)" (``dct.report.describe_saving``)."""
    from dct.report import describe_saving

    return "–" if saved_bytes is None else describe_saving(saved_bytes, savings, digits=digits)


def pct(value, digits: int = 0) -> str:
    """A fraction as a percentage; negatives get a real minus sign, like :func:`kb_signed`."""
    if value is None:
        return "–"
    return f"{value * 100:.{digits}f}%".replace("-", "\u2212")


def ssim(value) -> str:
    if value is None:
        return "–"
    return f"{value:.4f}"


def setting_label(s) -> str:
    """``q62 · k28 · 4:2:0``: the same order as the frontier charts' labels."""
    if not s:
        return "none"
    return f"q{s['quality']} · k{s['cutoff']} · {s['subsampling']}"


CHROMA_WORDS = {"4:4:4": "full-resolution colour", "4:2:2": "colour halved across",
                "4:2:0": "colour halved both ways"}


def setting_words(s) -> str:
    """The long form of a setting for tooltips: what each part of ``q62 · k28 · 4:2:0`` means."""
    if not s:
        return "no setting"
    cutoff = s["cutoff"]
    kept = "all 64 DCT coefficients kept" if cutoff >= 64 else f"first {cutoff} of 64 zigzag coefficients kept"
    chroma = CHROMA_WORDS.get(s["subsampling"], s["subsampling"])
    return f"quality factor {s['quality']}; {kept}; chroma {s['subsampling']} ({chroma})"


def width_label(w) -> str:
    return "as uploaded" if w is None else f"{w} px"


def init_app(app) -> None:
    app.jinja_env.filters.update(kb=kb, kb_signed=kb_signed, saving=saving, pct=pct, ssim=ssim, setting=setting_label,
                                  setting_words=setting_words, width=width_label, fromjson=json.loads)
    from dct.budget import DEFAULT_LOCAL_FLOOR

    app.jinja_env.globals.update(htmx_file=HTMX_FILE, is_htmx=is_htmx, default_local_floor=DEFAULT_LOCAL_FLOOR)

    @app.errorhandler(HTTPException)
    def http_error(exc: HTTPException):
        message = exc.description or exc.name
        if exc.code == 413 and message == RequestEntityTooLarge.description:
            limit = app.config.get("MAX_CONTENT_LENGTH")
            message = f"upload too large: the limit is {limit // (1024 * 1024)} MB per request" if limit else message
        if wants_json():
            resp, status = json_error(message, exc.code or 400)
        else:
            resp, status = render_template("error.html", code=exc.code, title=exc.name, message=message), exc.code
        retry = getattr(exc, "retry_after", None)  # a busy server says when to come back (decoding.Busy)
        return (resp, status, {"Retry-After": str(retry)}) if retry else (resp, status)

    @app.errorhandler(Exception)
    def unexpected(exc: Exception):
        if isinstance(exc, HTTPException):
            return http_error(exc)
        log.exception("unhandled error on %s", request.path)
        if wants_json():
            return json_error(f"internal error: {type(exc).__name__}", 500)
        return render_template("error.html", code=500, title="Something broke",
                               message="The server hit an unexpected error; the log has details."), 500
