"""Owner login, CSRF, allowed hosts, headers, and the permission matrix over every route."""

from __future__ import annotations

import io
import re

import pytest
from flask.testing import FlaskClient

from tests.conftest import PageClient
from tests.test_web_sweeps import FILES, GRID, wait_done
from webapp import create_app, security

PASSWORD = "fernridge-owner-pass"


def make_app(tmp_path, **extra):
    config = {"TESTING": True, "DATA_DIR": str(tmp_path / "data"), "SWEEP_WORKERS": 1, "SWEEP_GRID": GRID,
              "OWNER_PASSWORD": PASSWORD, **extra}
    return create_app(config)


def login(client, password=PASSWORD):
    return client.post("/login", data={"password": password, "next": "/"})


def raw_client(app) -> FlaskClient:
    """A client that sends no CSRF token by itself: what a cross-site page or a careless script does."""
    return FlaskClient(app, app.response_class, use_cookies=True)


def multipart(files):
    return {"files": [(io.BytesIO(d), n) for n, d in files]}


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    """A password-protected app with a swept set, a frozen budget (view + edit tokens) and a spare set."""
    app = make_app(tmp_path_factory.mktemp("security"))
    owner = app.test_client()
    assert login(owner).status_code == 303
    r = owner.post("/api/sample-sets", data=multipart(FILES[:2]), content_type="multipart/form-data")
    assert r.status_code == 201, r.get_data(as_text=True)
    set_id = r.get_json()["id"]
    r = owner.post(f"/api/sample-sets/{set_id}/sweeps", json={})
    sweep_id = r.get_json()["id"]
    assert wait_done(owner, sweep_id)["status"] == "done"
    links = owner.post(f"/api/sweeps/{sweep_id}/freeze", json={}).get_json()
    edit = links["edit_url"].rsplit("/", 1)[1]
    yield {"app": app, "owner": owner, "set": set_id, "sweep": sweep_id, "view": links["token"], "edit": edit}
    app.extensions["eightfold_worker"].stop()


def spare_set(world):
    r = world["owner"].post("/api/sample-sets", data=multipart(FILES[2:3]), content_type="multipart/form-data")
    assert r.status_code == 201
    return r.get_json()["id"]


# --- the permission matrix -----------------------------------------------------------------------------

OWNER = {"anonymous": "login", "owner": "ok", "view token": "login", "edit token": "login"}
READ = {"anonymous": "404", "owner": "ok", "view token": "ok", "edit token": "ok"}
EDIT_ONLY = {"anonymous": "404", "owner": "403", "view token": "403", "edit token": "ok"}
PUBLIC = {"anonymous": "ok", "owner": "ok", "view token": "ok", "edit token": "ok"}

SIGNOFF = {"class": "product", "name": "Ada", "verdict": "approve", "comment": ""}
ROUTES = [  # (endpoint, method, path, body kind, expected per persona); {tok}: the persona's budget token
    ("samplesets.home", "GET", "/", None, OWNER),
    ("samplesets.upload", "POST", "/sets", "upload", OWNER),
    ("samplesets.show", "GET", "/sets/{set}", None, OWNER),
    ("samplesets.edit_classes", "POST", "/sets/{set}/classes", {}, OWNER),
    ("samplesets.start_sweep", "POST", "/sets/{set}/sweeps", {"cls-0": "nope"}, OWNER),
    ("samplesets.delete", "POST", "/sets/{spare}/delete", {}, OWNER),
    ("samplesets.rename", "POST", "/sets/{set}/name", {"name": "Autumn shots"}, OWNER),
    ("samplesets.thumbnail", "GET", "/sets/{set}/images/{image}/thumb.png", None, OWNER),
    ("sweeps.show", "GET", "/sweeps/{sweep}", None, OWNER),
    ("sweeps.live", "GET", "/sweeps/{sweep}/live", None, OWNER),
    ("sweeps.table", "GET", "/sweeps/{sweep}/table", None, OWNER),
    ("sweeps.cancel", "POST", "/sweeps/{sweep}/cancel", {}, OWNER),
    ("sweeps.restore_targets", "POST", "/sweeps/{sweep}/restore-targets", {}, OWNER),
    ("sweeps.choose", "POST", "/sweeps/{sweep}/choice", {"choice": "plain_quality"}, OWNER),
    ("sweeps.decide", "POST", "/sweeps/{sweep}/decide", {"class": "product", "target_ssim": "0.95"}, OWNER),
    ("sweeps.class_images", "GET", "/sweeps/{sweep}/classes/0/images", None, OWNER),
    ("sweeps.download", "GET", "/sweeps/{sweep}/document.json", None, OWNER),
    ("budgets.freeze_page", "POST", "/sweeps/{sweep}/freeze", {}, OWNER),
    ("review.sweep_review", "GET", "/sweeps/{sweep}/review/0", None, OWNER),
    ("review.sweep_asset", "GET", "/sweeps/{sweep}/review/0/candidate.jpg", None, OWNER),
    ("api.create_set", "POST", "/api/sample-sets", "upload", OWNER),
    ("api.get_set", "GET", "/api/sample-sets/{set}", None, OWNER),
    ("api.delete_set", "DELETE", "/api/sample-sets/{spare}", "json", OWNER),
    ("api.start_sweep", "POST", "/api/sample-sets/{set}/sweeps", {"target_ssim": 5}, OWNER),
    ("api.get_sweep", "GET", "/api/sweeps/{sweep}", None, OWNER),
    ("api.cancel_sweep", "POST", "/api/sweeps/{sweep}/cancel", "json", OWNER),
    ("api.decide", "POST", "/api/sweeps/{sweep}/decide", "json", OWNER),
    ("api.freeze", "POST", "/api/sweeps/{sweep}/freeze", "json", OWNER),
    ("budgets.show", "GET", "/budgets/{tok}", None, READ),
    ("budgets.download", "GET", "/budgets/{tok}/document.csv", None, READ),
    ("budgets.export_file", "GET", "/budgets/{tok}/exports/0.txt", None, READ),
    ("review.budget_review", "GET", "/budgets/{tok}/review/0", None, READ),
    ("review.budget_asset", "GET", "/budgets/{tok}/review/0/original.png", None, READ),
    ("budgets.signoff", "POST", "/budgets/{tok}/signoffs", SIGNOFF, READ),
    ("budgets.targets", "POST", "/budgets/{tok}/targets", {}, EDIT_ONLY),
    ("api.get_budget", "GET", "/api/budgets/{tok}", None, READ),
    ("api.add_signoff", "POST", "/api/budgets/{tok}/signoffs", "signoff-json", READ),
    ("api.change_targets", "POST", "/api/budgets/{tok}/targets", "json", EDIT_ONLY),
    ("security.login", "GET", "/login", None, PUBLIC),
    ("security.logout", "POST", "/logout", {}, PUBLIC),
    # public, but the body here has no password: a 401 for everyone (the token test sends one)
    ("security.api_login", "POST", "/api/login", "json", dict.fromkeys(PUBLIC, "login")),
    ("static", "GET", "/static/style.css", None, PUBLIC),
]


def test_matrix_lists_every_route(world):
    rules = {r.endpoint for r in world["app"].url_map.iter_rules()}
    assert rules == {endpoint for endpoint, *_ in ROUTES}


def persona_client(world, persona):
    app = world["app"]
    client = app.test_client()
    if persona == "owner":
        assert login(client).status_code == 303
    return client, {"anonymous": "no-such-token", "owner": world["view"], "view token": world["view"],
                    "edit token": world["edit"]}[persona]


def outcome(resp, endpoint) -> str:
    to_login = "/login" in resp.headers.get("Location", "") and endpoint != "security.logout"  # logout goes there
    if resp.status_code in (302, 303) and to_login:
        return "login"
    if resp.status_code == 401:
        return "login"
    if resp.status_code in (403, 404):
        return str(resp.status_code)
    assert resp.status_code < 500, resp.get_data(as_text=True)[:500]
    return "ok"


@pytest.mark.parametrize("persona", ["anonymous", "owner", "view token", "edit token"])
@pytest.mark.parametrize("endpoint,method,path,body,expected", ROUTES, ids=[r[0] for r in ROUTES])
def test_permission_matrix(world, persona, endpoint, method, path, body, expected):
    from webapp import store

    client, token = persona_client(world, persona)
    with world["app"].app_context():
        image = store.set_images(store.get_db(), world["set"])[0]["id"]
    values = {"set": world["set"], "sweep": world["sweep"], "tok": token, "image": image,
              "spare": spare_set(world) if "{spare}" in path and persona == "owner" else world["set"]}
    url = path.format(**values)
    kwargs = {}
    if body == "upload":
        kwargs = {"data": multipart(FILES[:1]), "content_type": "multipart/form-data"}
    elif body == "json":
        kwargs = {"json": {}}
    elif body == "signoff-json":
        kwargs = {"json": SIGNOFF}
    elif isinstance(body, dict):
        kwargs = {"data": body}
    resp = client.open(url, method=method, **kwargs)
    assert outcome(resp, endpoint) == expected[persona], (persona, method, url, resp.status_code, resp.get_data(as_text=True)[:300])


# --- login -----------------------------------------------------------------------------------------------


def test_login_keeps_a_hash_only_and_sets_a_strict_cookie(tmp_path):
    app = make_app(tmp_path)
    try:
        assert PASSWORD not in repr(dict(app.config))
        assert app.config["OWNER_PASSWORD_HASH"].startswith(("scrypt:", "pbkdf2:"))
        client = app.test_client()
        assert login(client, "wrong").status_code == 401
        r = login(client)
        assert r.status_code == 303 and r.headers["Location"] == "/"
        cookie = r.headers["Set-Cookie"]
        assert "HttpOnly" in cookie and "SameSite=Lax" in cookie
        assert client.get("/").status_code == 200
        client.post("/logout")
        assert client.get("/").status_code == 303
    finally:
        app.extensions["eightfold_worker"].stop()


def test_next_cannot_leave_the_site(tmp_path):
    app = make_app(tmp_path)
    try:
        client = app.test_client()
        for target in ("https://attacker.example/", "//attacker.example/", "/\\attacker.example"):
            r = client.post("/login", data={"password": PASSWORD, "next": target})
            assert r.headers["Location"] == "/", target
    finally:
        app.extensions["eightfold_worker"].stop()


def test_repeated_wrong_passwords_are_slowed_down(tmp_path):
    app = make_app(tmp_path)
    try:
        client = app.test_client()
        codes = [login(client, f"guess-{i}").status_code for i in range(security.LOGIN_FAILURES_ALLOWED + 1)]
        assert codes[:-1] == [401] * security.LOGIN_FAILURES_ALLOWED and codes[-1] == 429
        assert login(client).status_code == 429  # even the right one, until the window passes
    finally:
        app.extensions["eightfold_worker"].stop()


def test_bearer_token_for_scripts(tmp_path):
    app = make_app(tmp_path)
    try:
        client = raw_client(app)
        assert client.post("/api/login", json={"password": "nope"}).status_code == 401
        token = client.post("/api/login", json={"password": PASSWORD}).get_json()["token"]
        assert client.get("/api/sample-sets/x").status_code == 401
        auth = {"Authorization": f"Bearer {token}"}
        assert client.get("/api/sample-sets/x", headers=auth).status_code == 404  # in, and no such set
        # multipart is not JSON, but the bearer token is enough (a browser cannot attach it cross-site)
        r = client.post("/api/sample-sets", data=multipart(FILES[:1]), content_type="multipart/form-data",
                        headers=auth)
        assert r.status_code == 201
        bad = {"Authorization": f"Bearer {token[:-2]}xx"}
        assert client.get("/api/sample-sets/x", headers=bad).status_code == 401
    finally:
        app.extensions["eightfold_worker"].stop()


# --- CSRF ---------------------------------------------------------------------------------------------------


def test_form_posts_without_the_token_are_refused(world):
    client = raw_client(world["app"])
    assert login(client).status_code == 400  # the login form itself carries a token
    session_client = world["app"].test_client()
    assert login(session_client).status_code == 303
    raw = raw_client(world["app"])
    raw.set_cookie("session", session_client.get_cookie("session").value)
    for path, data in [(f"/sets/{world['set']}/delete", {}), (f"/sweeps/{world['sweep']}/freeze", {}),
                       (f"/sets/{world['set']}/sweeps", {}), (f"/sweeps/{world['sweep']}/cancel", {}),
                       (f"/budgets/{world['view']}/signoffs", SIGNOFF)]:
        r = raw.post(path, data=data)
        assert r.status_code == 400, path
        assert "security token is missing or out of date" in r.get_data(as_text=True)
        r = raw.post(path, data={**data, "csrf_token": "forged"})
        assert r.status_code == 400, path
    assert world["owner"].get(f"/api/sample-sets/{world['set']}").status_code == 200  # nothing was deleted


def test_api_writes_need_json_or_the_bearer_token(world):
    session_client = world["app"].test_client()
    login(session_client)
    raw = raw_client(world["app"])
    raw.set_cookie("session", session_client.get_cookie("session").value)
    # What any web page can send: text/plain with an empty body.
    for path in (f"/api/sweeps/{world['sweep']}/freeze", f"/api/sample-sets/{world['set']}/sweeps",
                 f"/api/sweeps/{world['sweep']}/cancel"):
        r = raw.post(path, data=b"", content_type="text/plain")
        assert r.status_code == 403 and "application/json" in r.get_json()["error"], path
    r = raw.post(f"/api/budgets/{world['view']}/signoffs", data=b"{}", content_type="text/plain")
    assert r.status_code == 403
    r = raw.post(f"/api/sweeps/{world['sweep']}/freeze", json={})
    assert r.status_code == 201  # JSON needs a CORS preflight cross-site, which this app never grants


def test_cross_site_origin_is_refused(world):
    r = world["owner"].post(f"/api/sweeps/{world['sweep']}/freeze", json={},
                            headers={"Origin": "https://attacker.example"})
    assert r.status_code == 403
    r = world["owner"].post(f"/api/sweeps/{world['sweep']}/freeze", json={}, headers={"Origin": "http://localhost"})
    assert r.status_code == 201


# --- hosts, links, headers ------------------------------------------------------------------------------------


def test_unknown_host_is_refused_and_links_use_the_base_url(tmp_path):
    app = make_app(tmp_path, BASE_URL="https://budgets.fernridge.example", OWNER_PASSWORD=None)
    try:
        assert app.config["SESSION_COOKIE_SECURE"] is True  # the cookie travels over HTTPS only
        client = app.test_client()
        r = client.get("/", headers={"Host": "attacker.example"})
        assert r.status_code == 400 and b"not served here" in r.data
        assert client.get("/", headers={"Host": "127.0.0.1:8000"}).status_code == 200
        assert client.get("/", headers={"Host": "budgets.fernridge.example"}).status_code == 200
        r = client.post("/api/sample-sets", data=multipart(FILES[:1]), content_type="multipart/form-data")
        assert r.status_code == 201
        sweep_id = client.post(f"/api/sample-sets/{r.get_json()['id']}/sweeps", json={}).get_json()["id"]
        assert wait_done(client, sweep_id)["status"] == "done"
        links = client.post(f"/api/sweeps/{sweep_id}/freeze", json={}).get_json()
        assert links["view_url"].startswith("https://budgets.fernridge.example/budgets/")
        assert links["edit_url"].startswith("https://budgets.fernridge.example/budgets/")
    finally:
        app.extensions["eightfold_worker"].stop()


def test_allowed_hosts_are_configurable(tmp_path):
    app = make_app(tmp_path, ALLOWED_HOSTS="team-box.lan", OWNER_PASSWORD=None)
    try:
        client = app.test_client()
        assert client.get("/", headers={"Host": "team-box.lan:8000"}).status_code == 200
        assert client.get("/", headers={"Host": "other.lan"}).status_code == 400
    finally:
        app.extensions["eightfold_worker"].stop()


INLINE = [re.compile(r"<script(?![^>]*\bsrc=)[^>]*>", re.I), re.compile(r"\son[a-z]+\s*=", re.I),
          re.compile(r"javascript:", re.I)]


def test_pages_carry_the_headers_and_no_inline_script(world):
    owner = world["owner"]
    pages = ["/", f"/sets/{world['set']}", f"/sweeps/{world['sweep']}", f"/sweeps/{world['sweep']}/review/0",
             f"/budgets/{world['view']}", f"/budgets/{world['edit']}", f"/budgets/{world['view']}/review/0", "/login"]
    for page in pages:
        r = owner.get(page)
        assert r.status_code == 200, page
        csp = r.headers["Content-Security-Policy"]
        script_src = next(d for d in csp.split("; ") if d.startswith("script-src "))
        assert script_src == "script-src 'self'"
        assert "frame-ancestors 'none'" in csp
        assert r.headers["X-Content-Type-Options"] == "nosniff"
        assert r.headers["Referrer-Policy"] == "no-referrer"
        html = r.get_data(as_text=True)
        for pattern in INLINE:
            assert not pattern.search(html), (page, pattern.search(html).group(0))
        assert '"includeIndicatorStyles":false' in html and "X-CSRFToken" in html
    assert owner.get(f"/budgets/{world['view']}").headers["Cache-Control"] == "private, no-store"


def test_serve_refuses_other_machines_without_a_password(monkeypatch):
    from webapp.server import check_bind

    monkeypatch.delenv("EIGHTFOLD_PASSWORD", raising=False)
    monkeypatch.delenv("EIGHTFOLD_PASSWORD_FILE", raising=False)
    with pytest.raises(SystemExit, match="refusing to serve on 0.0.0.0 without a password.*--no-login"):
        check_bind("0.0.0.0", no_login=False)
    check_bind("0.0.0.0", no_login=True)
    check_bind("127.0.0.1", no_login=False)
    check_bind("::1", no_login=False)
    monkeypatch.setenv("EIGHTFOLD_PASSWORD", "x")
    check_bind("0.0.0.0", no_login=False)


def test_cli_serve_has_no_login_flag():
    from click.testing import CliRunner

    from dct.cli import main

    result = CliRunner().invoke(main, ["serve", "--help"])
    assert "--no-login" in result.output


def test_page_client_really_sends_the_token(world):
    # the helper the other web tests rely on: its header is what makes their posts pass
    assert isinstance(world["app"].test_client(), PageClient)
    assert world["app"].test_client().page_token()


# --- frozen snapshots are rendered once ---------------------------------------------------------------------


def test_frozen_budget_is_derived_once_and_follows_signoffs(world, monkeypatch):
    from webapp import results

    links = world["owner"].post(f"/api/sweeps/{world['sweep']}/freeze", json={}).get_json()
    view = links["token"]
    calls = []
    real = results.rejections
    monkeypatch.setattr(results, "rejections", lambda *a, **k: calls.append(1) or real(*a, **k))
    first, second = world["app"].test_client(), world["app"].test_client()
    page1 = first.get(f"/budgets/{view}").get_data(as_text=True)
    assert calls, "the page derives the reasons once"
    n = len(calls)
    page2 = second.get(f"/budgets/{view}").get_data(as_text=True)
    assert len(calls) == n  # the second reader is served what the first one's view derived
    token1, token2 = (re.search(r'name="csrf-token" content="([^"]+)"', p).group(1) for p in (page1, page2))
    assert token1 != token2 and token1 not in page2  # each reader gets the page with their own token
    r = raw_client(world["app"])
    r.set_cookie("session", second.get_cookie("session").value)
    resp = r.post(f"/budgets/{view}/signoffs", data={**SIGNOFF, "name": "Priya Ocampo", "csrf_token": token2})
    assert resp.status_code == 303
    assert "Priya Ocampo" in first.get(f"/budgets/{view}").get_data(as_text=True)  # the new sign-off shows
    assert "Priya Ocampo" in first.get(f"/api/budgets/{view}").get_data(as_text=True)
    assert len(calls) == n  # ... without deriving the frozen parts again
