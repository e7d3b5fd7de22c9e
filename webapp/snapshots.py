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
