-- Eightfold store, schema version 2 (PRAGMA user_version). Created on first use; store.ensure_schema
-- runs this file (every statement is IF NOT EXISTS) and then the step from each older version
-- (version 2 added result_cache.set_id and signoffs.carried_from).

CREATE TABLE IF NOT EXISTS sample_sets (
    id          TEXT PRIMARY KEY,           -- random, unguessable
    name        TEXT NOT NULL,
    fingerprint TEXT NOT NULL,              -- sha256 over (filename, class, blob) so a re-upload can be found
    created     TEXT NOT NULL
);
CREATE INDEX IF NOT EXISTS sample_sets_fingerprint ON sample_sets (fingerprint);

CREATE TABLE IF NOT EXISTS images (
    id          INTEGER PRIMARY KEY,
    set_id      TEXT NOT NULL REFERENCES sample_sets (id) ON DELETE CASCADE,
    position    INTEGER NOT NULL,
    filename    TEXT NOT NULL,              -- relative path as uploaded, unique in its set
    class_name  TEXT NOT NULL,
    sha256      TEXT NOT NULL,              -- blob under <data>/blobs/ab/<sha256>.bin
    width       INTEGER NOT NULL,
    height      INTEGER NOT NULL,
    warnings    TEXT NOT NULL DEFAULT '[]',
    UNIQUE (set_id, filename)
);
CREATE INDEX IF NOT EXISTS images_sha256 ON images (sha256);

CREATE TABLE IF NOT EXISTS rejected (
    id          INTEGER PRIMARY KEY,
    set_id      TEXT NOT NULL REFERENCES sample_sets (id) ON DELETE CASCADE,
    filename    TEXT NOT NULL,
    error       TEXT NOT NULL
);

CREATE TABLE IF NOT EXISTS sweeps (
    id               TEXT PRIMARY KEY,
    set_id           TEXT NOT NULL REFERENCES sample_sets (id) ON DELETE CASCADE,
    status           TEXT NOT NULL CHECK (status IN ('queued', 'running', 'done', 'failed', 'cancelled')),
    done             INTEGER NOT NULL DEFAULT 0,
    total            INTEGER NOT NULL DEFAULT 0,
    params           TEXT NOT NULL,         -- {"classes": {name: spec}, "current": setting}
    document         TEXT,                  -- the pipeline's JSON document, re-decided in place
    curves           TEXT,                  -- the pipeline's stored curves (re-decide input)
    error            TEXT,
    cancel_requested INTEGER NOT NULL DEFAULT 0,
    created          TEXT NOT NULL,
    started          REAL,                  -- epoch seconds of the latest (re)start, for time left
    finished         TEXT
);
CREATE INDEX IF NOT EXISTS sweeps_set ON sweeps (set_id);

-- Finished per-image results (dct.pipeline.ResultCache), so a resumed sweep loses no work.
CREATE TABLE IF NOT EXISTS result_cache (
    fingerprint TEXT PRIMARY KEY,
    result      TEXT NOT NULL,
    created     TEXT NOT NULL,
    set_id      TEXT                        -- the set whose sweep wrote it; deleted with that set (v2)
);

-- Uploads in flight that use a blob before their image rows exist (v2). With images.sha256 these
-- rows count a blob's users; store.delete_set removes a blob only when it has none.
CREATE TABLE IF NOT EXISTS blob_claims (
    claim       TEXT NOT NULL,
    sha256      TEXT NOT NULL,
    created     REAL NOT NULL               -- epoch seconds; day-old claims (a crash) are dropped
);
CREATE INDEX IF NOT EXISTS blob_claims_sha256 ON blob_claims (sha256);
CREATE INDEX IF NOT EXISTS blob_claims_claim ON blob_claims (claim);

-- A budget: one owner (edit token) and its frozen snapshots (one view token each).
CREATE TABLE IF NOT EXISTS budgets (
    edit_token  TEXT PRIMARY KEY,
    sweep_id    TEXT NOT NULL REFERENCES sweeps (id) ON DELETE CASCADE,
    created     TEXT NOT NULL
);

CREATE TABLE IF NOT EXISTS snapshots (
    view_token  TEXT PRIMARY KEY,
    edit_token  TEXT NOT NULL REFERENCES budgets (edit_token) ON DELETE CASCADE,
    seq         INTEGER NOT NULL,
    params      TEXT NOT NULL,
    document    TEXT NOT NULL,
    created     TEXT NOT NULL,
    UNIQUE (edit_token, seq)
);

CREATE TABLE IF NOT EXISTS signoffs (
    id          INTEGER PRIMARY KEY,
    view_token  TEXT NOT NULL REFERENCES snapshots (view_token) ON DELETE CASCADE,
    class_name  TEXT NOT NULL,
    name        TEXT NOT NULL,
    verdict     TEXT NOT NULL CHECK (verdict IN ('approve', 'needs work')),
    comment     TEXT NOT NULL DEFAULT '',
    created     TEXT NOT NULL,              -- when it was given (kept when carried over)
    carried_from TEXT REFERENCES snapshots (view_token) ON DELETE SET NULL  -- set when carried over from an older snapshot
);
CREATE INDEX IF NOT EXISTS signoffs_snapshot ON signoffs (view_token);
