"""The class search: exact evaluations only where they decide, guided by coefficient-domain forecasts.

A class (at one width) chooses, among the grid's settings, the cheapest one that at least ``need``
of its ``N`` images accept (``dct.budget``). Within one cutoff x subsampling combination ("combo")
bytes grow with quality, so the combo's best is its lowest qualifying quality ``Q*``, and the class's
choice is the cheapest of the combos' ``Q*``. This module finds those ``Q*`` with few exact
evaluations:

* every image's forecast (``dct.predict``, calibrated against the image's exact points: offsets of
  slack and ratios of bytes, interpolated along quality) says where each combo crosses the targets;
* a quality *fails* for the class when more than ``N - need`` images fail there exactly, or *clearly*
  fail at that quality or above (:func:`clear_failure`): a check short by more than the dips between
  neighbouring qualities at quality q means failing at
  the lower qualities too, down to where the forecast sees a recovery. The forecast's luminance term
  is exact at every quality (it depends only on the DC step), so it sees the large dips that pure
  black or white areas cause when the DC step cannot reproduce their level; the small dips left
  are smaller than the margin;
* a quality *passes* when ``need`` images accept it exactly; ``Q*`` is the lowest passing quality with
  every quality below it failing, and it is then evaluated on every image (its total bytes are exact);
* a combo whose forecast lower bound on bytes (with ``BYTES_TOLERANCE`` and ``PRUNE_MARGIN`` of slack)
  exceeds the cheapest exact total found so far is never evaluated.

Each round asks for *ladders*: an image's settings from the forecast crossing down to the lowest
quality whose fate is unknown, which the worker stops at the first clear failure (below it, nothing
passes); images forecast to accept comfortably are asked only for the top rung. The decision itself is made by
``dct.budget.decide_class`` on exact points only; tests compare it with an exhaustive search.
Pure: no I/O, arrays and dicts in and out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np

from . import budget
from .grid import Grid
from .predict import Forecast
from .tables import Setting

CLEAR_MARGIN = 0.004  # exact slack below -this: fails at every lower quality too (dips are smaller)
# The blocking check counts levels, and its margin enters the slack divided by 100; its own steps
# between neighbouring qualities are a few hundredths of a level, so a clear failure is this far over.
BLOCKING_CLEAR_LEVELS = 0.03
PRUNE_MARGIN = 0.03  # forecast slack is trusted to mean failure only this far below the targets
BYTES_TOLERANCE = 0.08  # forecast bytes are trusted to be within this share of the exact bytes (seen: 5 %)
DESCEND_MARGIN = 0.015  # ladders go below their top only for images forecast this close to failing
SEEN_CHECKS = ("ssim", "ssim_cb", "ssim_cr")  # what a forecast predicts; the rest it takes from exact points
MAX_ROUNDS = 12  # then every remaining quality of an unresolved combo is evaluated exactly


def forecast_slack(luma, cb, cr, targets: budget.Targets) -> np.ndarray:
    """The part of ``budget.slack`` a forecast can see: luma target and chroma floor."""
    out = luma - targets.target_ssim
    if cb is not None:
        floor = targets.effective_chroma_floor
        out = np.minimum(out, np.minimum(cb, cr) - floor)
    return out


def need_count(n: int, coverage: float) -> int:
    """Images that must accept for a class to qualify (as ``dct.budget`` counts them)."""
    return max(1, int(math.ceil(coverage * n - 1e-9)))


class Ladder(NamedTuple):
    """Settings of one image to evaluate from the first down, stopping at the first clear failure.

    ``full``: every rung needs its full point (the class total needs its bytes); otherwise a rung
    whose luma SSIM alone fails clearly (:func:`clear_luma_failure`) ends the ladder with that
    verdict instead of a point."""

    settings: tuple[Setting, ...]
    full: bool = False


@dataclass
class ComboState:
    cutoff: int
    subsampling: str
    resolved: bool = False
    best: int | None = None  # Q*: the lowest qualifying quality (None: none qualifies)
    pruned: bool = False
    rounds: int = 0
    step: int = 1  # the upward gallop's next stride, when the forecast does not place the crossing

    @property
    def combo(self) -> tuple[int, str]:
        return self.cutoff, self.subsampling


@dataclass
class ClassSearch:
    """The search for one class at one width; :meth:`requests` and :meth:`add` alternate."""

    forecasts: dict[str, Forecast]  # image key -> forecast
    targets: budget.Targets
    grid: Grid
    plain_only: bool = False
    known: dict[str, dict[Setting, budget.Measure]] = field(default_factory=dict)
    # Settings seen to fail clearly from their luma SSIM alone (no full point): key -> {Setting: SSIM}
    failed: dict[str, dict[Setting, float]] = field(default_factory=dict)
    combos: dict[tuple[int, str], ComboState] = field(default_factory=dict)

    def __post_init__(self):
        self.keys = sorted(self.forecasts)
        self.qualities = np.asarray(self.grid.sorted_qualities)
        self.need = need_count(len(self.keys), self.targets.coverage)
        for key in self.keys:
            self.known.setdefault(key, {})
            self.failed.setdefault(key, {})
        for k, s in self.grid.combos():
            if self.plain_only and k != budget.PLAIN_CUTOFF:
                continue
            self.combos[(k, s)] = ComboState(k, s)

    # -- exact points in ----------------------------------------------------------------

    def drop(self, key: str) -> None:
        """Leave an image out (it could not be evaluated): the search starts over on the others,
        keeping every exact point it has."""
        if key not in self.forecasts:
            return
        del self.forecasts[key]
        self.known.pop(key, None)
        self.failed.pop(key, None)
        self.keys = sorted(self.forecasts)
        self.need = need_count(len(self.keys), self.targets.coverage) if self.keys else 0
        for state in self.combos.values():
            state.resolved, state.best, state.pruned, state.rounds, state.step = False, None, False, 0, 1

    def add(self, key: str, setting: Setting, measure: budget.Measure) -> None:
        self.known[key][setting] = measure

    def add_failure(self, key: str, setting: Setting, luma_ssim: float) -> None:
        """A setting that fails clearly by its luma SSIM (:func:`clear_luma_failure`), seen
        without the rest of its point."""
        self.failed[key][setting] = luma_ssim

    def _seen(self, key: str, setting: Setting) -> bool:
        return setting in self.known[key] or setting in self.failed[key]

    # -- calibrated forecasts -----------------------------------------------------------

    def _calibrated(self, key: str, k: int, s: str) -> tuple[np.ndarray, np.ndarray]:
        """Forecast slack and bytes of one image along the grid's qualities, corrected by its exact
        points, each part by the points that share what drives it (offsets and ratios interpolated
        along quality):

        * luma SSIM by points of the same cutoff (luma does not depend on the subsampling mode);
        * chroma SSIM by points of the same subsampling mode (otherwise left as forecast);
        * the checks a forecast cannot see (visible damage, local floor) by points of the same combo;
        * bytes by the nearest group: same combo, same mode, same cutoff, any.
        """
        fc = self.forecasts[key]
        luma, cb, cr, size = fc.column(k, s, self.qualities)
        # Points outside the forecast's grid (the current default, say) cannot be compared with it.
        points = {p: m for p, m in self.known[key].items() if p.cutoff in fc.cutoffs and p.subsampling in fc.subsamplings}
        t = self.targets

        def group(*tests):
            for test in tests:
                chosen = sorted((p for p in points if test(p)), key=lambda p: p.quality)
                if chosen:
                    return chosen
            return []

        def offsets(chosen, value, default=0.0, above=None):
            """``value(measure, forecast column)`` at the group's points, interpolated along quality
            (held flat past the ends, or ``above`` past the highest point)."""
            if not chosen:
                return default
            qs = [p.quality for p in chosen]
            diffs = [value(points[p], fc.point(p)) for p in chosen]
            return np.interp(self.qualities, qs, diffs, right=above)

        same_combo = lambda p: (p.cutoff, p.subsampling) == (k, s)  # noqa: E731
        luma = luma + offsets(group(same_combo, lambda p: p.cutoff == k, lambda p: True),
                              lambda m, col: m.ssim - col[0])
        if cb is not None:
            chroma_points = group(same_combo, lambda p: p.subsampling == s)
            cb = cb + offsets(chroma_points, lambda m, col: m.ssim_cb - col[1])
            cr = cr + offsets(chroma_points, lambda m, col: m.ssim_cr - col[2])
        # The other checks' smallest margin, as measured nearby (their own curve, not an offset). They
        # improve with quality, so above the highest point they are not assumed to bind.
        unseen = offsets(group(same_combo), lambda m, col: min(
            [v for name, v in budget.margins(m, t).items() if name not in SEEN_CHECKS], default=1.0),
            default=1.0, above=1.0)
        sized = group(same_combo, lambda p: p.subsampling == s, lambda p: p.cutoff == k, lambda p: True)
        ratio = offsets(sized, lambda m, col: m.estimated_bytes / col[3]) if sized else 1.0
        if sized:
            size = size * ratio  # offsets() returned exact/forecast ratios here
        return np.minimum(forecast_slack(luma, cb, cr, t), unseen), size

    def _forecast_matrix(self, combo) -> tuple[np.ndarray, np.ndarray]:
        k, s = combo
        pairs = [self._calibrated(key, k, s) for key in self.keys]
        return np.stack([p[0] for p in pairs]), np.stack([p[1] for p in pairs])

    def _bytes_floor(self, combo, size: np.ndarray) -> np.ndarray:
        """A lower bound on each image's bytes along quality: exact where its full point is known,
        the forecast less ``BYTES_TOLERANCE`` elsewhere."""
        k, s = combo
        floor = size * (1 - BYTES_TOLERANCE)
        index = {q: j for j, q in enumerate(self.qualities.tolist())}
        for i, key in enumerate(self.keys):
            for p, m in self.known[key].items():
                if (p.cutoff, p.subsampling) == combo and p.quality in index:
                    floor[i, index[p.quality]] = m.estimated_bytes
        return floor

    def _class_curve(self, slack: np.ndarray) -> np.ndarray:
        """The need-th largest slack at each quality: >= 0 where the class qualifies."""
        return np.sort(slack, axis=0)[::-1][self.need - 1]

    # -- exact state --------------------------------------------------------------------

    def _state(self, combo, limit: int | None = None) -> tuple[str, int | None]:
        """("resolved", Q* or None), ("complete", q) when q passes but lacks images, or
        ("unknown", q) for the lowest quality whose fate is not yet known; with ``limit`` (an index
        into the qualities), ("failing", None) when every quality up to it fails."""
        k, s = combo
        n, need = len(self.keys), self.need
        qs = self.qualities.tolist()
        implied: dict[str, set[int]] = {}  # key -> qualities where a clear failure above implies failure
        per_q = {}  # quality -> (accepting, failing, failing by luma alone) exact keys
        for key in self.keys:
            raw = None
            clear = []
            for p, m in self.known[key].items():
                if (p.cutoff, p.subsampling) != combo or p.quality not in qs:
                    continue
                ok = budget.accepts(m, self.targets)
                per_q.setdefault(p.quality, (set(), set(), set()))[0 if ok else 1].add(key)
                if not ok and clear_failure(m, self.targets):
                    clear.append(p.quality)
            for p in self.failed[key]:
                if (p.cutoff, p.subsampling) == combo and p.quality in qs:
                    per_q.setdefault(p.quality, (set(), set(), set()))[2].add(key)
                    clear.append(p.quality)
            for quality in clear:
                if raw is None:
                    raw = forecast_slack(*self.forecasts[key].column(k, s, qs)[:3], self.targets)
                implied.setdefault(key, set()).update(_failing_below(raw, qs.index(quality), qs))
        for q in qs if limit is None else qs[: limit + 1]:
            acc, fail, quick = per_q.get(q, (set(), set(), set()))
            failing = fail | quick | {key for key, below in implied.items() if q in below}
            if len(acc) >= need:
                # Resolved only with every image's full point there: the class total needs its bytes.
                if len(acc) + len(fail) == n:
                    return "resolved", q
                return "complete", q
            if len(failing) > n - need:
                continue
            return "unknown", q
        return ("resolved", None) if limit is None or limit >= len(qs) - 1 else ("failing", None)

    def _exact_total(self, combo, q) -> int:
        k, s = combo
        setting = Setting(q, k, s)
        return sum(self.known[key][setting].estimated_bytes for key in self.keys)

    # -- the next round -----------------------------------------------------------------

    def requests(self) -> dict[str, list["Ladder"]]:
        """Ladders to evaluate next, per image key (empty: the search is done).

        Branch and bound over the combos: the cheapest forecast combo is resolved exactly first; then
        every other combo either cannot beat the cheapest exact total at any quality it could afford
        (pruned), or has its affordable qualities refuted by a few clear failures of the images most
        likely to fail, or, forecast to pass there, is resolved exactly too.
        """
        if not self.keys:
            return {}
        top_index = len(self.qualities) - 1
        for state in self.combos.values():
            if not state.resolved:
                kind, q = self._state(state.combo)
                if kind == "resolved":
                    state.resolved, state.best = True, q
        best_exact = self._best_exact(plain=False)
        best_plain = self._best_exact(plain=True)
        open_combos = {}
        for combo, state in self.combos.items():
            if state.resolved or state.pruned:
                continue
            slack, size = self._forecast_matrix(combo)
            curve = self._class_curve(slack)
            bound = best_plain if combo[0] == budget.PLAIN_CUTOFF else best_exact
            limit = top_index
            own = any((p.cutoff, p.subsampling) == combo for points in self.known.values() for p in points)
            if bound is not None:  # only qualities whose bytes could come in under the bound matter
                # (Not tighter near exact points: pure black makes bytes dip at single qualities too,
                # where the DC step reproduces its level, and the bytes forecast is smooth in quality.)
                affordable = np.flatnonzero(self._bytes_floor(combo, size).sum(axis=0) < bound)
                if affordable.size == 0:
                    state.pruned = True
                    continue
                limit = int(affordable[-1])
            kind, q = self._state(combo, limit)
            if kind == "failing":  # every affordable quality fails exactly: it cannot win
                state.pruned = True
                continue
            if kind == "resolved":
                state.resolved, state.best = True, q
                continue
            if own and curve[: limit + 1].max() < -PRUNE_MARGIN:
                state.pruned = True  # forecast, calibrated on its own points, far from qualifying
                continue
            hit = np.flatnonzero(curve[: limit + 1] >= 0)
            at = int(hit[0]) if hit.size else None
            cost = float(size[:, at].sum()) if at is not None else np.inf
            open_combos[combo] = (cost, slack, at, limit, kind, q)
        if not open_combos:
            return {}
        plain = [c for c in open_combos if c[0] == budget.PLAIN_CUTOFF]
        if best_exact is None or (plain and best_plain is None):
            # Nothing exact to bound with yet: the cheapest forecast combo (and the cheapest plain one,
            # for the fallback) first; the rest wait for the bound.
            order = sorted(open_combos, key=lambda c: (open_combos[c][0], c))
            working = {order[0]} if best_exact is None else set()
            if plain and best_plain is None:
                working.add(min(plain, key=lambda c: (open_combos[c][0], c)))
        else:
            working = set(open_combos)
        out: dict[str, list[Ladder]] = {}
        for combo in sorted(working):
            state = self.combos[combo]
            state.rounds += 1
            full = open_combos[combo][4] == "complete"
            for key, ladder in self._ladders(combo, state, *open_combos[combo][1:]).items():
                out.setdefault(key, []).append(Ladder(ladder, full))
        return out

    def _best_exact(self, *, plain: bool) -> int | None:
        totals = [self._exact_total(c, st.best) for c, st in self.combos.items()
                  if st.resolved and st.best is not None and (not plain or c[0] == budget.PLAIN_CUTOFF)]
        return min(totals) if totals else None

    def _likely_failing(self, slack: np.ndarray, j: int) -> list[int]:
        """Indices of the images most likely to fail at quality index j: as many as a failure needs."""
        failing_needed = len(self.keys) - self.need + 1
        return np.argsort(slack[:, j], kind="stable")[:failing_needed].tolist()

    def _ladders(self, combo, state: ComboState, slack: np.ndarray, at: int | None, limit: int, kind: str,
                 q: int) -> dict[str, tuple[Setting, ...]]:
        k, s = combo
        qs = self.qualities.tolist()
        index = qs.index(q)
        known = self.known

        def missing(key, settings):
            return tuple(x for x in settings if not self._seen(key, x))

        if kind == "complete":  # full points: the class total needs every image's bytes there
            return {key: (Setting(q, k, s),) for key in self.keys if Setting(q, k, s) not in known[key]}
        if state.rounds > MAX_ROUNDS:  # give up guessing: every affordable quality from here up, exactly
            return {key: m for key in self.keys
                    if (m := missing(key, [Setting(x, k, s) for x in reversed(qs[index : limit + 1])]))}
        own = any((p.cutoff, p.subsampling) == combo for key in self.keys for p in known[key])
        if at is None or at < index or (at == index and own):
            # The forecast does not place the crossing above what is known (it fails everywhere
            # affordable, or the exact points already disagree with it, e.g. through a check it
            # cannot see): the images most likely to fail probe, and their first clear failure
            # covers every quality below. Probe the highest affordable quality when the forecast
            # says "never"; otherwise gallop upwards, and halve the gap once a probe passes.
            passing = [qs.index(p.quality) for key in self.keys for p, m in known[key].items()
                       if (p.cutoff, p.subsampling) == combo and p.quality > q and p.quality in qs
                       and budget.accepts(m, self.targets)]
            if passing:
                top = (index + min(passing)) // 2
            elif at is None:
                top = limit
            else:
                top = min(limit, index + state.step - 1)
                state.step *= 2
            rungs = {}
            for j in range(top, index - 1, -1):
                for i in self._likely_failing(slack, j):
                    if j == top or slack[i, j] <= DESCEND_MARGIN:
                        rungs.setdefault(self.keys[i], []).append(Setting(qs[j], k, s))
        else:
            state.step = 1
            top = at
            probe = Setting(qs[top], k, s)
            likely = self._likely_failing(slack, top)
            if not any(self._seen(self.keys[i], probe) for i in likely):
                # First the images most likely to fail at the forecast crossing: if they fail clearly
                # there, the other images need not be evaluated at it.
                rungs = {self.keys[i]: [probe] for i in likely}
            else:
                rungs = {key: [probe] for key in self.keys}
            # Below the top rung only failures can settle a quality: the likely failers descend.
            for j in range(top - 1, index - 1, -1):
                for i in self._likely_failing(slack, j):
                    if slack[i, j] <= DESCEND_MARGIN and self.keys[i] in rungs:
                        rungs[self.keys[i]].append(Setting(qs[j], k, s))
        out = {key: m for key, ladder in rungs.items() if (m := missing(key, ladder))}
        if not out:  # the forecast rungs are known: step exactly from the unknown quality
            out = {key: (Setting(q, k, s),) for key in self.keys if not self._seen(key, Setting(q, k, s))}
        return out

    # -- the answer ----------------------------------------------------------------------

    def table(self) -> dict[str, dict[Setting, budget.Measure]]:
        """Every exact point, for ``dct.budget.decide_class``."""
        return {key: dict(points) for key, points in self.known.items()}


def _failing_below(raw: np.ndarray, index: int, qualities: list[int]) -> list[int]:
    """Qualities below a clear failure at ``qualities[index]`` that fail too: downwards until the
    forecast sees a recovery (its slack rising above the failure's by ``CLEAR_MARGIN``), which is
    how a dip shows (a flat dark area whose mean the DC step cannot reproduce at some qualities)."""
    out = [qualities[index]]
    for j in range(index - 1, -1, -1):
        if raw[j] > raw[index] + CLEAR_MARGIN:
            break
        out.append(qualities[j])
    return out


def clear_failure(measure: budget.Measure, targets: budget.Targets) -> bool:
    """A failure by more than the dips between neighbouring qualities: some SSIM check short by more
    than ``CLEAR_MARGIN``, or blocking over its limit by more than ``BLOCKING_CLEAR_LEVELS``."""
    if budget.accepts(measure, targets):
        return False
    for name, margin in budget.margins(measure, targets).items():
        if name == "blocking":
            if margin * 100.0 < -BLOCKING_CLEAR_LEVELS:
                return True
        elif margin < -CLEAR_MARGIN:
            return True
    return False


def clear_luma_failure(luma_ssim: float, targets: budget.Targets) -> bool:
    """A luma SSIM short of the target by more than ``CLEAR_MARGIN``: a clear failure whatever the
    other checks say (:func:`clear_failure` on the full point would say so too)."""
    return luma_ssim - targets.target_ssim < -CLEAR_MARGIN


def stops_ladder(measure: budget.Measure, targets: budget.Targets) -> bool:
    """True when a ladder can stop after this point: a clear failure (nothing below passes)."""
    return clear_failure(measure, targets)
