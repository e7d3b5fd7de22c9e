"""Serving the app with waitress, and the demo that fills in live.

``dct.cli`` calls :func:`serve` for ``eightfold serve`` and ``eightfold demo``.
"""

from __future__ import annotations

import sys

from webapp import create_app, ingest, store, validation
from webapp.paths import DEMO_DIR

IMAGE_SUFFIXES = {".jpg", ".jpeg", ".png", ".gif", ".webp", ".tif", ".tiff", ".bmp"}


def load_demo(app, folder=None) -> str:
    """Store ``demo_images/`` as a sample set (class = folder) and make sure it has a sweep.

    Idempotent: the same files under the same data directory reuse the stored set (content
    addressing) and its latest sweep that is not failed or cancelled. Returns the sweep id.
    """
    folder = DEMO_DIR if folder is None else folder
    files = [(name, data) for name, data in ingest.read_folder(folder)
             if "." + name.rsplit(".", 1)[-1].lower() in IMAGE_SUFFIXES]
    if not files:
        raise SystemExit(f"no demo images under {folder}; run the demo generator script first")
    with app.app_context():
        db = store.get_db()
        set_id, _, _, _ = ingest.ingest(db, app.config["DATA_DIR"], files, name="Fernridge Outfitters demo",
                                        reuse=True)
        for sweep in store.sweeps_for_set(db, set_id):
            if sweep["status"] in ("queued", "running", "done"):
                return sweep["id"]
        params = validation.sweep_request({}, store.set_classes(db, set_id))
        sweep_id = store.create_sweep(db, set_id, params)
    app.extensions["eightfold_worker"].submit(sweep_id)
    return sweep_id


# Waitress limits (https://docs.pylonsproject.org/projects/waitress/en/stable/arguments.html). Its
# defaults let 100 half-sent connections hold every slot for the 120 s channel timeout; here a slot
# is freed after 20 s of silence (checked every 5 s), and 250 slots leave room for a team's readers.
WAITRESS_LIMITS = {"connection_limit": 250, "channel_timeout": 20, "cleanup_interval": 5, "backlog": 512}


def check_bind(host: str, *, no_login: bool) -> None:
    """Refuse to serve other machines without a password, unless the owner says so (``--no-login``)."""
    from webapp.security import is_loopback, read_password

    if is_loopback(host) or no_login or read_password({}):
        return
    raise SystemExit(
        f"refusing to serve on {host} without a password: anyone who can reach this port could delete "
        "sample sets and freeze budgets. Set EIGHTFOLD_PASSWORD (or EIGHTFOLD_PASSWORD_FILE), or pass "
        "--no-login if the network itself is trusted."
    )


def serve(*, host: str = "127.0.0.1", port: int = 8000, data_dir=None, demo: bool = False, threads: int = 12,
          no_login: bool = False) -> None:
    """Run the web app under waitress until interrupted.

    Parameters
    ----------
    host, port : where to listen (keyword-only).
    data_dir : path, optional
        Where the SQLite file and stored images live; default: ``EIGHTFOLD_DATA_DIR`` or the instance folder.
    demo : bool
        Load ``demo_images/`` as a sample set, start its sweep and print the page that fills in live.
    no_login : bool
        Allow a non-loopback ``host`` without a password (see :func:`check_bind`).
    """
    import os

    from waitress import create_server

    from webapp.security import allowed_hosts, is_loopback

    check_bind(host, no_login=no_login)
    os.umask(0o077)  # everything this server writes is the owner's only
    config = {"BIND_HOST": host}
    if data_dir is not None:
        config["DATA_DIR"] = str(data_dir)
    app = create_app(config)
    try:
        # Bind before anything else starts, so a busy port fails at once and cleanly.
        server = create_server(app, host=host, port=port, threads=max(4, int(threads)),
                               max_request_body_size=app.config["MAX_CONTENT_LENGTH"], **WAITRESS_LIMITS)
    except OSError as exc:
        raise PortBusy(host, port, exc) from None
    base = app.config.get("BASE_URL") or \
        f"http://{'localhost' if host in ('127.0.0.1', '0.0.0.0', '::') else host}:{port}"
    login = "owner login on" if app.config.get("OWNER_PASSWORD_HASH") else "no login"
    if demo:
        sweep_id = load_demo(app)
        print(f"Eightfold demo: open {base.rstrip('/')}/sweeps/{sweep_id} to watch the sweep fill in ({login})",
              file=sys.stderr)
    else:
        print(f"Eightfold: serving on {base.rstrip('/')}/ ({login}; data in {app.config['DATA_DIR']})",
              file=sys.stderr)
    if not is_loopback(host):
        print(f"Eightfold: answering for the hosts {', '.join(sorted(allowed_hosts(app.config)))} "
              "(add more with EIGHTFOLD_ALLOWED_HOSTS)", file=sys.stderr)
    try:
        server.run()
    finally:
        server.close()


class PortBusy(Exception):
    """The address cannot be listened on (in use, or not this machine's); the message says what to do."""

    def __init__(self, host, port, exc: OSError):
        import errno

        if exc.errno == errno.EADDRINUSE:
            why = "the port is already in use (another Eightfold or another server?)"
        elif exc.errno in (errno.EADDRNOTAVAIL, errno.EACCES):
            why = exc.strerror or "address not available"
        else:
            why = exc.strerror or str(exc)
        super().__init__(f"cannot listen on {host}:{port}: {why}; choose another with --port")
