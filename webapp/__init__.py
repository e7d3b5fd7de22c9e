"""Eightfold web app: Flask application factory.

Everything else lives in modules that reach the app only through ``current_app`` and ``g``.
"""

from __future__ import annotations

import os
from pathlib import Path

from flask import Flask

from webapp.paths import STATIC_DIR, TEMPLATES_DIR


def create_app(test_config=None):
    """Build the Flask app.

    Parameters
    ----------
    test_config : dict, optional
        Overrides for the defaults (``DATA_DIR``, ``SWEEP_WORKERS``, ...). Data goes to the instance folder
        unless ``DATA_DIR`` here or the ``EIGHTFOLD_DATA_DIR`` environment variable names another place.
    """
    app = Flask(
        __name__,
        instance_relative_config=True,
        template_folder=str(TEMPLATES_DIR),
        static_folder=str(STATIC_DIR),
    )
    app.config.from_mapping(
        SECRET_KEY=os.environ.get("EIGHTFOLD_SECRET_KEY"),
        DATA_DIR=os.environ.get("EIGHTFOLD_DATA_DIR") or app.instance_path,
        # Upload cap for one request; a sample set is a sample, not a whole site.
        MAX_CONTENT_LENGTH=512 * 1024 * 1024,
        MAX_FILES_PER_SET=2000,
        SWEEP_WORKERS=None,  # None lets dct.runner pick (CPU count or EIGHTFOLD_* environment)
        SWEEP_GRID=None,  # optional coarse grid override handed to the pipeline, if it takes one
        # "search" (fast; changed targets decide among the settings it evaluated) or "grid" (every
        # image on the coarse grid: slower, curves that answer any target); EIGHTFOLD_STRATEGY too.
        SWEEP_STRATEGY=None,
        SWEEP_AUTORESUME=True,
        # Owner login, hosts and links (webapp.security); the environment fills these for `eightfold serve`.
        OWNER_PASSWORD=None,  # plain password or werkzeug hash; only the hash is kept (OWNER_PASSWORD_HASH)
        OWNER_PASSWORD_FILE=None,
        ALLOWED_HOSTS=None,  # extra Host names beside loopback and the bind address; "*" turns the check off
        BIND_HOST=None,
        BASE_URL=None,  # e.g. https://budgets.fernridge.example: links are built from it
        # Uploads: decoding runs in a bounded pool; these cap what one request and the server take on.
        DECODE_WORKERS=2,  # images decoded at once, server-wide (each may need ~200 MB for 50 Mpx)
        UPLOAD_SLOTS=3,  # uploads checked at once; as many more wait up to UPLOAD_WAIT_S, the rest get a 503
        UPLOAD_WAIT_S=30.0,
        DECODE_WAIT_S=60.0,  # longest wait for one decode or render before a 503
        MAX_JSON_DEPTH=32,  # deeper JSON bodies get a 400 (validation.check_json)
    )
    if test_config is not None:
        app.config.from_mapping(test_config)

    data_dir = Path(app.config["DATA_DIR"])
    data_dir.mkdir(mode=0o700, parents=True, exist_ok=True)
    data_dir.chmod(0o700)  # originals may carry GPS: the data dir is the owner's only, as are its files
    app.config["DATA_DIR"] = str(data_dir)
    app.config.setdefault("DATABASE", str(data_dir / "eightfold.sqlite3"))
    if not app.config.get("SECRET_KEY"):
        app.config["SECRET_KEY"] = _secret_key(data_dir)

    from webapp import decoding, security, store, uploads

    store.init_app(app)
    security.init_app(app)  # first before_request hook: hosts, login and CSRF come before any view
    decoding.init_app(app)
    uploads.init_app(app)

    from webapp import api, budgets, review, samplesets, sweeps, views

    views.init_app(app)
    app.register_blueprint(samplesets.bp)
    app.register_blueprint(sweeps.bp)
    app.register_blueprint(review.bp)
    app.register_blueprint(budgets.bp)
    app.register_blueprint(api.bp)

    from webapp import worker

    worker.init_app(app)
    return app


def _secret_key(data_dir: Path) -> str:
    """A random key kept in the data dir (owner-only), so signed cookies survive restarts."""
    import secrets

    path = data_dir / "secret_key"
    try:
        return path.read_text(encoding="ascii").strip()
    except FileNotFoundError:
        key = secrets.token_hex(32)
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        with os.fdopen(fd, "w", encoding="ascii") as f:
            f.write(key)
        return key
