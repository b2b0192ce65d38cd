"""Eigenvalue requirements over uncertain parameter ranges: exact boundaries for one parameter
(guardian maps), vertices, edges and a searched interior for several.

A model with declared parameters is a family ``A(p)`` (the closed loop may be polynomial in p,
e.g. ``B(p)K(p)``). Along one parameter ``p ∈ [lo, hi]`` (or one edge of a box), the matrix
polynomial of ``A(p)`` is identified by interpolation at Chebyshev points and checked at other
points; when the check fails (a rational dependence, say through a feedthrough D), the interval
is sampled instead, and the result says so.

**Guardian maps** and the roots of their determinants: :mod:`eigengate.analysis.guardians`.
Between two consecutive roots no eigenvalue crosses the boundary, so the requirement's margin
keeps its sign; it is evaluated at each sub-interval's midpoint and at each root (a tangential
touch), so for one parameter the pass/fail answer over the whole range is decided (to the
accuracy of the computed eigenvalues). Roots where the margin changes sign are refined by
Brent's method on the margin itself (the spectral abscissa, say) to about 1e-14 relative. The
worst margin is searched by bounded scalar minimisation in each sub-interval (Brent 1973); its
value is attained there, an upper bound of the true minimum.

Not algebraic, hence sampled (dense grid, bracketing, refinement) and never proven: the damping
and natural frequency of discrete models (their regions in the z-plane are bounded by
logarithmic spirals), descriptor models, and damping 1 (the sector degenerates to a ray). A
complex pair in the right half-plane that meets the real axis changes a damping verdict
(real modes have no damping requirement) where no guardian vanishes: sub-intervals where the
model is unstable are therefore sampled for damping, and the result is not proven there.

**Several parameters**: every edge of the box is a one-parameter problem (exact, which includes
the vertices); the interior is searched on a grid and by bounded local minimisation (Powell's
method, deterministic) from the worst grid points: sampled, not proven. A failure found anywhere
is a counterexample and decides the verdict; a pass over a box of several parameters rests on
the sampled interior and says so.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field
from typing import Callable, Sequence

import numpy as np

from .guardians import (Boundary, bialternate_product, bialternate_sum, guardians,
                        identify, real_roots)

__all__ = ["Boundary", "Check", "ParameterBox", "Worst", "Search", "search", "sweep",
           "bialternate_sum", "bialternate_product", "guardians", "identify",
           "real_roots"]

#: Samples of one interval when it has no algebraic boundary (or the identification failed).
SAMPLES_1D = 65
#: Interior grid points (in all) of a box of several parameters, by default.
GRID_POINTS = 400
#: A margin above this stands for "nothing to check" (no oscillatory mode, say).
_BIG = 1e300


@dataclass(frozen=True)
class Check:
    """One requirement as the search sees it: its margin from the finite eigenvalues (z-plane
    for discrete models; positive: satisfied), the boundaries where that margin can change
    sign (None: none algebraic, so sampled), and whether unstable sub-intervals must be
    sampled (damping, see the module notes)."""

    margin: Callable[[np.ndarray], float]
    boundaries: tuple[Boundary, ...] | None
    sample_unstable: bool = False


@dataclass(frozen=True)
class ParameterBox:
    """The uncertain parameters of a model and a way to form its matrices at given values:
    ``build(values)`` returns the closed-loop ``(A, E)`` (E None for a standard model), formed
    exactly as the loader forms the nominal model."""

    names: tuple[str, ...]
    nominal: tuple[float, ...]
    low: tuple[float, ...]
    high: tuple[float, ...]
    build: Callable[[tuple[float, ...]], tuple[np.ndarray, "np.ndarray | None"]] = \
        field(compare=False, repr=False)
    discrete: bool = False
    descriptor: bool = False


@dataclass(frozen=True)
class Worst:
    """The search's answer for one check: the smallest margin found and where; whether the
    sign of the margin over the whole box is proven (one parameter, every interval exact; or a
    failure found); the boundary points found on exact intervals; notes on what was proven and
    what sampled."""

    margin: float
    at: tuple[float, ...]
    proven: bool
    crossings: tuple[tuple[float, ...], ...]
    notes: tuple[str, ...]


@dataclass(frozen=True)
class Search:
    worst: tuple[Worst, ...]
    evaluations: int


# ------------------------------------------------------------------ one interval

class _Evaluator:
    """Margins of every check at a point of the box, computed once per point."""

    def __init__(self, box: ParameterBox, checks: Sequence[Check]) -> None:
        self.box, self.checks = box, checks
        self.cache: dict[tuple[float, ...], np.ndarray] = {}

    def eigenvalues(self, p: tuple[float, ...]) -> np.ndarray:
        import scipy.linalg as la

        a, e = self.box.build(p)
        if e is None:
            return np.linalg.eigvals(a)
        # infinite eigenvalues as analysis.modes counts them apart
        ab = la.eigvals(a, e, homogeneous_eigvals=True, check_finite=False)
        tiny = 100.0 * a.shape[0] * np.finfo(float).eps
        scale_a = max(float(np.linalg.norm(a, "fro")), 1e-300)
        scale_e = max(float(np.linalg.norm(e, "fro")), 1e-300)
        finite = np.abs(ab[1]) > tiny * scale_e * np.maximum(np.abs(ab[0]) / scale_a, 1.0)
        return ab[0][finite] / ab[1][finite]

    def __call__(self, p: Sequence[float]) -> np.ndarray:
        key = tuple(float(v) for v in p)
        out = self.cache.get(key)
        if out is None:
            lam = self.eigenvalues(key)
            out = np.array([min(c.margin(lam), _BIG) for c in self.checks]
                           + [self._stability(lam)])
            self.cache[key] = out
        return out

    def _stability(self, lam: np.ndarray) -> float:
        if not lam.size:
            return _BIG
        return float(1 - np.abs(lam).max()) if self.box.discrete else float(-lam.real.max())


@dataclass
class _Line:
    """One interval of the box: from ``start`` along axis ``axis`` over [lo, hi]."""

    start: tuple[float, ...]
    axis: int
    lo: float
    hi: float

    def point(self, p: float) -> tuple[float, ...]:
        q = list(self.start)
        q[self.axis] = p
        return tuple(q)


@dataclass
class _Interval:
    worst: float
    at: float
    exact: bool  # every point decided by the guardian maps (no sampled part)
    crossings: list[float]

    @property
    def proven(self) -> bool:  # exact, or a failure found (a counterexample)
        return self.exact or self.worst < 0


def sweep(ev: _Evaluator, line: _Line) -> list[_Interval]:
    """Every check along one interval: exact where the boundaries are algebraic and A(p) is a
    matrix polynomial, sampled otherwise."""
    box, lo, hi = ev.box, line.lo, line.hi
    mid, half = (lo + hi) / 2, (hi - lo) / 2
    coeffs = None
    if not box.descriptor:
        coeffs = identify(lambda t: box.build(line.point(mid + half * t))[0])
    roots_of: dict[Boundary, np.ndarray | None] = {}

    def roots(b: Boundary) -> np.ndarray | None:
        if b not in roots_of:
            found: list[np.ndarray] = []
            for g in guardians(coeffs, b):  # type: ignore[arg-type]
                r = real_roots(g.coeffs, g.factor)
                if r is None:
                    roots_of[b] = None
                    return None
                found.append(r)
            roots_of[b] = mid + half * np.concatenate(found) if found else np.zeros(0)
        return roots_of[b]

    out = []
    stability = len(ev.checks)
    for i, check in enumerate(ev.checks):
        exact = coeffs is not None and check.boundaries is not None
        points: list[float] = []
        if exact:
            bounds = list(check.boundaries or ())
            if check.sample_unstable:
                bounds.append(Boundary("circle", 1.0) if box.discrete
                              else Boundary("abscissa", 0.0))
            for b in bounds:
                r = roots(b)
                if r is None:
                    exact = False
                    break
                points.extend(r.tolist())
        m = lambda p, i=i: float(ev(line.point(p))[i])  # noqa: E731
        if exact:
            out.append(_exact(m, lambda p: float(ev(line.point(p))[stability]), lo, hi,
                              sorted(set(points)), check.sample_unstable))
        else:
            out.append(_sampled(m, lo, hi))
    return out


def _refine(m: Callable[[float], float], r: float, lo: float, hi: float) -> tuple[float, bool]:
    """A root of the guardian refined to where the margin changes sign, when it does."""
    from scipy.optimize import brentq

    for h in (1e-7, 1e-5, 1e-3):
        step = h * (hi - lo)
        a, b = max(lo, r - step), min(hi, r + step)
        fa, fb = m(a), m(b)
        if fa == 0.0:
            return a, True
        if fb == 0.0:
            return b, True
        if (fa < 0) != (fb < 0):
            return brentq(m, a, b, xtol=1e-15 * max(1.0, abs(r)), rtol=1e-15,
                          maxiter=200), True
    return r, False


def _minimise(m: Callable[[float], float], a: float, b: float) -> tuple[float, float]:
    from scipy.optimize import minimize_scalar

    if b - a <= 1e-14 * max(1.0, abs(a), abs(b)):
        return m(a), a
    res = minimize_scalar(m, bounds=(a, b), method="bounded",
                          options={"xatol": 1e-10 * (b - a), "maxiter": 200})
    return float(res.fun), float(res.x)


def _exact(m: Callable[[float], float], stab: Callable[[float], float], lo: float, hi: float,
           roots: list[float], sample_unstable: bool) -> _Interval:
    refined, crossings = [], []
    for r in roots:
        x, crosses = _refine(m, r, lo, hi)
        refined.append(x)
        if crosses:
            crossings.append(x)
    cuts = sorted({lo, hi, *refined})
    cand = [(m(x), x) for x in cuts]
    proven = True
    subs = list(zip(cuts[:-1], cuts[1:]))
    mids = [(m((a + b) / 2), a, b) for a, b in subs]
    cand += [(v, (a + b) / 2) for v, a, b in mids]
    for v, a, b in sorted(mids)[:3]:  # the worst sub-intervals: search their minimum
        cand.append(_minimise(m, a, b))
    if sample_unstable:
        for a, b in subs:
            if stab((a + b) / 2) < 0:
                s = _sampled(m, a, b, SAMPLES_1D // 4)
                cand.append((s.worst, s.at))
                crossings += s.crossings
                proven = False
    worst, at = min(cand)
    return _Interval(worst, at, proven, sorted(set(crossings)))


def _sampled(m: Callable[[float], float], lo: float, hi: float,
             count: int = SAMPLES_1D) -> _Interval:
    from scipy.optimize import brentq

    grid = np.linspace(lo, hi, count)
    vals = [m(float(x)) for x in grid]
    crossings = [brentq(m, grid[k], grid[k + 1], xtol=1e-15 * max(1.0, abs(grid[k])),
                        rtol=1e-15) for k in range(count - 1)
                 if (vals[k] < 0) != (vals[k + 1] < 0)]
    k = int(np.argmin(vals))
    cand = [(vals[k], float(grid[k])),
            _minimise(m, float(grid[max(k - 1, 0)]), float(grid[min(k + 1, count - 1)]))]
    worst, at = min(cand)
    return _Interval(worst, at, False, crossings)


# ------------------------------------------------------------------ the box

def search(box: ParameterBox, checks: Sequence[Check], samples: int | None = None) -> Search:
    """The worst margin of each check over the box (see the module notes)."""
    ev = _Evaluator(box, checks)
    k = len(box.names)
    lows, highs = np.array(box.low), np.array(box.high)
    if k == 1:
        res = sweep(ev, _Line(box.nominal, 0, box.low[0], box.high[0]))
        answers = tuple(Worst(r.worst, (r.at,), r.proven, tuple((c,) for c in r.crossings),
                              ("one parameter: " + ("exact (guardian maps)" if r.exact
                                                    else "sampled (no algebraic boundary, "
                                                    "or not polynomial in the parameter)"),))
                        for r in res)
        return Search(answers, len(ev.cache))
    best: list[tuple[float, tuple[float, ...]]] = [(math.inf, ())] * len(checks)
    edges_exact = [True] * len(checks)
    crossings: list[list[tuple[float, ...]]] = [[] for _ in checks]
    n_edges = 0
    for axis in range(k):
        others = [a for a in range(k) if a != axis]
        for corner in itertools.product((0, 1), repeat=k - 1):
            start = list(box.low)
            for a, c in zip(others, corner):
                start[a] = box.high[a] if c else box.low[a]
            line = _Line(tuple(start), axis, box.low[axis], box.high[axis])
            n_edges += 1
            for i, r in enumerate(sweep(ev, line)):
                edges_exact[i] &= r.exact
                crossings[i] += [line.point(c) for c in r.crossings]
                if r.worst < best[i][0]:
                    best[i] = (r.worst, line.point(r.at))
    per = samples or max(3, int(round(GRID_POINTS ** (1 / k))))
    axes = [np.linspace(lo, hi, per) for lo, hi in zip(box.low, box.high)]
    grid = [tuple(float(v) for v in p) for p in itertools.product(*axes)]
    values = np.array([ev(p)[:len(checks)] for p in grid])
    from scipy.optimize import minimize

    for i in range(len(checks)):
        order = np.argsort(values[:, i], kind="stable")[:3]
        cand = [best[i], *((float(values[j, i]), grid[j]) for j in order)]
        for j in order:
            res = minimize(lambda x, i=i: float(ev(np.clip(x, lows, highs))[i]),
                           np.array(grid[j]), method="Powell",
                           bounds=list(zip(box.low, box.high)),
                           options={"xtol": 1e-10, "ftol": 1e-13, "maxfev": 300})
            x = tuple(float(v) for v in np.clip(res.x, lows, highs))
            cand.append((float(ev(x)[i]), x))
        best[i] = min(cand)
    out = []
    for i in range(len(checks)):
        worst, at = best[i]
        edges = f"{2 ** k} vertices and {n_edges} edges: " + (
            "exact (guardian maps)" if edges_exact[i] else "sampled where not algebraic")
        interior = (f"interior: sampled ({len(grid)}-point grid and local minimisation from "
                    "the 3 worst points), not proven")
        out.append(Worst(worst, at, worst < 0, tuple(crossings[i]), (edges, interior)))
    return Search(tuple(out), len(ev.cache))

