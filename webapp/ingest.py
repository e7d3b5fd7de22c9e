"""Turning uploaded files into a stored sample set.

Each file is decoded with ``dct.io.decode_image`` at upload time so a bad one is rejected with its
reason while the rest go ahead. The original bytes are kept, content-addressed, for the sweep; they
are never served back (they may carry EXIF/GPS).
"""

from __future__ import annotations

import io
import posixpath
from pathlib import Path

from werkzeug.exceptions import HTTPException

from webapp import store, validation

UNCLASSIFIED = "unclassified"


def clean_filename(raw: str | None) -> str:
    """Normalise an uploaded relative path: forward slashes, no leading ``/`` or ``./``, no ``..``."""
    name = "".join(c for c in (raw or "") if ord(c) >= 32 and ord(c) != 127)  # no control characters
    name = name.replace("\\", "/").strip()
    parts = [p for p in name.split("/") if p not in ("", ".", "..")]
    return "/".join(parts)


def class_of(filename: str) -> str:
    """The class is the folder: the part before the first '/'; a bare file name is unclassified."""
    head, sep, _ = filename.partition("/")
    return head if sep and head else UNCLASSIFIED


MAX_ASPECT = 40  # a 480 px delivery width must leave the short side >= 11 px (SSIM window): 480 / 11 ~ 43


def usable(width: int, height: int) -> str | None:
    """Why a decoded image cannot be swept, or None: the checks a sweep would otherwise fail on later."""
    from dct.simulate import MIN_SIDE

    if min(width, height) < MIN_SIDE:
        return (f"too small to measure: {width}x{height} pixels; SSIM's window needs at least "
                f"{MIN_SIDE}x{MIN_SIDE}")
    if max(width, height) > MAX_ASPECT * min(width, height):
        return (f"aspect ratio too extreme: {width}x{height} pixels; at most {MAX_ASPECT}:1, so that "
                f"resizing to a delivery width leaves enough rows to measure")
    return None


def probe(source) -> dict:
    """Decode once (on a pool thread) to check the file; returns width, height and warnings."""
    from dct.io import decode_image

    decoded = decode_image(source)
    height, width = decoded.pixels.shape[:2]
    return {"width": int(width), "height": int(height), "warnings": [str(w) for w in decoded.warnings]}


def _as_part(root, i, item):
    """An uploads.Part for an upload part, or for a (filename, bytes) pair (folders, the demo)."""
    from webapp.uploads import Part

    if isinstance(item, Part):
        return item
    raw_name, data = item
    path, sha, size = store.spool_upload(root, io.BytesIO(data))
    return Part(raw_name or "", path, sha, size)


def ingest(conn, root, files, *, name: str | None = None, reuse: bool = False, max_files: int = 2000,
           decode=None, too_many: int = 0):
    """Check and store uploaded files as one sample set.

    Parameters
    ----------
    conn : sqlite3.Connection
    root : path of the data directory (blobs go under ``root/blobs``)
    files : iterable of ``uploads.Part`` or of (filename, bytes)
        Filenames may carry the class as a folder prefix (``product/boot.jpg``).
    reuse : bool
        Return an existing set with the same content (filenames, classes and bytes) instead of a copy.
    decode : callable, optional
        Runs ``probe(path)`` somewhere (the app's bounded decode pool); default: right here.
    too_many : int
        Parts the upload dropped over the file limit, listed as one rejection.

    Returns
    -------
    (set_id, images, rejected, reused)
        ``images``: list of dicts filename/class/width/height; ``rejected``: filename/error dicts.
    """
    from dct.io import ImageRejected

    decode = decode or (lambda fn, *args: fn(*args))
    images, rejected, seen, accepted = [], [], set(), []
    parts = [_as_part(root, i, item) for i, item in enumerate(files)]
    try:
        for i, part in enumerate(parts):
            filename = clean_filename(part.filename)
            if not filename:
                rejected.append({"filename": f"unnamed-{i + 1}", "error": "the part has no file name"})
                continue
            if filename in seen:
                rejected.append({"filename": filename, "error": "duplicate file name in this upload"})
                continue
            seen.add(filename)
            if len(images) >= max_files:
                rejected.append({"filename": filename, "error": f"more than {max_files} files in one sample set"})
                continue
            if not part.size:
                rejected.append({"filename": filename, "error": "empty file"})
                continue
            try:
                class_name = validation.class_name(class_of(filename))
            except ValueError as exc:
                rejected.append({"filename": filename, "error": f"its folder cannot be a class name: {exc}"})
                continue
            try:
                info = decode(probe, str(part.path))
            except ImageRejected as exc:
                rejected.append({"filename": filename, "error": str(exc)})
                continue
            except HTTPException:
                raise  # the pool is busy: the whole upload gets the 503
            except Exception as exc:  # a decoder bug on one file must not sink the whole set
                rejected.append({"filename": filename, "error": f"could not decode: {exc}"})
                continue
            reason = usable(info["width"], info["height"])
            if reason:
                rejected.append({"filename": filename, "error": reason})
                continue
            accepted.append(part)
            images.append({"filename": filename, "class": class_name, "sha256": part.sha256, **info})
        if too_many:
            rejected.append({"filename": f"{too_many} more files",
                             "error": f"more than {max_files} files in one sample set"})
        fingerprint = store.set_fingerprint([(im["filename"], im["class"], im["sha256"]) for im in images])
        if reuse and images:
            existing = store.find_set_by_fingerprint(conn, fingerprint)
            if existing is not None:
                return existing["id"], images, rejected, True
        if name is None:
            classes = sorted({im["class"] for im in images})
            noun = "image" if len(images) == 1 else "images"
            name = f"{len(images)} {noun}" + (f" in {', '.join(classes)}" if classes else "")
        # Claim the blobs before they are put in place: a delete running now keeps them (store.delete_set).
        claim = store.claim_blobs(conn, [p.sha256 for p in accepted])
        try:
            for part in accepted:
                store.adopt_blob(root, part.path, part.sha256)
            set_id = store.create_sample_set(conn, name=name, images=images, rejected=rejected,
                                             fingerprint=fingerprint)
        finally:
            store.release_claim(conn, claim)
        return set_id, images, rejected, False
    finally:
        for part in parts:
            part.path.unlink(missing_ok=True)


def read_folder(folder) -> list[tuple[str, bytes]]:
    """(relative path, bytes) for every file under a folder, as a folder upload would send them."""
    folder = Path(folder)
    out = []
    for path in sorted(folder.rglob("*")):
        if path.is_file() and not path.name.startswith("."):
            out.append((posixpath.join(*path.relative_to(folder).parts), path.read_bytes()))
    return out
