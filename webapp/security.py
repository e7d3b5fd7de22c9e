"""Who may do what, in one place: owner login, CSRF, allowed hosts and response headers.

The rules, registered by :func:`init_app` so that blueprints stay free of them:

* **Hosts.** A WSGI wrapper answers 400 to any ``Host`` outside ``ALLOWED_HOSTS`` (loopback names,
  the bind address, the base URL's host, and ``EIGHTFOLD_ALLOWED_HOSTS``), before Flask sees the
  request. With ``BASE_URL`` set, every link and redirect is built from it, never from the request.
* **Owner login.** With a password configured (``EIGHTFOLD_PASSWORD`` or ``EIGHTFOLD_PASSWORD_FILE``;
  only its hash is kept), every route needs the owner's session cookie or bearer token, except the
  login routes, static files and the budget routes under ``/budgets/<token>`` and
  ``/api/budgets/<token>``, where the unguessable token itself is the capability (a view token
  reads and signs off; an edit token may also re-freeze that one budget).
* **CSRF.** Every form post carries Flask-WTF's token (a hidden field, or the ``X-CSRFToken`` header
  that htmx sends). An API write is accepted with the bearer token, a JSON content type (which a
  cross-site page cannot send without a CORS preflight, and this app grants none) or the token
  header; anything else, such as a ``text/plain`` post, is refused. A cross-site ``Origin`` is
  refused on every write.
* **Headers.** A CSP that allows scripts from this origin only, no framing, ``nosniff`` and
  ``Referrer-Policy: no-referrer`` (budget links carry their token in the path).
"""

from __future__ import annotations

import hashlib
import hmac
import ipaddress
import logging
import os
import threading
import time
from pathlib import Path
from urllib.parse import urlsplit

from flask import Blueprint, current_app, redirect, render_template, request, session, url_for
from flask_wtf.csrf import CSRFError, CSRFProtect, validate_csrf
from itsdangerous import BadSignature, URLSafeTimedSerializer
from werkzeug.exceptions import BadRequest, Forbidden, TooManyRequests, Unauthorized
from werkzeug.security import check_password_hash, generate_password_hash
from wtforms import ValidationError

log = logging.getLogger(__name__)
bp = Blueprint("security", __name__)
csrf = CSRFProtect()

LOOPBACK_HOSTS = ("localhost", "127.0.0.1", "::1")
# Routes whose path starts with these take a budget token: the token is the capability, no login.
CAPABILITY_PREFIXES = ("/budgets/<token>", "/api/budgets/<token>")
PUBLIC_ENDPOINTS = {"static", "security.login", "security.logout", "security.api_login"}
TOKEN_SALT = "eightfold-api-token"
TOKEN_MAX_AGE = 30 * 24 * 3600  # a script's bearer token lasts 30 days (or until the password changes)
UNSAFE_METHODS = {"POST", "PUT", "PATCH", "DELETE"}
STREAMED_UPLOADS = {"samplesets.upload", "api.create_set"}  # bodies read by webapp.uploads
LOGIN_FAILURES_ALLOWED = 10  # per client address and window: slows guessing to a crawl
LOGIN_WINDOW_S = 600

CSP = "; ".join([
    "default-src 'none'",
    "script-src 'self'",
    # Style attributes carry computed sizes (progress bar, crop boxes); <style> elements are refused
    # where the browser knows style-src-elem, and older browsers fall back to the first rule.
    "style-src 'self' 'unsafe-inline'",
    "style-src-elem 'self'",
    "style-src-attr 'unsafe-inline'",
    "img-src 'self' data:",
    "connect-src 'self'",
    "form-action 'self'",
    "base-uri 'none'",
    "frame-ancestors 'none'",
])
HEADERS = {
    "Content-Security-Policy": CSP,
    "X-Content-Type-Options": "nosniff",
    "X-Frame-Options": "DENY",
    "Referrer-Policy": "no-referrer",
    "Cross-Origin-Opener-Policy": "same-origin",
}


# --- configuration ---------------------------------------------------------------------------------


def read_password(config) -> str | None:
    """The configured password or hash: test config, ``EIGHTFOLD_PASSWORD``, or the first line of a file."""
    if config.get("OWNER_PASSWORD"):
        return str(config["OWNER_PASSWORD"])
    if os.environ.get("EIGHTFOLD_PASSWORD"):
        return os.environ["EIGHTFOLD_PASSWORD"]
    path = config.get("OWNER_PASSWORD_FILE") or os.environ.get("EIGHTFOLD_PASSWORD_FILE")
    if path:
        try:
            lines = Path(path).read_text(encoding="utf-8").splitlines()
        except OSError as exc:
            raise SystemExit(f"cannot read the password file {str(path)!r}: {exc.strerror}") from None
        text = lines[0].strip() if lines else ""
        if not text:
            raise SystemExit(f"the password file {str(path)!r} is empty")
        return text
    return None


def password_hash(secret: str) -> str:
    """A werkzeug hash as given (``scrypt:``/``pbkdf2:`` prefix), else the hash of the plain password."""
    if secret.startswith(("scrypt:", "pbkdf2:")) and secret.count("$") == 2:
        return secret
    return generate_password_hash(secret)


def allowed_hosts(config) -> set[str]:
    hosts = set(LOOPBACK_HOSTS)
    bind = (config.get("BIND_HOST") or "").strip().lower()
    if bind and bind not in ("0.0.0.0", "::"):
        hosts.add(bind)
    if config.get("BASE_URL"):
        hosts.add((urlsplit(config["BASE_URL"]).hostname or "").lower())
    extra = config.get("ALLOWED_HOSTS") or os.environ.get("EIGHTFOLD_ALLOWED_HOSTS", "")
    if isinstance(extra, str):
        extra = extra.split(",")
    hosts.update(h.strip().lower() for h in extra if h.strip())
    hosts.discard("")
    return hosts


def is_loopback(host: str) -> bool:
    if host.strip().lower() == "localhost":
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        return False


def login_enabled() -> bool:
    return bool(current_app.config.get("OWNER_PASSWORD_HASH"))


# --- hosts and the base URL (WSGI, before Flask) ------------------------------------------------------


def host_name(header: str) -> str:
    """``example.org:8000`` -> ``example.org``; ``[::1]:8000`` -> ``::1``."""
    header = header.strip().lower()
    if header.startswith("["):
        return header[1:header.find("]")] if "]" in header else header
    return header.rsplit(":", 1)[0] if header.count(":") == 1 else header


class HostGuard:
    """Refuse requests for hosts outside the allowed list; with a base URL, build links from it."""

    def __init__(self, wsgi_app, hosts: set[str], base_url: str | None):
        self.wsgi_app = wsgi_app
        self.hosts = hosts
        self.any_host = "*" in hosts
        self.base = urlsplit(base_url) if base_url else None

    def __call__(self, environ, start_response):
        raw = environ.get("HTTP_HOST") or environ.get("SERVER_NAME", "")
        if not self.any_host and host_name(raw) not in self.hosts:
            body = (f"Host {raw[:100]!r} is not served here. Allowed: {', '.join(sorted(self.hosts))}; "
                    "add names with EIGHTFOLD_ALLOWED_HOSTS.\n").encode("utf-8", "replace")
            start_response("400 Bad Request", [("Content-Type", "text/plain; charset=utf-8"),
                                               ("Content-Length", str(len(body))), *HEADERS.items()])
            return [body]
        if self.base is not None:
            environ["HTTP_HOST"] = self.base.netloc
            environ["wsgi.url_scheme"] = self.base.scheme
            environ["SCRIPT_NAME"] = self.base.path.rstrip("/")
        return self.wsgi_app(environ, start_response)


# --- owner identity -------------------------------------------------------------------------------------


def _serializer() -> URLSafeTimedSerializer:
    return URLSafeTimedSerializer(current_app.config["SECRET_KEY"], salt=TOKEN_SALT)


def _password_mark() -> str:
    """Changes when the password changes, so old sessions and tokens stop working."""
    return hashlib.sha256((current_app.config.get("OWNER_PASSWORD_HASH") or "open").encode()).hexdigest()[:16]


def make_api_token() -> str:
    return _serializer().dumps({"owner": _password_mark()})


def bearer_ok() -> bool:
    header = request.headers.get("Authorization", "")
    scheme, _, token = header.partition(" ")
    if scheme.lower() != "bearer" or not token.strip():
        return False
    try:
        data = _serializer().loads(token.strip(), max_age=TOKEN_MAX_AGE)  # signature checked in constant time
    except BadSignature:
        return False
    mark = data.get("owner", "") if isinstance(data, dict) else ""
    return hmac.compare_digest(str(mark), _password_mark())


def session_ok() -> bool:
    return hmac.compare_digest(str(session.get("owner", "")), _password_mark())


def is_owner() -> bool:
    """Owner rights: no password configured, a logged-in session, or a valid bearer token."""
    return not login_enabled() or session_ok() or bearer_ok()


def _capability_route() -> bool:
    rule = request.url_rule.rule if request.url_rule is not None else ""
    return rule.startswith(CAPABILITY_PREFIXES)


def _safe_next(target: str | None) -> str:
    """Only a path on this site: no scheme, no host, no ``//`` or ``\\`` tricks."""
    if not target or not target.startswith("/") or target.startswith(("//", "/\\")) or "\\" in target:
        return url_for("samplesets.home")
    return target


class _Failures:
    """Failed logins per client address in a sliding window (in memory: one server process)."""

    def __init__(self):
        self._lock = threading.Lock()
        self._seen: dict[str, list[float]] = {}

    def blocked(self, who: str) -> bool:
        now = time.monotonic()
        with self._lock:
            recent = [t for t in self._seen.get(who, []) if now - t < LOGIN_WINDOW_S]
            self._seen[who] = recent
            return len(recent) >= LOGIN_FAILURES_ALLOWED

    def add(self, who: str) -> None:
        with self._lock:
            self._seen.setdefault(who, []).append(time.monotonic())


def _check_password(password: str) -> bool:
    failures: _Failures = current_app.extensions["eightfold_login_failures"]
    who = request.remote_addr or "?"
    if failures.blocked(who):
        raise TooManyRequests(description=f"too many failed logins; wait {LOGIN_WINDOW_S // 60} minutes")
    if check_password_hash(current_app.config["OWNER_PASSWORD_HASH"], password):
        return True
    failures.add(who)
    return False


# --- the checks on every request ------------------------------------------------------------------------


def _cross_site_origin() -> bool:
    """True for a write whose ``Origin`` names another site (``null`` is what no-referrer pages send)."""
    origin = request.headers.get("Origin")
    if not origin or origin == "null":
        return False
    # Host and port only: behind a TLS proxy the app sees http while the browser's Origin says https.
    return urlsplit(origin).netloc.lower() != request.host.lower()


def _is_json() -> bool:
    return request.mimetype == "application/json"


def check_request():
    """before_request: login, then CSRF. Returns a response to stop the request, or None."""
    endpoint = request.endpoint
    if endpoint in ("static", None):
        return None  # static files, and 404/405 for unknown routes
    api = request.path.startswith("/api/")
    needs_owner = endpoint not in PUBLIC_ENDPOINTS and not _capability_route()
    if needs_owner and not is_owner():
        if api:
            raise Unauthorized(description="log in first: send 'Authorization: Bearer <token>' "
                                           "(POST /api/login with the password gives one)")
        if request.method == "GET":
            target = url_for("security.login", next=request.full_path.rstrip("?"))
            if request.headers.get("HX-Request") == "true":
                resp = current_app.response_class(status=401)
                resp.headers["HX-Redirect"] = target
                return resp
            return redirect(target, code=303)
        raise Unauthorized(description="this needs the owner's login; log in and try again")
    if request.method not in UNSAFE_METHODS:
        return None
    if _cross_site_origin():
        raise Forbidden(description="this request came from another site")
    if api and (bearer_ok() or _is_json()):
        return None
    if api and not request.headers.get("X-CSRFToken"):
        raise Forbidden(description="API writes need 'Content-Type: application/json' or the bearer token")
    try:
        if endpoint in STREAMED_UPLOADS:
            validate_csrf(_upload_token())
        else:
            csrf.protect()  # the form field, or the header our pages' scripts and htmx send
    except (CSRFError, ValidationError):
        raise BadRequest(description="this form's security token is missing or out of date: "
                                     "reload the page and send it again") from None
    return None


def _upload_token():
    """The token of an upload: its header, or its form field read by our own streaming parser
    (werkzeug's ``request.form`` would read the whole body its own way first)."""
    if request.headers.get("X-CSRFToken"):
        return request.headers["X-CSRFToken"]
    from webapp import store, uploads

    got = uploads.receive(store.data_dir(), max_files=current_app.config["MAX_FILES_PER_SET"])
    return got.fields.get("csrf_token")


def add_headers(response):
    for name, value in HEADERS.items():
        response.headers.setdefault(name, value)
    if request.path.startswith("/budgets/") or request.path.startswith("/api/budgets/"):
        response.headers.setdefault("Cache-Control", "private, no-store")  # token-bearing pages
    return response


# --- login routes ------------------------------------------------------------------------------------


@bp.route("/login", methods=["GET", "POST"])
def login():
    target = _safe_next(request.values.get("next"))
    if not login_enabled():
        if request.method == "POST":
            return redirect(target, code=303)
        return render_template("login.html", open_server=True, next=target)
    error = None
    if request.method == "POST":
        if _check_password(request.form.get("password", "")):
            session.clear()  # nothing from before the login survives it
            session.permanent = True
            session["owner"] = _password_mark()
            return redirect(target, code=303)
        error = "That password is not right."
    status = 401 if error else 200
    return render_template("login.html", error=error, next=target, signed_in=session_ok()), status


@bp.post("/logout")
def logout():
    session.clear()
    return redirect(url_for("security.login"), code=303)


@bp.post("/api/login")
def api_login():
    """``{"password": "..."}`` in, ``{"token": "..."}`` out: the bearer token for scripts."""
    from flask import jsonify

    body = request.get_json(silent=True) if _is_json() else None
    if login_enabled():
        password = body.get("password") if isinstance(body, dict) else None
        if not isinstance(password, str) or not _check_password(password):
            raise Unauthorized(description="wrong or missing password: send {\"password\": \"...\"} as JSON")
    return jsonify({"token": make_api_token(), "expires_in": TOKEN_MAX_AGE})


def csrf_field():
    """The hidden form field every post form carries (templates: ``{{ csrf_field() }}``)."""
    from flask_wtf.csrf import generate_csrf
    from markupsafe import Markup, escape

    return Markup(f'<input type="hidden" name="csrf_token" value="{escape(generate_csrf())}">')


def external_url(endpoint: str, **values) -> str:
    """An absolute link: from ``BASE_URL`` when set (the host guard rewrote the request), else the checked Host."""
    return url_for(endpoint, _external=True, **values)


# --- registration ---------------------------------------------------------------------------------------


def init_app(app) -> None:
    secret = read_password(app.config)
    app.config.pop("OWNER_PASSWORD", None)  # the plain password is not kept, only its hash
    if secret:
        app.config["OWNER_PASSWORD_HASH"] = password_hash(secret)
    base = app.config.get("BASE_URL") or os.environ.get("EIGHTFOLD_BASE_URL") or None
    if base:
        parts = urlsplit(base)
        if parts.scheme not in ("http", "https") or not parts.hostname:
            raise SystemExit(f"EIGHTFOLD_BASE_URL must look like https://host[:port][/path], got {base!r}")
        app.config["BASE_URL"] = base
    app.config.update(
        SESSION_COOKIE_HTTPONLY=True,
        SESSION_COOKIE_SAMESITE="Lax",
        SESSION_COOKIE_SECURE=bool(base and base.startswith("https:")),
        PERMANENT_SESSION_LIFETIME=14 * 24 * 3600,
        WTF_CSRF_CHECK_DEFAULT=False,  # check_request decides when the token is needed
        WTF_CSRF_TIME_LIMIT=None,  # valid for the session: a page left open all day still posts
        WTF_CSRF_SSL_STRICT=False,  # it wants a Referer, which no-referrer withholds; Origin is checked
    )
    csrf.init_app(app)
    app.extensions["eightfold_login_failures"] = _Failures()
    app.register_blueprint(bp)
    app.before_request(check_request)
    app.after_request(add_headers)
    app.jinja_env.globals.update(login_enabled=login_enabled, csrf_field=csrf_field,
                                  session_owner=lambda: login_enabled() and session_ok())

    app.wsgi_app = HostGuard(app.wsgi_app, allowed_hosts(app.config), base)
