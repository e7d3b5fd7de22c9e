"""Turning uploaded files into a stored sample set.

Each file is decoded with ``dct.io.decode_image`` at upload time so a bad one is rejected with its
reason while the rest go ahead. The original bytes are kept, content-addressed, for the sweep; they
are never served back (they may carry EXIF/GPS).
"""

from __future__ import annotations

import posixpath
from pathlib import Path

from webapp import store

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


def ingest(conn, root, files, *, name: str | None = None, reuse: bool = False, max_files: int = 2000):
    """Decode and store uploaded files as one sample set.

    Parameters
    ----------
    conn : sqlite3.Connection
    root : path of the data directory (blobs go under ``root/blobs``)
    files : iterable of (filename, bytes)
        Filenames may carry the class as a folder prefix (``product/boot.jpg``).
    reuse : bool
        Return an existing set with the same content (filenames, classes and bytes) instead of a copy.

    Returns
    -------
    (set_id, images, rejected, reused)
        ``images``: list of dicts filename/class/width/height; ``rejected``: filename/error dicts.
    """
    from dct.io import ImageRejected, decode_image

    images, rejected, seen = [], [], set()
    for i, (raw_name, data) in enumerate(files):
        filename = clean_filename(raw_name) or f"unnamed-{i + 1}"
        if filename in seen:
            rejected.append({"filename": filename, "error": "duplicate file name in this upload"})
            continue
        seen.add(filename)
        if len(images) >= max_files:
            rejected.append({"filename": filename, "error": f"more than {max_files} files in one sample set"})
            continue
        if not data:
            rejected.append({"filename": filename, "error": "empty file"})
            continue
        try:
            decoded = decode_image(data)
        except ImageRejected as exc:
            rejected.append({"filename": filename, "error": str(exc)})
            continue
        except Exception as exc:  # a decoder bug on one file must not sink the whole set
            rejected.append({"filename": filename, "error": f"could not decode: {exc}"})
            continue
        height, width = decoded.pixels.shape[:2]
        sha = store.put_blob(root, data)
        images.append({
            "filename": filename, "class": class_of(filename), "sha256": sha,
            "width": int(width), "height": int(height), "warnings": [str(w) for w in decoded.warnings],
        })
    fingerprint = store.set_fingerprint([(im["filename"], im["class"], im["sha256"]) for im in images])
    if reuse and images:
        existing = store.find_set_by_fingerprint(conn, fingerprint)
        if existing is not None:
            return existing["id"], images, rejected, True
    if name is None:
        classes = sorted({im["class"] for im in images})
        noun = "image" if len(images) == 1 else "images"
        name = f"{len(images)} {noun}" + (f" in {', '.join(classes)}" if classes else "")
    set_id = store.create_sample_set(conn, name=name, images=images, rejected=rejected, fingerprint=fingerprint)
    return set_id, images, rejected, False


def read_folder(folder) -> list[tuple[str, bytes]]:
    """(relative path, bytes) for every file under a folder, as a folder upload would send them."""
    folder = Path(folder)
    out = []
    for path in sorted(folder.rglob("*")):
        if path.is_file() and not path.name.startswith("."):
            out.append((posixpath.join(*path.relative_to(folder).parts), path.read_bytes()))
    return out
