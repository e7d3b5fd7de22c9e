"""The class decision: the cheapest setting that enough of a class's images accept. Pure, no I/O.

For one class at one delivery width, an image *accepts* a setting when

* its luma SSIM reaches ``target_ssim``;
* its Cb and Cr SSIM both reach ``chroma_floor`` (colour images only): luma SSIM cannot see the
  colour damage of chroma subsampling, so subsampling is chosen only where colour survives it;
* no visible damage (``dct.damage``): its SSIM next to strong edges (``edge_ssim``) reaches
  ``edge_floor`` and its extra error step at block boundaries in smooth areas (``blocking``) stays
  within ``blocking_limit``; a mean is blind to ringing text on a mostly empty page, and unlike a
  floor on small tiles these checks do not punish grain that JPEG smooths away unseen;
* its local SSIM (a low percentile of 16x16-tile mean SSIM, ``SweepPoint.ssim_local``) reaches
  ``local_floor``, unless the floor is 0 (the default since the visible-damage check replaced it).

The chosen setting has the smallest total estimated bytes over the class among settings that at
least ``coverage`` of its images accept; ties go to the higher worst-image SSIM, then the higher
quality. If no setting qualifies, the decision says so (``setting is None``) instead of guessing.

Every decision also names the *plain-quality fallback*: the cheapest qualifying setting with cutoff
64, i.e. the Annex K tables scaled by a quality factor, which is all that an encoder's quality number
(plus a subsampling mode) can express. ``plain_only=True`` restricts the choice itself to those.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import damage
from .tables import Setting

DEFAULT_TARGET_SSIM = 0.95
DEFAULT_COVERAGE = 0.9
# Off by default: the visible-damage check (dct.damage, calibrated on tests/damage_set) replaced it.
DEFAULT_LOCAL_FLOOR = 0.0
DEFAULT_EDGE_FLOOR = damage.DEFAULT_EDGE_FLOOR
DEFAULT_BLOCKING_LIMIT = damage.DEFAULT_BLOCKING_LIMIT
PLAIN_CUTOFF = 64  # no zigzag cutoff: the standard tables scaled by quality, nothing more
_EPS = 1e-12


@dataclass(frozen=True)
class Targets:
    target_ssim: float = DEFAULT_TARGET_SSIM
    coverage: float = DEFAULT_COVERAGE
    chroma_floor: float | None = None  # None: same as target_ssim
    local_floor: float = DEFAULT_LOCAL_FLOOR  # 0 turns the local check off
    edge_floor: float = DEFAULT_EDGE_FLOOR  # 0 turns the edge check off
    blocking_limit: float = DEFAULT_BLOCKING_LIMIT  # levels; 0 turns the blocking check off

    def __post_init__(self):
        for name in ("target_ssim", "coverage"):
            v = getattr(self, name)
            if not isinstance(v, (int, float)) or not 0 < v <= 1:
                raise ValueError(f"{name} must be a number in (0, 1], got {v!r}")
        for name in ("chroma_floor", "local_floor"):
            v = getattr(self, name)
            if v is not None and (not isinstance(v, (int, float)) or not 0 <= v <= 1):
                raise ValueError(f"{name} must be a number in [0, 1], got {v!r}")
        v = self.edge_floor
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not 0 <= v <= 1:
            raise ValueError(f"edge_floor must be a number in [0, 1], got {v!r}")
        v = self.blocking_limit
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not 0 <= v <= 255:
            raise ValueError(f"blocking_limit must be a number of levels in [0, 255], got {v!r}")

    @property
    def effective_chroma_floor(self) -> float:
        return self.target_ssim if self.chroma_floor is None else self.chroma_floor


def targets_for(spec) -> Targets:
    """The decision's targets for a class spec (``dct.sampleset.ClassSpec``), defaults filled in."""
    return Targets(
        target_ssim=spec.target_ssim,
        coverage=spec.coverage,
        chroma_floor=spec.chroma_floor,
        local_floor=DEFAULT_LOCAL_FLOOR if spec.local_floor is None else spec.local_floor,
    )


@dataclass(frozen=True)
class Measure:
    """One image at one setting, the numbers the decision reads."""

    estimated_bytes: int
    ssim: float
    ssim_cb: float | None
    ssim_cr: float | None
    ssim_local: float
    edge_ssim: float = 1.0  # dct.damage; the neutral values are for curves made before it existed
    blocking: float = 0.0

    @classmethod
    def of(cls, point) -> "Measure":
        """The numbers the decision reads, from an evaluated point (``dct.simulate.SweepPoint``)."""
        return cls(point.estimated_bytes, point.ssim, point.ssim_cb, point.ssim_cr, point.ssim_local,
                   point.edge_ssim, point.blocking)


def damage_failures(m: Measure, t: Targets) -> list[str]:
    """The visible-damage checks an image fails: "edge", "blocking" (see dct.damage)."""
    return damage.failures(damage.DamageResult(m.edge_ssim, m.blocking), edge_floor=t.edge_floor,
                           blocking_limit=t.blocking_limit)


def accepts(m: Measure, t: Targets) -> bool:
    if m.ssim + _EPS < t.target_ssim:
        return False
    if m.ssim_cb is not None:
        floor = t.effective_chroma_floor
        if m.ssim_cb + _EPS < floor or m.ssim_cr + _EPS < floor:
            return False
    if t.local_floor > 0 and m.ssim_local + _EPS < t.local_floor:
        return False
    return not damage_failures(m, t)


def failed_checks(m: Measure, t: Targets) -> list[tuple[str, float, float]]:
    """The checks of :func:`accepts` that an image fails, as ``(check, value, floor)``, for reports.

    ``check`` is one of "ssim", "ssim_cb", "ssim_cr", "ssim_local", "edge_ssim" (value below its
    floor) and "blocking" (value above its limit). Empty when every one of these passes;
    :func:`accepts` stays the rule (a caller reports its verdict, and these as the reasons).
    """
    out = []
    if m.ssim + _EPS < t.target_ssim:
        out.append(("ssim", m.ssim, t.target_ssim))
    if m.ssim_cb is not None:
        floor = t.effective_chroma_floor
        for name, value in (("ssim_cb", m.ssim_cb), ("ssim_cr", m.ssim_cr)):
            if value + _EPS < floor:
                out.append((name, value, floor))
    if t.local_floor > 0 and m.ssim_local + _EPS < t.local_floor:
        out.append(("ssim_local", m.ssim_local, t.local_floor))
    failed = damage_failures(m, t)
    if "edge" in failed:
        out.append(("edge_ssim", m.edge_ssim, t.edge_floor))
    if "blocking" in failed:
        out.append(("blocking", m.blocking, t.blocking_limit))
    return out


def margins(m: Measure, t: Targets) -> dict[str, float]:
    """Each check's margin (>= 0: it passes), by the check's name in :func:`failed_checks`."""
    out = {"ssim": m.ssim - t.target_ssim}
    if m.ssim_cb is not None:
        out["ssim_cb"] = m.ssim_cb - t.effective_chroma_floor
        out["ssim_cr"] = m.ssim_cr - t.effective_chroma_floor
    if t.local_floor > 0:
        out["ssim_local"] = m.ssim_local - t.local_floor
    if t.edge_floor > 0:
        out["edge_ssim"] = m.edge_ssim - t.edge_floor
    if t.blocking_limit > 0:
        # Levels, scaled to SSIM-like units (1 level ~ 0.01) so "closest to qualifying" stays sensible.
        out["blocking"] = (t.blocking_limit - m.blocking) / 100.0
    return out


def slack(m: Measure, t: Targets) -> float:
    """How far an image is from accepting (>= 0: it accepts); the smallest margin over the checks."""
    return min(margins(m, t).values())


@dataclass
class SettingSummary:
    """A class's totals at one setting."""

    setting: Setting
    total_bytes: int
    share_accepting: float
    ssim_min: float
    ssim_at_coverage: float  # the luma SSIM that a `coverage` share of images reach
    class_slack: float  # the coverage-quantile of per-image slack: >= 0 iff the setting qualifies

    @property
    def qualifies(self) -> bool:
        return self.class_slack >= -_EPS


@dataclass
class Decision:
    setting: Setting | None
    summary: SettingSummary | None
    current: SettingSummary | None
    frontier: list[SettingSummary]
    best_share: SettingSummary | None  # the setting closest to qualifying, when none does
    image_count: int
    per_image: dict[str, Measure] = field(default_factory=dict)  # at the chosen setting
    plain: SettingSummary | None = None  # the cheapest qualifying cutoff-64 setting (the fallback)
    plain_only: bool = False  # the choice was restricted to cutoff-64 settings

    @property
    def savings_vs_current(self) -> float | None:
        if self.summary is None or self.current is None or self.current.total_bytes == 0:
            return None
        return 1.0 - self.summary.total_bytes / self.current.total_bytes

    @property
    def plain_extra_bytes(self) -> int | None:
        """Bytes the plain-quality fallback costs over the chosen setting (0 when they are the same)."""
        if self.summary is None or self.plain is None:
            return None
        return self.plain.total_bytes - self.summary.total_bytes

    @property
    def plain_extra_share(self) -> float | None:
        """The fallback's extra bytes as a fraction of the chosen setting's (0.12 = 12 % more)."""
        extra = self.plain_extra_bytes
        if extra is None or self.summary.total_bytes == 0:
            return None
        return extra / self.summary.total_bytes


def _quantile_at_coverage(values: np.ndarray, coverage: float) -> float:
    """The largest v such that at least `coverage` of values are >= v."""
    ordered = np.sort(values)[::-1]
    need = max(1, int(np.ceil(coverage * len(ordered) - 1e-9)))
    return float(ordered[need - 1])


def summarize(setting: Setting, measures: list[Measure], t: Targets) -> SettingSummary:
    ssims = np.array([m.ssim for m in measures])
    slacks = np.array([slack(m, t) for m in measures])
    return SettingSummary(
        setting=setting,
        total_bytes=int(sum(m.estimated_bytes for m in measures)),
        share_accepting=float(np.mean([accepts(m, t) for m in measures])),
        ssim_min=float(ssims.min()),
        ssim_at_coverage=_quantile_at_coverage(ssims, t.coverage),
        class_slack=_quantile_at_coverage(slacks, t.coverage),
    )


def pareto_frontier(summaries: list[SettingSummary]) -> list[SettingSummary]:
    """Settings not beaten on both bytes (fewer) and coverage-quantile SSIM (higher), by bytes."""
    ordered = sorted(summaries, key=lambda s: (s.total_bytes, -s.ssim_at_coverage))
    frontier, best = [], -np.inf
    for s in ordered:
        if s.ssim_at_coverage > best:
            frontier.append(s)
            best = s.ssim_at_coverage
    return frontier


def is_plain(setting: Setting) -> bool:
    """True for a setting any encoder's quality number reproduces (no zigzag cutoff)."""
    return setting.cutoff == PLAIN_CUTOFF


def _cheapest(qualifying: list[SettingSummary]) -> SettingSummary | None:
    if not qualifying:
        return None
    return min(qualifying, key=lambda s: (s.total_bytes, -s.ssim_min, -s.setting.quality, s.setting))


def decide_class(
    table: dict[str, dict[Setting, Measure]],
    targets: Targets,
    *,
    current: Setting | None = None,
    plain_only: bool = False,
) -> Decision:
    """Choose a class's setting from its images' curves.

    Parameters
    ----------
    table : {image key: {Setting: Measure}}
        Every image of the class (at one width). Only settings present for every image are candidates.
    targets : Targets
    current : Setting, optional
        The setting in use today, for the savings figure.
    plain_only : bool
        Choose only among cutoff-64 settings (for pipelines that take a quality number, not tables).
    """
    if not table:
        raise ValueError("a class needs at least one image to decide on")
    keys = sorted(table)
    common = set.intersection(*(set(table[k]) for k in keys))
    every = [summarize(s, [table[k][s] for k in keys], targets) for s in sorted(common)]
    summaries = [s for s in every if is_plain(s.setting)] if plain_only else every
    chosen = _cheapest([s for s in summaries if s.qualifies])
    plain = _cheapest([s for s in every if s.qualifies and is_plain(s.setting)])
    best_share = None
    if chosen is None and summaries:
        best_share = max(summaries, key=lambda s: (s.class_slack, -s.total_bytes))
    current_summary = None
    if current is not None and current in common:
        current_summary = next(s for s in every if s.setting == current)
    return Decision(
        setting=chosen.setting if chosen else None,
        summary=chosen,
        current=current_summary,
        frontier=pareto_frontier(summaries),
        best_share=best_share,
        image_count=len(keys),
        per_image={k: table[k][chosen.setting] for k in keys} if chosen else {},
        plain=plain,
        plain_only=plain_only,
    )
