"""Shared test setup: a Flask test client that behaves like our pages do with CSRF.

The app refuses any form post or API write without a CSRF token (or JSON / a bearer token for the
API). Test clients stand in for a person using the pages, so before a write this client reads the
token from a page (the ``csrf-token`` meta tag that every page carries) and sends it in the
``X-CSRFToken`` header, as htmx and our scripts do. The protection itself stays on: tests in
``test_web_security.py`` use :class:`flask.testing.FlaskClient` directly to show what happens
without a token.
"""

from __future__ import annotations

import re

import pytest
from flask import Flask
from flask.testing import FlaskClient

TOKEN_RE = re.compile(r'<meta name="csrf-token" content="([^"]+)"')
WRITES = {"POST", "PUT", "PATCH", "DELETE"}


class PageClient(FlaskClient):
    """A test client that fetches the page's CSRF token before each write and sends it as a header."""

    def page_token(self) -> str:
        resp = super().open("/login", method="GET")
        match = TOKEN_RE.search(resp.get_data(as_text=True))
        assert match, f"no csrf-token meta tag on /login (status {resp.status_code})"
        return match.group(1)

    def open(self, *args, **kwargs):
        method = (kwargs.get("method") or "GET").upper()
        if method in WRITES:
            headers = dict(kwargs.pop("headers", None) or {})
            headers.setdefault("X-CSRFToken", self.page_token())
            kwargs["headers"] = headers
        return super().open(*args, **kwargs)


@pytest.fixture(autouse=True, scope="session")
def _page_client():
    # session scope: module-scoped app fixtures build their clients before any function fixture runs
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(Flask, "test_client_class", PageClient)
        yield
