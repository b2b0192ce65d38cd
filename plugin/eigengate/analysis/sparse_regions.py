"""Regions of the s-plane a sparse search covers: requirement targets, searched discs, and
what a search covered (:class:`Search`), with the quadtree that tests coverage.

Split from :mod:`eigengate.analysis.sparse_modes`, which runs the search and re-exports
these names.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

__all__ = ["Target", "Disc", "Search", "Rect", "DEPTH"]

#: Depth of the quadtree that tests whether discs cover a region.
DEPTH = 7

Rect = tuple[float, float, float, float]  # x0, x1, y0, y1 of the upper half-plane (y ≥ 0)


@dataclass(frozen=True)
class Target:
    """A region of the s-plane a requirement judges (closed):

    * ``right``: ``Re s ≥ value`` (stability: 0; a decay rate α: −α);
    * ``sector``: damping ratio below ``value`` (``Re s ≥ −t·|Im s|``, t = ζ/√(1 − ζ²));
    * ``outside``: ``|s| ≥ value``.
    """

    kind: str
    value: float

    def describe(self) -> str:
        v = f"{self.value:.6g}"
        return {"right": f"Re s ≥ {v}", "sector": f"damping ratio < {v}",
                "outside": f"|s| ≥ {v}"}[self.kind]

    def _slope(self) -> float:
        z = min(max(self.value, 0.0), 1.0)
        return math.inf if z >= 1.0 else z / math.sqrt(1.0 - z * z)

    def meets(self, r: Rect) -> bool:
        """Whether the rectangle may hold points of the region (never False when it does)."""
        x0, x1, y0, y1 = r
        if self.kind == "right":
            return x1 >= self.value
        if self.kind == "sector":
            t = self._slope()
            return x1 >= 0.0 or math.isinf(t) or x1 + t * y1 >= 0.0
        far = max(abs(complex(x, y)) for x in (x0, x1) for y in (y0, y1))
        return far >= self.value

    def clip(self, r: Rect) -> Rect | None:
        """The part of ``r`` that may meet the region, as a rectangle (None: none)."""
        if not self.meets(r):
            return None
        x0, x1, y0, y1 = r
        if self.kind == "right":
            return (max(x0, self.value), x1, y0, y1)
        if self.kind == "sector" and not math.isinf(self._slope()):
            return (max(x0, -self._slope() * y1), x1, y0, y1)
        return r


@dataclass(frozen=True)
class Disc:
    """An open disc with no eigenvalue in it but those found."""

    centre: complex
    radius: float

    def holds(self, r: Rect) -> bool:
        x0, x1, y0, y1 = r
        return all(abs(complex(x, y) - self.centre) < self.radius
                   for x in (x0, x1) for y in (y0, y1))


@dataclass(frozen=True)
class Search:
    """What a sparse search covered. ``box``: Bendixson's rectangle (upper half), None for a
    descriptor model; ``discs``: the searched discs; ``outer``: every eigenvalue not found has
    ``|λ| ≤ outer`` (None: no magnitude run); ``shifts``: LU factorisations made; ``found``:
    eigenvalues found (conjugates counted); ``n``: states."""

    box: Rect | None
    discs: tuple[Disc, ...]
    outer: float | None
    targets: tuple[Target, ...]
    shifts: int
    found: int
    n: int
    symmetric: bool
    #: (target, sentence): regions proved free of eigenvalues by structure (analysis.structure)
    proofs: tuple[tuple[Target, str], ...] = ()
    #: discrete models: the sample period, and ``radius`` ≥ every |z| (rigorous row sums);
    #: ``outer`` then bounds the |z| of every eigenvalue not found
    sample_period: float | None = None
    radius: float | None = None

    def proof(self, target: Target) -> str | None:
        """How structure proves ``target`` free of eigenvalues (None: it does not)."""
        return next((why for t, why in self.proofs if t == target), None)

    def excluded(self, target: Target) -> bool:
        """Whether no eigenvalue can lie in ``target`` (Bendixson's rectangle misses it)."""
        if self.sample_period is not None:
            from .sparse_discrete import z_radius

            r = z_radius(target, self.sample_period)
            return r is not None and self.radius is not None and self.radius < r
        return self.box is not None and target.clip(self.box) is None

    def uncovered(self, target: Target) -> list[Rect]:
        """Parts of ``target`` (within the rectangle) that no disc covers; for a descriptor
        model, the whole region is uncovered (``[]`` means searched in full)."""
        if self.sample_period is not None:
            from .sparse_discrete import discrete_uncovered

            return discrete_uncovered(self, target)
        if self.box is None:
            return [(-math.inf, math.inf, 0.0, math.inf)]
        start = target.clip(self.box)
        return [] if start is None else _uncovered(start, target, self.discs, self.outer)

    def coverage(self) -> str:
        """The search in words, for verdict messages."""
        if self.radius is not None:
            where = f"every |z| ≤ {self.radius:.6g} (row sums of A)"
        elif self.box is None:
            where = "no bound on where the eigenvalues of a descriptor model lie"
        else:
            x0, x1, _, y1 = self.box
            where = (f"Bendixson's rectangle {x0:.6g} ≤ Re s ≤ {x1:.6g}, |Im s| ≤ {y1:.6g}")
        discs = ", ".join(f"|s − ({_c(d.centre)})| < {d.radius:.6g}" for d in self.discs[:4])
        more = f" and {len(self.discs) - 4} more" if len(self.discs) > 4 else ""
        outer = "" if self.outer is None else f", |s| > {self.outer:.6g}"
        if self.sample_period is not None:
            outer = "" if self.outer is None else f"every other |z| ≤ {self.outer:.6g}"
            return (f"Arnoldi (largest moduli) found {self.found} of {self.n} eigenvalues in "
                    f"{self.shifts} run(s); {outer or 'no run converged'}; {where}")
        return (f"shift-invert Arnoldi found {self.found} of {self.n} eigenvalues with "
                f"{self.shifts} shift(s); searched {discs or 'nothing'}{more}{outer}; {where}")


def _c(z: complex) -> str:
    return f"{z.real:.6g}" if z.imag == 0 else f"{z.real:.6g}{z.imag:+.6g}j"


def _uncovered(r: Rect, target: Target, discs: Sequence[Disc], outer: float | None,
               depth: int = DEPTH) -> list[Rect]:
    """Leaves of a quadtree over ``r`` that may meet ``target`` and that no disc (nor the
    magnitude run) covers; conservative: a leaf is covered only when one disc holds all its
    corners (a disc is convex) or the whole leaf lies beyond ``outer``."""
    if not target.meets(r):
        return []
    x0, x1, y0, y1 = r
    if any(d.holds(r) for d in discs):
        return []
    if outer is not None and _nearest(r) > outer:
        return []
    if depth == 0:
        return [r]
    xm, ym = 0.5 * (x0 + x1), 0.5 * (y0 + y1)
    parts = [(x0, xm, y0, ym), (xm, x1, y0, ym), (x0, xm, ym, y1), (xm, x1, ym, y1)]
    out: list[Rect] = []
    for part in parts:
        out += _uncovered(part, target, discs, outer, depth - 1)
    if out == parts:  # nothing of r is covered: one leaf says so
        return [r]
    return out


def _nearest(r: Rect) -> float:
    """Distance from the origin to the rectangle."""
    x0, x1, y0, y1 = r
    dx = 0.0 if x0 <= 0.0 <= x1 else min(abs(x0), abs(x1))
    dy = 0.0 if y0 <= 0.0 <= y1 else min(abs(y0), abs(y1))
    return math.hypot(dx, dy)
