"""The summary of an operating-point grid that reports show instead of a block per point: per
point its status, its worst finding and its smallest requirement margin, worst point first.

Computed here from a :class:`~eigengate.rules.results.FileResult` whose models lie on a grid
(``Model.grid``); the writers only lay it out. "Worst" orders points by status (failing, then
warned, then passing), then by the number of error findings, then by the smallest margin of
any requirement (the distance to its threshold, in that requirement's unit; the requirement is
named beside it), then by the spectral abscissa (continuous) or radius (discrete), largest
first, then by the point's position in the grid (so the order is deterministic).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Protocol, Sequence


class _GridFile(Protocol):
    """What a summary reads of a file's result (:class:`~eigengate.rules.results.FileResult`,
    which holds the summary: a protocol here keeps the two modules out of a cycle)."""

    @property
    def source(self) -> str: ...
    @property
    def error(self) -> Any: ...
    @property
    def results(self) -> Sequence[Any]: ...

__all__ = ["GridPoint", "GridSummary", "summarise_grid", "STATUS_ORDER", "MAX_DETAILED"]

#: Points with findings whose findings a text, Markdown, JUnit or HTML report writes out in
#: full, worst first; the others are rows of the grid's table (all of them in JSON and SARIF).
MAX_DETAILED = 10
#: Point statuses, worst first.
STATUS_ORDER = ("fail", "warn", "pass")


@dataclass(frozen=True)
class GridPoint:
    """One grid point as the summary shows it."""

    ident: str  # "speed=30,load=0.5": the point's identity and label
    title: str
    coords: tuple[tuple[str, float], ...]
    position: tuple[int, ...]  # index along each axis
    status: str  # fail, warn or pass
    errors: int
    warnings: int
    rules: tuple[str, ...]  # rule ids of its findings, sorted, without repeats
    worst: str  # the first error finding (else warning) as "EG103: message", or ""
    regressed: bool  # a baseline regression (EG201-EG207, EG211-EG213) is among its findings
    margin: float | None  # smallest requirement margin (negative: violated)
    margin_of: str  # the requirement that margin belongs to ("min_damping: 0.4")
    figure: float  # spectral abscissa (continuous) or spectral radius (discrete)
    min_damping: float


@dataclass(frozen=True)
class GridSummary:
    """A grid file's points, worst first, with the axes they lie on."""

    source: str
    name: str
    axes: tuple[tuple[str, tuple[float, ...]], ...]
    points: tuple[GridPoint, ...]
    discrete: bool

    @property
    def figure_name(self) -> str:
        return "spectral radius" if self.discrete else "spectral abscissa"

    @property
    def failing(self) -> tuple[GridPoint, ...]:
        return tuple(p for p in self.points if p.status == "fail")

    def count(self, status: str) -> int:
        return sum(1 for p in self.points if p.status == status)

    def shape_text(self) -> str:
        """``speed (4) × load (3)``."""
        return " × ".join(f"{n} ({len(v)})" for n, v in self.axes)

    def left_out(self, limit: int = MAX_DETAILED) -> int:
        """Points with findings beyond the ``limit`` written out in full."""
        return max(0, sum(1 for p in self.points if p.status != "pass") - limit)

    def headline(self) -> str:
        """One line: axes, point count, and how many fail, warn and pass."""
        n = len(self.points)
        parts = [f"{self.count(s)} {w}" for s, w in zip(STATUS_ORDER, ("failing", "warned",
                                                                         "passing"))
                 if self.count(s)]
        return f"grid {self.shape_text()}: {n} point{'s' if n != 1 else ''}, " + ", ".join(parts)

    def shown(self, passing: int = 3, limit: int = 20) -> tuple[tuple[GridPoint, ...], int]:
        """The points a short table lists (the failing and warned ones, at most ``limit``,
        then the ``passing`` worst passing ones) and how many it leaves out."""
        keep = [p for p in self.points if p.status != "pass"][:limit]
        keep += [p for p in self.points if p.status == "pass"][:passing]
        return tuple(keep), len(self.points) - len(keep)

    def detailed(self, limit: int = MAX_DETAILED) -> frozenset[str]:
        """Titles of the points whose findings a report writes out in full: the ``limit``
        worst points with findings (the table and the JSON report name the others)."""
        return frozenset([p.title for p in self.points if p.status != "pass"][:limit])


_REGRESSION = {"EG201", "EG202", "EG203", "EG204", "EG205", "EG206", "EG207", "EG211",
               "EG212", "EG213"}


def _point(r: Any, position: tuple[int, ...]) -> GridPoint:
    m, sp = r.model, r.spectrum
    errors = [f for f in r.findings if f.severity == "error"]
    warnings = [f for f in r.findings if f.severity != "error"]
    first = (errors or warnings or [None])[0]
    margins = [(v.margin, v.requirement) for v in r.verdicts
               if v.margin is not None and not math.isnan(v.margin)]
    margin, margin_of = min(margins, key=lambda t: t[0]) if margins else (None, "")
    return GridPoint(
        ident=m.point_id or m.label or m.title, title=m.title, coords=tuple(m.grid),
        position=position, status="fail" if errors else "warn" if warnings else "pass",
        errors=len(errors), warnings=len(warnings),
        rules=tuple(sorted({f.rule for f in r.findings})),
        worst="" if first is None else f"{first.rule}: {first.message.splitlines()[0]}",
        regressed=any(f.rule in _REGRESSION for f in r.findings),
        margin=margin, margin_of=margin_of,
        figure=float(sp.spectral_radius if m.discrete else sp.spectral_abscissa),
        min_damping=float(sp.min_damping))


def _rank(p: GridPoint) -> tuple:
    margin = math.inf if p.margin is None else p.margin
    return (STATUS_ORDER.index(p.status), -p.errors, margin, -p.figure, p.position)


def summarise_grid(fr: _GridFile) -> GridSummary | None:
    """The grid summary of ``fr``, or None when its models are not the points of a grid."""
    results = fr.results
    coords = [r.model.grid for r in results]
    if fr.error is not None or not results or any(c is None for c in coords):
        return None
    grids = [c for c in coords if c is not None]  # all of them (checked just above)
    names = [a for a, _ in grids[0]]
    values: dict[str, list[float]] = {a: [] for a in names}
    for c in grids:  # the axes' values in the order the points came (the file's order)
        for a, v in c:
            if a in values and v not in values[a]:
                values[a].append(v)
    points = [_point(r, tuple(values[a].index(v) for a, v in c))
              for r, c in zip(results, grids)]
    first = results[0].model
    return GridSummary(source=fr.source, name=first.name,
                       axes=tuple((a, tuple(values[a])) for a in names),
                       points=tuple(sorted(points, key=_rank)), discrete=first.discrete)
