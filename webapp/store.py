"""Persistence: SQLite (WAL) for rows, content-addressed files on disk for uploaded originals.

Layout under the data directory::

    eightfold.sqlite3          rows (schema in schema.sql, version in PRAGMA user_version)
    blobs/ab/abcdef....bin     uploaded originals by sha256, stored as uploaded and never served back
    renders/ab/abcdef...-*.*   derived pixels (PNG/JPEG/heat-map/SSIM map) cached per blob

Functions take an explicit ``sqlite3.Connection`` so the sweep worker can use its own; request code gets
one per app context from :func:`get_db`.
"""

from __future__ import annotations

import hashlib
import json
import os
import secrets
import sqlite3
import threading
import time
from datetime import datetime, timezone
from pathlib import Path

from flask import current_app, g

SCHEMA_VERSION = 2  # 2: result rows know their set; sign-offs record the snapshot they were carried over from
SCHEMA_FILE = Path(__file__).with_name("schema.sql")
STATUSES = ("queued", "running", "done", "failed", "cancelled")
VERDICTS = ("approve", "needs work")


def now_iso() -> str:
    return datetime.now(timezone.utc).replace(microsecond=0).isoformat()


def new_id() -> str:
    # Set and sweep ids are random too, so a share link does not lead to its neighbours by counting.
    return secrets.token_hex(8)


def new_token() -> str:
    return secrets.token_urlsafe(24)


# --- connections --------------------------------------------------------------------------------


def connect(path, *, check_same_thread: bool = True) -> sqlite3.Connection:
    conn = sqlite3.connect(str(path), timeout=30, check_same_thread=check_same_thread)
    conn.row_factory = sqlite3.Row
    conn.execute("PRAGMA foreign_keys = ON")
    conn.execute("PRAGMA busy_timeout = 30000")
    return conn


def ensure_schema(conn: sqlite3.Connection) -> None:
    """Create the tables on first use and stamp the schema version."""
    conn.execute("PRAGMA journal_mode = WAL")
    version = conn.execute("PRAGMA user_version").fetchone()[0]
    if version > SCHEMA_VERSION:
        raise RuntimeError(
            f"data directory holds schema version {version!r}; this Eightfold knows up to {SCHEMA_VERSION}"
        )
    if version < SCHEMA_VERSION:
        conn.executescript(SCHEMA_FILE.read_text(encoding="utf-8"))  # CREATE ... IF NOT EXISTS: new tables only
        # v1 -> v2 (CREATE IF NOT EXISTS kept v1 tables as they were): result rows learn which set wrote
        # them, and sign-offs the snapshot they were carried over from.
        if "set_id" not in {r[1] for r in conn.execute("PRAGMA table_info(result_cache)")}:
            conn.execute("ALTER TABLE result_cache ADD COLUMN set_id TEXT")
        conn.execute("CREATE INDEX IF NOT EXISTS result_cache_set ON result_cache (set_id)")
        if "carried_from" not in {r[1] for r in conn.execute("PRAGMA table_info(signoffs)")}:
            conn.execute("ALTER TABLE signoffs ADD COLUMN carried_from TEXT REFERENCES snapshots (view_token) ON DELETE SET NULL")
        conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION}")
        conn.commit()


def get_db() -> sqlite3.Connection:
    if "db" not in g:
        g.db = connect(current_app.config["DATABASE"])
    return g.db


def close_db(exc=None) -> None:
    db = g.pop("db", None)
    if db is not None:
        db.close()


def init_app(app) -> None:
    conn = connect(app.config["DATABASE"])
    try:
        ensure_schema(conn)
        release_stale_claims(conn)
    finally:
        conn.close()
    for suffix in ("", "-wal", "-shm"):  # SQLite gives its side files the main file's mode
        try:
            os.chmod(app.config["DATABASE"] + suffix, 0o600)
        except FileNotFoundError:
            pass
    app.teardown_appcontext(close_db)


def data_dir() -> Path:
    return Path(current_app.config["DATA_DIR"])


def _loads(text):
    return None if text is None else json.loads(text)


# --- blobs and renders ----------------------------------------------------------------------------


def blob_path(root, sha: str) -> Path:
    return Path(root) / "blobs" / sha[:2] / f"{sha}.bin"


def _private_dir(path: Path) -> None:
    path.mkdir(mode=0o700, parents=True, exist_ok=True)


def _write_private(path: Path, data: bytes) -> None:
    """Write ``data`` under ``path`` atomically, readable by the owner only (originals may carry GPS)."""
    _private_dir(path.parent)
    tmp = path.with_name(path.name + f".tmp{secrets.token_hex(4)}")
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    with os.fdopen(fd, "wb") as f:
        f.write(data)
    tmp.replace(path)  # atomic: a crash never leaves a half-written file under its final name


def put_blob(root, data: bytes) -> str:
    """Store bytes as a blob (if not there yet). Callers that race a delete hold a claim first."""
    sha = hashlib.sha256(data).hexdigest()
    path = blob_path(root, sha)
    if not path.exists():
        _write_private(path, data)
    return sha


def spool_upload(root, stream, *, chunk: int = 1 << 20) -> tuple[Path, str, int]:
    """Copy an upload stream to a private temporary file under ``root/tmp``, hashing as it goes.

    Returns ``(path, sha256, size)``; the caller moves it into place with :func:`adopt_blob` or removes it.
    Memory stays at one chunk whatever the file's size.
    """
    folder = Path(root) / "tmp"
    _private_dir(folder)
    path = folder / f"upload-{secrets.token_hex(8)}"
    h, size = hashlib.sha256(), 0
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    try:
        with os.fdopen(fd, "wb") as f:
            while True:
                block = stream.read(chunk)
                if not block:
                    break
                h.update(block)
                size += len(block)
                f.write(block)
    except BaseException:
        path.unlink(missing_ok=True)
        raise
    return path, h.hexdigest(), size


def adopt_blob(root, tmp: Path, sha: str) -> None:
    """Move a spooled upload to its blob name, or drop it when that blob exists already.

    A hard link never replaces an existing file, so a stored blob keeps its modification time
    (the result cache keys on it) even when two uploads of the same bytes finish together.
    """
    path = blob_path(root, sha)
    _private_dir(path.parent)
    try:
        os.link(tmp, path)
    except FileExistsError:
        pass
    finally:
        tmp.unlink(missing_ok=True)


def render_path(root, sha: str, key: str) -> Path:
    return Path(root) / "renders" / sha[:2] / f"{sha}-{key}"


def cached_render(root, sha: str, key: str, make) -> bytes:
    """Bytes of a derived file, made once by ``make()`` and kept beside the other renders of that blob."""
    path = render_path(root, sha, key)
    if path.exists():
        return path.read_bytes()
    data = make()
    _write_private(path, data)
    return data


def _remove_blob_files(root, sha: str) -> None:
    blob_path(root, sha).unlink(missing_ok=True)
    renders = Path(root) / "renders" / sha[:2]
    if renders.is_dir():
        for p in renders.glob(f"{sha}-*"):
            p.unlink(missing_ok=True)


# --- sample sets ----------------------------------------------------------------------------------


def set_fingerprint(entries) -> str:
    """sha256 over sorted (filename, class, blob sha) triples: the identity of a sample set's content."""
    h = hashlib.sha256()
    for filename, class_name, sha in sorted(entries):
        h.update(f"{filename}\0{class_name}\0{sha}\n".encode("utf-8"))
    return h.hexdigest()


def create_sample_set(conn, *, name: str, images: list[dict], rejected: list[dict], fingerprint: str) -> str:
    """Store a set. ``images``: dicts with filename, class, sha256, width, height, warnings."""
    set_id = new_id()
    with conn:
        conn.execute(
            "INSERT INTO sample_sets (id, name, fingerprint, created) VALUES (?, ?, ?, ?)",
            (set_id, name, fingerprint, now_iso()),
        )
        conn.executemany(
            "INSERT INTO images (set_id, position, filename, class_name, sha256, width, height, warnings)"
            " VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
            [
                (set_id, i, im["filename"], im["class"], im["sha256"], im["width"], im["height"],
                 json.dumps(im.get("warnings", [])))
                for i, im in enumerate(images)
            ],
        )
        conn.executemany(
            "INSERT INTO rejected (set_id, filename, error) VALUES (?, ?, ?)",
            [(set_id, r["filename"], r["error"]) for r in rejected],
        )
    return set_id


def find_set_by_fingerprint(conn, fingerprint: str):
    return conn.execute(
        "SELECT * FROM sample_sets WHERE fingerprint = ? ORDER BY created LIMIT 1", (fingerprint,)
    ).fetchone()


def get_set(conn, set_id: str):
    return conn.execute("SELECT * FROM sample_sets WHERE id = ?", (set_id,)).fetchone()


def rename_set(conn, set_id: str, name: str) -> None:
    with conn:
        conn.execute("UPDATE sample_sets SET name = ? WHERE id = ?", (name, set_id))


def list_sets(conn):
    return conn.execute(
        "SELECT s.*, (SELECT COUNT(*) FROM images i WHERE i.set_id = s.id) AS image_count"
        " FROM sample_sets s ORDER BY s.created DESC, s.rowid DESC"
    ).fetchall()


def set_images(conn, set_id: str):
    return conn.execute("SELECT * FROM images WHERE set_id = ? ORDER BY position", (set_id,)).fetchall()


def set_rejected(conn, set_id: str):
    return conn.execute("SELECT * FROM rejected WHERE set_id = ? ORDER BY id", (set_id,)).fetchall()


def set_classes(conn, set_id: str) -> list[str]:
    rows = conn.execute(
        "SELECT class_name, MIN(position) AS first FROM images WHERE set_id = ? GROUP BY class_name ORDER BY first",
        (set_id,),
    ).fetchall()
    return [r["class_name"] for r in rows]


def update_image_classes(conn, set_id: str, classes: dict[int, str]) -> None:
    with conn:
        for image_id, class_name in classes.items():
            conn.execute(
                "UPDATE images SET class_name = ? WHERE id = ? AND set_id = ?", (class_name, image_id, set_id)
            )
        rows = conn.execute(
            "SELECT filename, class_name, sha256 FROM images WHERE set_id = ?", (set_id,)
        ).fetchall()
        conn.execute(
            "UPDATE sample_sets SET fingerprint = ? WHERE id = ?",
            (set_fingerprint([(r[0], r[1], r[2]) for r in rows]), set_id),
        )


def claim_blobs(conn, shas) -> str:
    """Mark blobs as in use by an upload that has no image rows yet; returns the claim id.

    Together with the ``images`` rows these ``blob_claims`` rows count who uses a blob, and
    :func:`delete_set` removes a blob's files only when neither exists, inside its write transaction,
    so a delete can never take a file that an upload in flight is about to use.
    """
    claim = secrets.token_hex(8)
    with conn:
        conn.executemany("INSERT INTO blob_claims (claim, sha256, created) VALUES (?, ?, ?)",
                         [(claim, sha, time.time()) for sha in set(shas)])
    return claim


def release_claim(conn, claim: str) -> None:
    with conn:
        conn.execute("DELETE FROM blob_claims WHERE claim = ?", (claim,))


def release_stale_claims(conn, max_age_s: float = 24 * 3600) -> None:
    """Claims left by a crash mid-upload; their blobs are kept until a later delete looks again."""
    with conn:
        conn.execute("DELETE FROM blob_claims WHERE created < ?", (time.time() - max_age_s,))


def delete_set(conn, root, set_id: str) -> bool:
    """Delete a set, its sweeps, budgets and cached results, and every blob nobody else uses.

    Runs as one write transaction (``BEGIN IMMEDIATE``) that also unlinks the unused blobs' files,
    so an upload's claim (a write) is either seen here or made after the files are gone.
    """
    conn.execute("BEGIN IMMEDIATE")
    try:
        shas = {r[0] for r in conn.execute("SELECT sha256 FROM images WHERE set_id = ?", (set_id,))}
        cur = conn.execute("DELETE FROM sample_sets WHERE id = ?", (set_id,))
        if cur.rowcount == 0:
            conn.rollback()
            return False
        # Result rows carry the set's file names (the pipeline's keys); they go with the set.
        conn.execute("DELETE FROM result_cache WHERE set_id = ?", (set_id,))
        for sha in shas:
            used = conn.execute(
                "SELECT 1 FROM images WHERE sha256 = ? UNION ALL SELECT 1 FROM blob_claims WHERE sha256 = ? LIMIT 1",
                (sha, sha),
            ).fetchone()
            if used is None:
                _remove_blob_files(root, sha)
        conn.commit()
    except BaseException:
        conn.rollback()
        raise
    return True


# --- sweeps -------------------------------------------------------------------------------------


def create_sweep(conn, set_id: str, params: dict) -> str:
    sweep_id = new_id()
    with conn:
        conn.execute(
            "INSERT INTO sweeps (id, set_id, status, params, created) VALUES (?, ?, 'queued', ?, ?)",
            (sweep_id, set_id, json.dumps(params), now_iso()),
        )
    return sweep_id


def get_sweep(conn, sweep_id: str):
    row = conn.execute("SELECT * FROM sweeps WHERE id = ?", (sweep_id,)).fetchone()
    return None if row is None else sweep_dict(row)


def sweep_dict(row) -> dict:
    d = dict(row)
    d["params"] = _loads(d["params"])
    d["document"] = _loads(d["document"])
    d["curves"] = _loads(d["curves"])
    return d


def sweeps_for_set(conn, set_id: str):
    return conn.execute(
        "SELECT id, status, done, total, created, finished FROM sweeps WHERE set_id = ? ORDER BY created DESC, rowid DESC",
        (set_id,),
    ).fetchall()


def pending_sweeps(conn) -> list[str]:
    rows = conn.execute(
        "SELECT id FROM sweeps WHERE status IN ('queued', 'running') ORDER BY created, rowid"
    ).fetchall()
    return [r[0] for r in rows]


def mark_running(conn, sweep_id: str) -> None:
    with conn:
        conn.execute(
            "UPDATE sweeps SET status = 'running', started = ?, error = NULL WHERE id = ?", (time.time(), sweep_id)
        )


def update_progress(conn, sweep_id: str, done: int, total: int) -> None:
    with conn:
        conn.execute("UPDATE sweeps SET done = ?, total = ? WHERE id = ?", (int(done), int(total), sweep_id))


def finish_sweep(conn, sweep_id: str, *, status: str, document=None, curves=None, error=None) -> None:
    if status not in ("done", "failed", "cancelled"):
        raise ValueError(f"finished status must be done, failed or cancelled, got {status!r}")
    with conn:
        conn.execute(
            "UPDATE sweeps SET status = ?, document = ?, curves = ?, error = ?, finished = ? WHERE id = ?",
            (
                status,
                None if document is None else json.dumps(document),
                None if curves is None else json.dumps(curves),
                error,
                now_iso(),
                sweep_id,
            ),
        )


def request_cancel(conn, sweep_id: str) -> str | None:
    """Flag a sweep for cancelling; a queued one is cancelled at once. Returns the new status."""
    with conn:
        row = conn.execute("SELECT status FROM sweeps WHERE id = ?", (sweep_id,)).fetchone()
        if row is None:
            return None
        if row[0] == "queued":
            conn.execute(
                "UPDATE sweeps SET status = 'cancelled', cancel_requested = 1, finished = ? WHERE id = ?",
                (now_iso(), sweep_id),
            )
            return "cancelled"
        if row[0] == "running":
            conn.execute("UPDATE sweeps SET cancel_requested = 1 WHERE id = ?", (sweep_id,))
        return row[0]


def save_decision(conn, sweep_id: str, params: dict, document: dict) -> None:
    with conn:
        conn.execute(
            "UPDATE sweeps SET params = ?, document = ? WHERE id = ?",
            (json.dumps(params), json.dumps(document), sweep_id),
        )


class SqliteResultCache:
    """``dct.pipeline.ResultCache`` over the ``result_cache`` table.

    Uses its own connection, guarded by a lock, so the pipeline may call it from any thread.
    """

    def __init__(self, database, *, set_id: str | None = None):
        self._conn = connect(database, check_same_thread=False)
        self._lock = threading.Lock()
        self._set_id = set_id  # rows remember the set whose sweep wrote them (file names inside)

    def get(self, fingerprint: str):
        with self._lock:
            row = self._conn.execute(
                "SELECT result FROM result_cache WHERE fingerprint = ?", (fingerprint,)
            ).fetchone()
        return None if row is None else json.loads(row[0])

    def put(self, fingerprint: str, result: dict) -> None:
        text = json.dumps(result)
        with self._lock, self._conn:
            self._conn.execute(
                "INSERT OR REPLACE INTO result_cache (fingerprint, result, created, set_id) VALUES (?, ?, ?, ?)",
                (fingerprint, text, now_iso(), self._set_id),
            )

    def close(self) -> None:
        with self._lock:
            self._conn.close()


# --- budgets --------------------------------------------------------------------------------------


def create_budget(conn, sweep_id: str) -> str:
    token = new_token()
    with conn:
        conn.execute(
            "INSERT INTO budgets (edit_token, sweep_id, created) VALUES (?, ?, ?)", (token, sweep_id, now_iso())
        )
    return token


def add_snapshot(conn, edit_token: str, params: dict, document: dict) -> str:
    token = new_token()
    with conn:
        seq = conn.execute(
            "SELECT COALESCE(MAX(seq), 0) + 1 FROM snapshots WHERE edit_token = ?", (edit_token,)
        ).fetchone()[0]
        conn.execute(
            "INSERT INTO snapshots (view_token, edit_token, seq, params, document, created) VALUES (?, ?, ?, ?, ?, ?)",
            (token, edit_token, seq, json.dumps(params), json.dumps(document), now_iso()),
        )
    return token


def _snapshot_dict(row) -> dict:
    """A snapshot row with its JSON parsed; parsed once per snapshot (frozen, so it never changes)."""
    from webapp import snapshots

    parsed = snapshots.derived(row["view_token"], "row", None,
                               lambda: (json.loads(row["params"]), json.loads(row["document"])))
    d = dict(row)
    d["params"], d["document"] = parsed
    return d


def resolve_token(conn, token: str):
    """Find what a budget token opens.

    Returns ``(role, snapshot, budget)`` with role ``"view"`` (that snapshot) or ``"edit"`` (the owner's
    latest snapshot), or ``None`` for an unknown token.
    """
    row = conn.execute("SELECT * FROM snapshots WHERE view_token = ?", (token,)).fetchone()
    if row is not None:
        budget = conn.execute("SELECT * FROM budgets WHERE edit_token = ?", (row["edit_token"],)).fetchone()
        return "view", _snapshot_dict(row), dict(budget)
    budget = conn.execute("SELECT * FROM budgets WHERE edit_token = ?", (token,)).fetchone()
    if budget is None:
        return None
    latest = conn.execute(
        "SELECT * FROM snapshots WHERE edit_token = ? ORDER BY seq DESC LIMIT 1", (token,)
    ).fetchone()
    return "edit", _snapshot_dict(latest), dict(budget)


def budget_version(conn, role: str, view_token: str, edit_token: str) -> tuple:
    """Changes whenever what a budget link shows changes: sign-offs added, or (owner link) a re-freeze."""
    if role == "view":
        return tuple(conn.execute(
            "SELECT COUNT(*), COALESCE(MAX(id), 0) FROM signoffs WHERE view_token = ?", (view_token,)).fetchone())
    return tuple(conn.execute(
        "SELECT (SELECT COUNT(*) FROM snapshots WHERE edit_token = ?), COUNT(*), COALESCE(MAX(s.id), 0)"
        " FROM signoffs s JOIN snapshots p ON p.view_token = s.view_token WHERE p.edit_token = ?",
        (edit_token, edit_token)).fetchone())


def list_snapshots(conn, edit_token: str):
    return conn.execute(
        "SELECT view_token, seq, created, (SELECT COUNT(*) FROM signoffs s WHERE s.view_token = snapshots.view_token)"
        " AS signoff_count FROM snapshots WHERE edit_token = ? ORDER BY seq DESC",
        (edit_token,),
    ).fetchall()


def add_signoff(conn, view_token: str, *, class_name: str, name: str, verdict: str, comment: str) -> dict:
    created = now_iso()
    with conn:
        cur = conn.execute(
            "INSERT INTO signoffs (view_token, class_name, name, verdict, comment, created) VALUES (?, ?, ?, ?, ?, ?)",
            (view_token, class_name, name, verdict, comment, created),
        )
    return {"id": cur.lastrowid, "class": class_name, "name": name, "verdict": verdict, "comment": comment,
            "created": created, "carried_from": None, "carried_from_seq": None}


def carry_signoffs(conn, from_view: str, to_view: str, class_names) -> int:
    """Copy the sign-offs of some classes to a newer snapshot, keeping their dates and where they were given.

    A sign-off already carried keeps pointing at the snapshot it was first given on.
    """
    names = list(class_names)
    if not names:
        return 0
    marks = ", ".join("?" for _ in names)
    with conn:
        cur = conn.execute(
            "INSERT INTO signoffs (view_token, class_name, name, verdict, comment, created, carried_from) "
            f"SELECT ?, class_name, name, verdict, comment, created, COALESCE(carried_from, view_token) "
            f"FROM signoffs WHERE view_token = ? AND class_name IN ({marks}) ORDER BY id",
            (to_view, from_view, *names),
        )
    return cur.rowcount


def newer_snapshot(conn, snapshot: dict):
    """The latest snapshot of the same budget when it is newer than ``snapshot`` (else None)."""
    row = conn.execute(
        "SELECT view_token, seq, created FROM snapshots WHERE edit_token = ? AND seq > ? ORDER BY seq DESC LIMIT 1",
        (snapshot["edit_token"], snapshot["seq"]),
    ).fetchone()
    return None if row is None else dict(row)


def signoffs_for(conn, view_token: str) -> list[dict]:
    rows = conn.execute(
        "SELECT s.id, s.class_name, s.name, s.verdict, s.comment, s.created, s.carried_from, o.seq AS carried_from_seq "
        "FROM signoffs s LEFT JOIN snapshots o ON o.view_token = s.carried_from WHERE s.view_token = ? ORDER BY s.id",
        (view_token,),
    ).fetchall()
    return [
        {"id": r["id"], "class": r["class_name"], "name": r["name"], "verdict": r["verdict"],
         "comment": r["comment"], "created": r["created"], "carried_from": r["carried_from"],
         "carried_from_seq": r["carried_from_seq"]}
        for r in rows
    ]
