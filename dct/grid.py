"""The search grid: which settings a sweep may choose from, and its coarse subset.

The default grid is every quality 20..95, six zigzag cutoffs from 64 (no cutoff) down to 10, and the
two subsampling modes that web encoders are usually asked for. A sweep evaluates the coarse subset
(every 5th quality) on every image, then refines only where a class's decision lies
(``dct.pipeline``).
"""

from __future__ import annotations

from dataclasses import dataclass

from .tables import SUBSAMPLINGS, Setting

COARSE_STEP = 5


@dataclass(frozen=True)
class Grid:
    qualities: tuple[int, ...] = tuple(range(20, 96))
    cutoffs: tuple[int, ...] = (64, 40, 28, 20, 14, 10)
    subsamplings: tuple[str, ...] = ("4:4:4", "4:2:0")
    coarse_step: int = COARSE_STEP

    def __post_init__(self):
        if not self.qualities or not self.cutoffs or not self.subsamplings:
            raise ValueError("a grid needs at least one quality, cutoff and subsampling")
        for s in self.subsamplings:
            if s not in SUBSAMPLINGS:
                raise ValueError(f"grid subsampling must be one of {', '.join(SUBSAMPLINGS)}, got {s!r}")
        for q in self.qualities:
            Setting(q)  # validates the range
        for k in self.cutoffs:
            Setting(50, k)
        if self.coarse_step < 1:
            raise ValueError(f"coarse_step must be >= 1, got {self.coarse_step!r}")

    @property
    def sorted_qualities(self) -> tuple[int, ...]:
        return tuple(sorted(set(self.qualities)))

    def coarse_qualities(self) -> tuple[int, ...]:
        """Every ``coarse_step``-th quality, always including the lowest and the highest."""
        qs = self.sorted_qualities
        picked = [q for q in qs if (q - qs[0]) % self.coarse_step == 0]
        if picked[-1] != qs[-1]:
            picked.append(qs[-1])
        return tuple(picked)

    def combos(self) -> list[tuple[int, str]]:
        return [(k, s) for k in self.cutoffs for s in self.subsamplings]

    def settings(self) -> list[Setting]:
        return [Setting(q, k, s) for k, s in self.combos() for q in self.sorted_qualities]

    def coarse_settings(self) -> list[Setting]:
        return [Setting(q, k, s) for k, s in self.combos() for q in self.coarse_qualities()]

    def as_dict(self) -> dict:
        return {
            "qualities": list(self.sorted_qualities),
            "cutoffs": list(self.cutoffs),
            "subsamplings": list(self.subsamplings),
            "coarse_step": self.coarse_step,
        }

    @classmethod
    def from_dict(cls, d: dict) -> "Grid":
        return cls(tuple(d["qualities"]), tuple(d["cutoffs"]), tuple(d["subsamplings"]), int(d.get("coarse_step", COARSE_STEP)))


DEFAULT_GRID = Grid()
DEFAULT_CURRENT = Setting(85, 64, "4:2:0")
