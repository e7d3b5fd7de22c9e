"""Derived data of frozen budget snapshots, computed once per snapshot and then served from memory.

A snapshot never changes after it is frozen (a re-freeze makes a new one with a new view token),
and neither do its sweep's stored curves, so everything the budget page derives from them (the
reasons cheaper settings lost, the worst images, the totals, the frontier charts) can be kept. Parsing
the stored curves again for every class on every view cost 0.6 s of CPU per view of a 25-image,
7-class budget. Sign-offs are not cached: they change.
"""

from __future__ import annotations

import threading
from collections import OrderedDict

MAX_SNAPSHOTS = 64  # a handful of budgets being reviewed at once; each entry is a few hundred KB at most

_lock = threading.Lock()
_cache: OrderedDict[str, dict] = OrderedDict()


def derived(view_token: str, kind: str, key, make):
    """``make()`` once per (snapshot, kind, key); later calls get the same value (do not modify it)."""
    with _lock:
        entry = _cache.get(view_token)
        if entry is not None:
            _cache.move_to_end(view_token)
            if (kind, key) in entry:
                return entry[(kind, key)]
    value = make()  # outside the lock: two first readers may both compute it, and both get a right answer
    with _lock:
        entry = _cache.setdefault(view_token, {})
        _cache.move_to_end(view_token)
        entry.setdefault((kind, key), value)
        while len(_cache) > MAX_SNAPSHOTS:
            _cache.popitem(last=False)
        return entry[(kind, key)]


def forget(view_tokens) -> None:
    """Drop snapshots (their budget or set was deleted)."""
    with _lock:
        for token in view_tokens:
            _cache.pop(token, None)


def entry_key(entry: dict):
    return entry.get("name"), entry.get("width")


# --- whole pages -------------------------------------------------------------------------------------
# A budget page is a function of its snapshot (frozen), its sign-offs (append-only: their count and
# last id say whether any were added), the owner's snapshot list, the host its links use, and the
# login state. Keyed on all of those, a rendered page can be served again as is, except the
# per-session CSRF token, which is cut out before caching and put back for each reader.

MAX_PAGES = 256
CSRF_SLOT = "\x00csrf\x00"
_pages: OrderedDict = OrderedDict()


def page(key, render, csrf_token: str) -> str:
    """``render()`` (a page carrying ``csrf_token``) once per key; later readers get it with their token."""
    with _lock:
        cached = _pages.get(key)
        if cached is not None:
            _pages.move_to_end(key)
    if cached is None:
        html = render()
        cached = html.replace(csrf_token, CSRF_SLOT)
        with _lock:
            _pages[key] = cached
            while len(_pages) > MAX_PAGES:
                _pages.popitem(last=False)
    return cached.replace(CSRF_SLOT, csrf_token)
