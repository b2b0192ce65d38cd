"""Transient growth ``max_{t≥0} ‖e^{At}‖₂`` (discrete ``max_k ‖A^k‖₂``) with a certified-style
bracket and the time of the peak, and the growth curve for plots (Trefethen & Embree, Spectra
and Pseudospectra, 2005, ch. 14–16). The method is described in
:mod:`eigengate.analysis.robustness`, whose brackets and input checks it shares.
"""

from __future__ import annotations

import math

import numpy as np

from .brackets import (EPS, MAX_STEPS, UPPER_RTOL, WORK, Bracket, NotApplicable, _backward, _spectrum,
                         _stable, _standard)

__all__ = ["transient_growth", "growth_curve"]


def _norm2(X: np.ndarray) -> float:
    return float(np.linalg.svd(X, compute_uv=False)[0])


def _tail_factor(M: np.ndarray, discrete: bool) -> float:
    """√κ(P) of the Lyapunov solution: ``‖e^{At}x‖_P`` (``‖A^k x‖_P``) never increases."""
    import scipy.linalg as la

    n = M.shape[0]
    if discrete:
        P = la.solve_discrete_lyapunov(M.T, np.eye(n))
    else:
        P = la.solve_continuous_lyapunov(M.T, -np.eye(n))
    w = np.linalg.eigvalsh((P + P.T) / 2.0)
    if w[0] <= 0.0:
        return math.inf
    return math.sqrt(float(w[-1] / w[0])) * (1.0 + 1e3 * n * EPS * float(w[-1] / w[0]))


def transient_growth(A: object, *, E: object | None = None, sample_period: float | None = None,
                     rtol: float = 1e-6) -> Bracket:
    """``max_{t≥0} ‖e^{At}‖₂`` (discrete: ``max_k ‖A^k‖₂``) of ``E⁻¹A``; ``at = (t_peak,)`` in
    seconds (discrete: ``(k_peak,)`` steps). Infinite when A is not asymptotically stable."""
    M = _standard(A, E)
    n = M.shape[0]
    discrete = sample_period is not None
    _, level = _spectrum(M, discrete)
    if not _stable(level, discrete):
        return Bracket(math.inf, math.inf, math.inf, (math.inf,), "spectrum", 0,
                       ("A is not stable",))
    if discrete:
        return _growth_discrete(M)
    mu = float(np.linalg.eigvalsh((M + M.T) / 2.0)[-1])
    if mu <= -_backward(M):
        return Bracket(1.0, 1.0, 1.0, (0.0,), "contractive: logarithmic norm μ₂(A) < 0", 0,
                       ("‖e^{At}‖ ≤ e^{μ₂(A)t} ≤ 1, attained at t = 0",))
    return _growth_continuous(M, max(mu, 0.0), rtol)


def _step_limit(n: int) -> int:
    return max(100, min(MAX_STEPS, int(WORK / float(n) ** 3)))


def _growth_discrete(M: np.ndarray) -> Bracket:
    n = M.shape[0]
    method = "powers ‖A^k‖ + discrete Lyapunov tail bound"
    if _norm2(M) <= 1.0 - _backward(M):
        return Bracket(1.0, 1.0, 1.0, (0.0,), "contractive: ‖A‖₂ < 1", 0)
    tail = _tail_factor(M, True)
    X, best, k_best, k = np.eye(n), 1.0, 0, 0
    f, limit = 1.0, _step_limit(n)
    while tail * f > best and k < limit:
        X, k = X @ M, k + 1
        f = _norm2(X)
        if f > best:
            best, k_best = f, k
    slack = 10.0 * n * EPS * max(k_best, 1) * best
    upper = max(best + slack, tail * f)
    notes = () if k < limit else (f"stopped after {limit} powers: tail bound used",)
    return Bracket(best, max(1.0, best - slack), upper, (float(k_best),), method, k, notes)


def _growth_continuous(M: np.ndarray, mu: float, rtol: float) -> Bracket:
    import scipy.linalg as la
    from scipy.optimize import minimize_scalar

    n = M.shape[0]
    norm_a = _norm2(M)
    tail = _tail_factor(M, False)
    utol, limit = max(rtol, UPPER_RTOL), _step_limit(n)
    h0 = 0.5 * math.sqrt(utol) / norm_a
    powers = [la.expm(M * h0)]

    def step(j: int) -> np.ndarray:
        while len(powers) <= j:
            powers.append(powers[-1] @ powers[-1])
        return powers[j]

    def r2(x: float) -> float:
        return math.expm1(x) - x

    X, t, f = np.eye(n), 0.0, 1.0
    best, t_best, upper, steps = 1.0, 0.0, 1.0, 0
    trail: list[tuple[float, float]] = [(0.0, 1.0)]
    while tail * f > best * (1.0 + utol) and steps < limit:
        target = best * (1.0 + utol)
        h1 = math.log(target / f) / mu if mu > 0.0 else math.inf
        h2 = math.sqrt(utol * best / f) / norm_a
        j = max(0, int(math.floor(math.log2(max(max(h1, h2) / h0, 1.0)))))
        j = min(j, 60)
        h = h0 * 2.0 ** j
        X_next = X @ step(j)
        f_next = _norm2(X_next)
        seg = min(f * math.exp(mu * h) if mu * h < 700 else math.inf,
                  max(f, f_next) + 2.0 * f * r2(norm_a * h))
        upper = max(upper, seg)
        X, t, f, steps = X_next, t + h, f_next, steps + 1
        trail.append((t, f))
        if f > best:
            best, t_best = f, t
    upper = max(upper, tail * f)
    k = max(i for i, (tt, _) in enumerate(trail) if tt == t_best)
    a_t = trail[max(k - 1, 0)][0]
    b_t = trail[min(k + 1, len(trail) - 1)][0]
    base = la.expm(M * a_t)
    if b_t > a_t:
        res = minimize_scalar(lambda s: -_norm2(base @ la.expm(M * s)), bounds=(0.0, b_t - a_t),
                              method="bounded", options={"xatol": math.sqrt(rtol) * (b_t - a_t)})
        if -res.fun > best:
            best, t_best = float(-res.fun), a_t + float(res.x)
    slack = 10.0 * n * EPS * (1.0 + steps) * best
    notes = ["upper bound: logarithmic-norm and second-order step bounds, Lyapunov tail "
             f"factor √κ(P) = {tail:.4g}"]
    if steps >= limit:
        notes.append(f"stopped after {limit} steps: tail bound used")
    return Bracket(best, max(1.0, best - slack), max(upper + slack, best), (t_best,),
                   "expm steps + log-norm/Lyapunov bounds (Trefethen & Embree ch. 14-16)",
                   steps, tuple(notes))


def growth_curve(A: object, times: object, *, E: object | None = None,
                 sample_period: float | None = None) -> np.ndarray:
    """``‖e^{At}‖₂`` at the given times (discrete: ``‖A^k‖₂`` at the given integer steps)."""
    import scipy.linalg as la

    M = _standard(A, E)
    ts = np.asarray(times, dtype=float).ravel()
    if sample_period is not None:
        if np.any(ts < 0) or np.any(ts != np.round(ts)):
            raise NotApplicable("times: discrete steps must be non-negative integers")
        return np.array([_norm2(np.linalg.matrix_power(M, int(k))) for k in ts])
    return np.array([_norm2(la.expm(M * t)) for t in ts])
