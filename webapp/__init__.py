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
        SWEEP_AUTORESUME=True,
    )
    if test_config is not None:
        app.config.from_mapping(test_config)

    data_dir = Path(app.config["DATA_DIR"])
    data_dir.mkdir(parents=True, exist_ok=True)
    app.config["DATA_DIR"] = str(data_dir)
    app.config.setdefault("DATABASE", str(data_dir / "eightfold.sqlite3"))
    if not app.config.get("SECRET_KEY"):
        app.config["SECRET_KEY"] = _secret_key(data_dir)

    from webapp import store

    store.init_app(app)

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
