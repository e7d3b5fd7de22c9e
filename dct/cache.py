"""Finished per-image results, kept so that a crash or restart loses no finished work.

A result is filed under a fingerprint of everything that determines it: the image's content (its
bytes, or a file's path, size and modification time), the widths, the background, the settings and
the engine version. ``DirectoryCache`` writes one JSON file per result atomically (write, then
rename), so a crash can never leave a half-written entry behind.
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
from pathlib import Path
from typing import Protocol

ENGINE_VERSION = "6"  # 3: bit-exact with libjpeg-turbo; 4: PSNR summed in float64, sweeps without standard_bytes; 5: compiled loops (PSNR and blocking sums in another order); 6: SSIM means summed over the whole plane in one pass (last-bit differences). Bump when the engine's numbers change, so old results are not reused


class ResultCache(Protocol):
    def get(self, fingerprint: str) -> dict | None: ...

    def put(self, fingerprint: str, result: dict) -> None: ...


def source_digest(source) -> str:
    if isinstance(source, (bytes, bytearray, memoryview)):
        return "sha256:" + hashlib.sha256(bytes(source)).hexdigest()
    path = Path(source)
    try:
        st = path.stat()
    except OSError:
        return f"path:{path.resolve()}:missing"
    return f"path:{path.resolve()}:{st.st_size}:{st.st_mtime_ns}"


def fingerprint(kind: str, source, payload: dict) -> str:
    """A stable key for one unit of work (``kind`` names the function, ``payload`` its parameters)."""
    doc = {"engine": ENGINE_VERSION, "kind": kind, "source": source_digest(source), **payload}
    return hashlib.sha256(json.dumps(doc, sort_keys=True, default=str).encode()).hexdigest()


class DirectoryCache:
    """Results as JSON files under a directory (``ab/abcdef....json``)."""

    def __init__(self, root: str | os.PathLike):
        self.root = Path(root)

    def _path(self, fp: str) -> Path:
        return self.root / fp[:2] / f"{fp}.json"

    def get(self, fp: str) -> dict | None:
        try:
            with open(self._path(fp), encoding="utf-8") as f:
                return json.load(f)
        except (OSError, ValueError):
            return None

    def put(self, fp: str, result: dict) -> None:
        path = self._path(fp)
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=path.parent, suffix=".tmp")
        try:
            with os.fdopen(fd, "w", encoding="utf-8") as f:
                json.dump(result, f)
            os.replace(tmp, path)
        except BaseException:
            try:
                os.unlink(tmp)
            except OSError:
                pass
            raise


def default_cache_dir() -> Path:
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "eightfold"
