"""The ε-pseudospectral abscissa (discrete: radius) by criss-cross searches (Burke, Lewis &
Overton 2003; Mengi & Overton 2005), and σ_min grids for the report's level curves. The
method is described in :mod:`eigengate.analysis.robustness`, whose brackets, input checks and
Schur-form σ_min it shares.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .brackets import EPS, MAX_SWEEPS, Bracket, NotApplicable, _standard, _Triangular

__all__ = ["pseudospectral_abscissa", "sigma_min_grid"]


def sigma_min_grid(A: object, xs: object, ys: object, *, E: object | None = None) -> np.ndarray:
    """``σ_min(E⁻¹A − (x+iy)I)`` on the grid, shape ``(len(ys), len(xs))``: batched SVDs of
    the shifted matrices for small models (one LAPACK call per chunk of grid points), the
    Schur form's inverse iteration per point for larger ones."""
    M = _standard(A, E)
    xv, yv = np.asarray(xs, dtype=float).ravel(), np.asarray(ys, dtype=float).ravel()
    n = M.shape[0]
    if n <= 64:
        z = (xv[None, :] + 1j * yv[:, None]).ravel()
        out = np.empty(z.size)
        step = max(1, 200_000 // max(n * n, 1))
        eye = np.eye(n)
        for i in range(0, z.size, step):
            shifted = M[None, :, :] - z[i:i + step, None, None] * eye[None]
            out[i:i + step] = np.linalg.svd(shifted, compute_uv=False)[:, -1]
        return out.reshape(yv.size, xv.size)
    tri = _Triangular(M)
    return np.array([[tri.smin(complex(x, y)) for x in xv] for y in yv]).reshape(yv.size, xv.size)


def _vertical(M: np.ndarray, x: float, eps: float) -> tuple[list[float], list[float]]:
    n = M.shape[0]
    S = M - x * np.eye(n)
    H = np.block([[S, -eps * np.eye(n)], [eps * np.eye(n), -S.T]])
    mu = np.linalg.eigvals(H)
    width = float(np.linalg.norm(H)) + np.abs(mu)
    hard = np.abs(mu.real) <= 100.0 * 2 * n * EPS * width
    soft = ~hard & (np.abs(mu.real) <= math.sqrt(EPS) * width)
    return sorted(set(mu.imag[hard].tolist())), sorted(set(mu.imag[soft].tolist()))


def _circular(M: np.ndarray, r: float, eps: float) -> tuple[list[float], list[float]]:
    import scipy.linalg as la

    n = M.shape[0]
    I_n, Z = np.eye(n), np.zeros((n, n))
    P = np.block([[M, -eps * I_n], [Z, r * I_n]])
    Q = np.block([[r * I_n, Z], [-eps * I_n, M.T]])
    mu = la.eigvals(P, Q)
    mu = mu[np.isfinite(mu)]
    width = (float(np.linalg.norm(P) + np.linalg.norm(Q))) * (1.0 + np.abs(mu))
    dist = np.abs(np.abs(mu) - 1.0)
    hard = dist <= 100.0 * 2 * n * EPS * width
    soft = ~hard & (dist <= math.sqrt(EPS) * width)
    return sorted(set(np.angle(mu[hard]).tolist())), sorted(set(np.angle(mu[soft]).tolist()))


def pseudospectral_abscissa(A: object, epsilon: float, *, E: object | None = None,
                            sample_period: float | None = None, rtol: float = 1e-9) -> Bracket:
    """ε-pseudospectral abscissa ``max{Re z : σ_min(A − zI) ≤ ε}`` of ``E⁻¹A`` by criss-cross
    (discrete: the ε-pseudospectral radius ``max |z|``); ``at = (Re z, Im z)`` of the point."""
    M = _standard(A, E)
    eps = float(epsilon)
    if not (eps > 0.0 and math.isfinite(eps)):
        raise NotApplicable(f"epsilon: expected a positive finite number, found {epsilon!r}")
    tri = _Triangular(M)
    lam = tri.eigenvalues()
    discrete = sample_period is not None
    k = int(np.argmax(np.abs(lam) if discrete else lam.real))
    w0 = float(np.angle(lam[k])) if discrete else abs(float(lam[k].imag))
    spectral = float(np.abs(lam[k]) if discrete else lam[k].real)
    search = _CrissCross(M, tri, eps, rtol, spectral, discrete)
    start = search.outward(w0, spectral)
    return search.run(max(start, spectral), w0)


@dataclass
class _CrissCross:
    """State of a criss-cross (or radial/circular) search; ``run`` returns the bracket."""

    M: np.ndarray
    tri: _Triangular
    eps: float
    rtol: float
    spectral: float                 # spectral abscissa (or radius)
    discrete: bool
    memo: dict[str, float] = field(default_factory=dict)

    def cut(self, level: float) -> tuple[list[float], list[float]]:
        if self.discrete:
            return _circular(self.M, level, self.eps)
        return _vertical(self.M, level, self.eps)

    def point(self, level: float, w: float) -> complex:
        return level * complex(math.cos(w), math.sin(w)) if self.discrete else complex(level, w)

    def outward(self, w: float, start: float) -> float:
        """A boundary point further out along the line (ray) ``w`` from an inside ``start``:
        Brent on ``σ_min − ε``, bracketed by ``σ_min(A − zI) ≥ Re z − μ₂(A)`` (``≥ |z| − ‖A‖``)."""
        from scipy.optimize import brentq

        if not self.inside(start, w):
            return -math.inf
        far = self.far()
        if far <= start:
            return start

        def g(level: float) -> float:
            return self.tri.smin(self.point(level, w)) - self.eps

        scale = max(abs(start), abs(self.spectral), self.eps)
        return float(brentq(g, start, far, xtol=0.25 * self.rtol * scale, rtol=4 * EPS))

    def far(self) -> float:
        if "far" not in self.memo:
            top = (float(np.linalg.norm(self.M, 2)) if self.discrete
                   else float(np.linalg.eigvalsh((self.M + self.M.T) / 2.0)[-1]))
            self.memo["far"] = top + 2.0 * self.eps
        return self.memo["far"]

    def inside(self, level: float, w: float) -> bool:
        return self.tri.smin(self.point(level, w)) <= self.eps

    def middles(self, ws: list[float]) -> list[float]:
        mids = [(a + b) / 2.0 for a, b in zip(ws, ws[1:])]
        if self.discrete and ws:
            wrap = (ws[-1] + ws[0] + 2.0 * math.pi) / 2.0
            mids.append(wrap - 2.0 * math.pi if wrap > math.pi else wrap)
        return mids

    def run(self, level: float, w_best: float) -> Bracket:
        """Probe a line (circle) just outside the level: no crossing proves the upper bound;
        otherwise search outwards from the midpoints of the crossings inside (BLO 2003)."""
        scale = max(abs(level), abs(self.spectral), self.eps, 1e-300)
        widen, sweeps, notes = 0, 0, []
        upper = math.inf
        while sweeps < MAX_SWEEPS:
            sweeps += 1
            probe = level + 2.0 * self.rtol * scale * 4.0 ** widen
            hard, soft = self.cut(probe)
            caught = [w for w in soft if self.inside(probe, w)]
            if not hard and not caught:
                upper = probe
                break
            ws = sorted(set(hard))
            cands = [w for w in self.middles(ws) if self.inside(probe, w)] + caught or ws
            if not self.discrete:
                cands = sorted({abs(w) for w in cands})
            gained = False
            for w in cands:
                x = self.outward(w, probe)
                gained = gained or x > level + 0.5 * self.rtol * scale
                if x > level:
                    level, w_best = x, w
            if gained:
                widen = 0
            else:
                widen += 1
                if widen == 1:
                    notes.append("crossings of the probe raised no point: probe moved out")
        if not math.isfinite(upper):
            notes.append(f"no certified probe after {MAX_SWEEPS} sweeps: upper bound infinite")
        lower, z = self.verified(level, w_best)
        method = ("radial/circular search (Mengi-Overton)" if self.discrete
                  else "criss-cross (Burke-Lewis-Overton)")
        return Bracket(level, lower, max(upper, level), (z.real, z.imag), method, sweeps,
                       tuple(notes))

    def verified(self, level: float, w: float) -> tuple[float, complex]:
        """Step inwards until ``σ_min + rounding ≤ ε`` at the point: a proven lower bound."""
        n = self.M.shape[0]
        norm = float(np.linalg.norm(self.M))
        step = 4.0 * 10.0 * n * EPS * (norm + abs(self.point(level, w))) + EPS * abs(level)
        for _ in range(80):
            cand = level - step
            z = self.point(cand, w)
            err = 10.0 * n * EPS * (norm + abs(z))
            if self.tri.smin(z) + err <= self.eps:  # smin is never below σ_min
                return (abs(z) if self.discrete else z.real), self.point(level, w)
            step *= 2.0
        return (self.spectral, self.point(level, w))
