"""Robustness figures beyond the eigenvalues: distance to instability, H∞ norm, transient
growth and pseudospectra, each returned as a :class:`Bracket` (estimate, proven bounds, where
the extreme lies, the method, the iterations).

**H∞ norm and complex stability radius** (:func:`hinf_norm`, :func:`stability_radius`): the
level-set method of Boyd & Balakrishnan (Systems Control Lett. 1990) and Bruinsma & Steinbuch
(Systems Control Lett. 1990). ``γ`` is a singular value of ``G(iω) = C(iωI − A)⁻¹B + D`` iff
``iω`` is an eigenvalue of the Hamiltonian ``[[A, BBᵀ/γ], [−CᵀC/γ, −Aᵀ]]`` (``D = 0``; with
``D`` the extended pencil in ``x, y, u, v``); on the unit circle, iff ``e^{iθ}`` is a
generalized eigenvalue of the symplectic pencil ``[[A, BBᵀ/γ], [0, I]] − z[[I, 0], [CᵀC/γ, Aᵀ]]``.
Starting from ``σ̄`` at ω = 0, ∞ and the pole frequencies, the test at ``γ = (1 + 2 rtol)·lower``
returns the frequencies where ``σ̄(G) = γ``; ``σ̄`` at their midpoints raises the lower bound
(quadratic convergence). The lower bound is a ``σ̄`` evaluated at a frequency (less its
rounding allowance); the upper bound is a level at which the test finds no eigenvalue on the
axis (circle). Eigenvalues within ``100·N·eps·‖H‖`` of the axis count as on it; those within
``√eps·‖H‖`` are checked by evaluating ``σ̄`` at their frequency, which catches the crossings
that rounding pushes off the axis near a tangency. The radius ``min_ω σ_min(A − iωI)`` is
``1/‖(sI − A)⁻¹‖∞`` (Hinrichsen & Pritchard 1986); its lower bound needs the stability of ``A``,
which the test itself proves when ``1/γ`` exceeds twice the backward error of the eigenvalues.

**Real structured radius** (:func:`real_stability_radius`): Qiu, Bernhardsson, Rantzer,
Davison, Young & Doyle (Automatica 1995), ``r_R = [sup_ω μ_R(G(iω))]⁻¹`` with ``μ_R(M) =
inf_{γ∈(0,1]} σ₂([[Re M, −γ Im M], [γ⁻¹ Im M, Re M]])``, unimodal in γ (golden section in log γ,
bounded below by Weyl's inequality on the final bracket). The frequency sup is *sampled*
(grid, pole frequencies, the complex peak, local refinement); the proven lower bound is the
complex radius (``r_R ≥ r_C``).

**Transient growth** (:func:`transient_growth`; Trefethen & Embree, Spectra and Pseudospectra,
2005, ch. 14–16): ``max_t ‖e^{At}‖₂`` by steps ``e^{A(t+h)} = e^{At}e^{Ah}`` with ``h`` from the
powers of one ``expm`` by squaring. Between steps ``‖e^{A(t+s)}‖ ≤ ‖e^{At}‖e^{μ₂(A)s}`` (the
logarithmic norm) or, to second order, ``≤ max(‖e^{At}‖, ‖e^{A(t+h)}‖) + 2‖e^{At}‖r₂(‖A‖h)`` with
``r₂(x) = eˣ − 1 − x`` (convexity of ``‖X(I + As)‖`` in s); after T, ``‖e^{At}‖ ≤ √κ(P)·‖e^{AT}‖``
with ``AᵀP + PA = −I``. The peak is refined by bounded Brent. Discrete: ``max_k ‖A^k‖₂`` exactly
over the steps until the tail bound with ``AᵀPA − P = −I`` is below the peak.

**Pseudospectral abscissa** (:func:`pseudospectral_abscissa`): criss-cross of Burke, Lewis &
Overton (IMA J. Numer. Anal. 2003). Vertical search at x: the imaginary eigenvalues ``iy`` of
``[[A − xI, −εI], [εI, −(A − xI)ᵀ]]`` are the y where ε is a singular value of ``A − (x+iy)I``;
horizontal search at y: the largest real eigenvalue of ``[[A − iyI, −εI], [−εI, (A − iyI)ᴴ]]``.
The lower bound is Re z of a point with ``σ_min(A − zI) + rounding ≤ ε``; the upper bound is a
vertical line right of every eigenvalue that no level curve crosses (every component of the
pseudospectrum holds an eigenvalue). Discrete: the pseudospectral radius of Mengi & Overton
(IMA J. Numer. Anal. 2005): radial searches (the horizontal search of ``e^{−iθ}A``) and
circular searches (``e^{iθ}`` eigenvalues of ``[[A, −εI], [0, rI]] − z[[rI, 0], [−εI, Aᵀ]]``).

**Descriptor models** ``E x' = Ax`` with invertible E: the radius is that of perturbations of
A, ``min_ω σ_min(A − iωE)`` (structure B = E⁻¹, C = I on ``E⁻¹A``); growth and pseudospectra
are those of ``E⁻¹A``. A singular E raises :class:`NotApplicable`. Everything is
deterministic: no random starts.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from .brackets import (EPS, MAX_SWEEPS, REAL_GRID, Bracket, NotApplicable, _matrix, _spectrum,
                       _square, _stable, _Triangular)

__all__ = ["Bracket", "NotApplicable", "hinf_norm", "stability_radius", "real_stability_radius"]

# Transient growth is in :mod:`eigengate.analysis.growth`, pseudospectra in
# :mod:`eigengate.analysis.pseudospectra`; all three build on :mod:`eigengate.analysis.brackets`.

# ------------------------------------------------------------------ level sets (H∞, radii)


@dataclass(frozen=True)
class _Plant:
    A: np.ndarray
    B: np.ndarray
    C: np.ndarray
    D: np.ndarray
    discrete: bool


def _crossings(p: _Plant, gamma: float) -> tuple[list[float], list[float]]:
    """Frequencies (ω ≥ 0, or θ ∈ [0, π]) where γ is a singular value of G: (on the axis or
    circle within rounding, suspected: off it by less than √eps relative)."""
    import scipy.linalg as la

    n, m, q = p.A.shape[0], p.B.shape[1], p.C.shape[0]
    zero = not np.any(p.D)
    if zero:
        BB, CC = p.B @ p.B.T / gamma, p.C.T @ p.C / gamma
        if p.discrete:
            M = np.block([[p.A, BB], [np.zeros((n, n)), np.eye(n)]])
            N = np.block([[np.eye(n), np.zeros((n, n))], [CC, p.A.T]])
        else:
            M, N = np.block([[p.A, BB], [-CC, -p.A.T]]), None
    else:
        Z = np.zeros
        I_n, g = np.eye(n), gamma
        if p.discrete:
            M = np.block([[p.A, Z((n, n)), p.B, Z((n, q))], [Z((n, n)), I_n, Z((n, m)), Z((n, q))],
                          [p.C, Z((q, n)), p.D, -g * np.eye(q)],
                          [Z((m, n)), p.B.T, -g * np.eye(m), p.D.T]])
            N = np.block([[I_n, Z((n, n + m + q))], [Z((n, n)), p.A.T, Z((n, m)), p.C.T],
                          [Z((m + q, 2 * n + m + q))]])
        else:
            M = np.block([[p.A, Z((n, n)), p.B, Z((n, q))],
                          [Z((n, n)), -p.A.T, Z((n, m)), -p.C.T],
                          [p.C, Z((q, n)), p.D, -g * np.eye(q)],
                          [Z((m, n)), p.B.T, -g * np.eye(m), p.D.T]])
            N = np.diag(np.r_[np.ones(2 * n), np.zeros(m + q)])
    mu = np.linalg.eigvals(M) if N is None else la.eigvals(M, N)
    mu = mu[np.isfinite(mu)]
    scale = float(np.linalg.norm(M) + (0.0 if N is None else np.linalg.norm(N)))
    if p.discrete:
        dist, freq = np.abs(np.abs(mu) - 1.0), np.abs(np.angle(mu))
        width = scale * (1.0 + np.abs(mu))
    else:
        dist, freq, width = np.abs(mu.real), np.abs(mu.imag), scale + np.abs(mu)
    hard = dist <= 100.0 * M.shape[0] * EPS * width
    soft = ~hard & (dist <= math.sqrt(EPS) * width)
    return sorted(set(freq[hard].tolist())), sorted(set(freq[soft].tolist()))


def _level_set(value: Callable[[float], float], p: _Plant, starts: list[float], rtol: float,
               floor: float = 0.0) -> tuple[float, float, float, int, list[str]]:
    """Boyd–Balakrishnan iteration: (lower, its frequency, proven upper, sweeps, notes).
    ``floor`` is ``σ̄(D)``, the limit at infinite frequency (frequency ``inf``)."""
    best_w = max(starts, key=value)
    lower = value(best_w)
    if floor > lower:
        lower, best_w = floor, math.inf
    notes: list[str] = []
    if lower == 0.0:
        if not np.any(p.B) or not np.any(p.C):
            return 0.0, best_w, 0.0, 0, ["G is identically zero (B or C is zero)"]
        # σ̄(G) vanished at every start (zeros of G there): any positive level will do
        lower, best_w = 0.0, starts[0]
        gamma = 1e-300
        hard, _ = _crossings(p, max(gamma, 1e-150))
        if not hard:
            return 0.0, best_w, 1e-150, 0, ["σ̄(G) ≤ 1e-150 at every frequency"]
        best_w = max(hard, key=value)
        lower = value(best_w)
        if lower == 0.0:
            return 0.0, best_w, math.inf, 0, ["σ̄(G) vanished where evaluated: not certified"]
    if not math.isfinite(lower):
        return lower, best_w, lower, 0, ["σ̄(G) is infinite at a frequency"]
    forming = (2 * p.A.shape[0] + p.B.shape[1] + p.C.shape[0]) * EPS
    widen, gamma = 0, lower * (1.0 + 2.0 * rtol)
    for sweep in range(1, MAX_SWEEPS + 1):
        hard, soft = _crossings(p, gamma)
        ends = sorted(set(hard) | {0.0} | ({math.pi} if p.discrete else set()))
        points = hard + soft + [(a + b) / 2.0 for a, b in zip(ends, ends[1:])]
        vals = [(value(w), w) for w in points]
        top, top_w = max(vals) if vals else (0.0, best_w)
        gained = top > lower * (1.0 + 0.5 * rtol)
        if top > lower:
            lower, best_w = top, top_w
        if not hard and top < gamma:
            return lower, best_w, gamma * (1.0 + 100.0 * forming), sweep, notes
        if gained:
            widen, gamma = 0, max(gamma, lower * (1.0 + 2.0 * rtol))
        else:
            widen += 1
            gamma = max(gamma, lower) * (1.0 + 2.0 * rtol * 4.0 ** widen)
            if widen == 1:
                notes.append("crossings that raised no σ̄ at their midpoints: level widened")
    notes.append(f"no certified level after {MAX_SWEEPS} sweeps: upper bound infinite")
    return lower, best_w, math.inf, MAX_SWEEPS, notes


def _starts(lam: np.ndarray, discrete: bool) -> list[float]:
    """ω = 0 (θ = 0, π) and the frequencies of the least damped poles."""
    if discrete:
        freq = np.abs(np.angle(lam))
        order = np.argsort(-np.abs(lam), kind="stable")
        return sorted({0.0, math.pi, *freq[order[:12]].tolist()})
    mag = np.maximum(np.abs(lam), 1e-300)
    order = np.argsort(np.abs(lam.real) / mag, kind="stable")
    picks = np.abs(lam.imag[order[:8]]).tolist()
    near = np.argsort(np.abs(lam.real), kind="stable")[:8]
    corners = [float(np.min(np.abs(lam))), float(np.max(np.abs(lam)))]  # real poles' corners
    return sorted({0.0, *picks, *np.abs(lam.imag[near]).tolist(), *corners})


def _point(w: float, discrete: bool) -> complex:
    return complex(math.cos(w), math.sin(w)) if discrete else complex(0.0, w)


def _freq(w: float, T: float | None) -> tuple[float, ...]:
    return (w / T,) if T else (w,)


def _unstable_at(lam: np.ndarray, T: float | None) -> tuple[float, ...]:
    """The frequency of the rightmost (outermost) eigenvalue, rad/s."""
    k = int(np.argmax(np.abs(lam) if T else lam.real))
    return _freq(abs(float(np.angle(lam[k]))) if T else abs(float(lam[k].imag)), T)


def _gain(p: _Plant) -> Callable[[float], float]:
    n = p.A.shape[0]

    def value(w: float) -> float:
        M = _point(w, p.discrete) * np.eye(n) - p.A
        try:
            X = np.linalg.solve(M, p.B)
        except np.linalg.LinAlgError:
            return math.inf
        G = p.C @ X + p.D
        return float(np.linalg.svd(G, compute_uv=False)[0]) if G.size else 0.0

    return value


METHOD_C = "Hamiltonian level set (Boyd-Balakrishnan / Bruinsma-Steinbuch)"
METHOD_D = "symplectic pencil level set on the unit circle (Boyd-Balakrishnan)"


def hinf_norm(A: object, B: object, C: object, D: object | None = None, *,
              E: object | None = None, sample_period: float | None = None,
              rtol: float = 1e-9) -> Bracket:
    """``‖C(sE − A)⁻¹B + D‖∞`` (discrete: sup over the unit circle), ``at = (ω,)`` in rad/s.

    Infinite (bracket [inf, inf]) when A is not asymptotically stable; when the poles' margin
    is within rounding, the upper bound is infinite and a note says so.
    """
    M, En = _square(A, E)
    n = M.shape[0]
    Bm = _matrix("B", B, n)
    Cm = _matrix("C", C, None, n)
    Dm = np.zeros((Cm.shape[0], Bm.shape[1])) if D is None else \
        _matrix("D", D, Cm.shape[0], Bm.shape[1])
    if En is not None:
        M, Bm = np.linalg.solve(En, M), np.linalg.solve(En, Bm)
    discrete = sample_period is not None
    method = METHOD_D if discrete else METHOD_C
    lam, level = _spectrum(M, discrete)
    if not _stable(level, discrete):
        return Bracket(math.inf, math.inf, math.inf, _unstable_at(lam, sample_period), method,
                       0, ("A is not stable",))
    p = _Plant(M, Bm, Cm, Dm, discrete)
    value = _gain(p)
    d_top = float(np.linalg.svd(Dm, compute_uv=False)[0]) if Dm.size else 0.0
    low, w, up, sweeps, notes = _level_set(value, p, _starts(lam, discrete), rtol, d_top)
    kappa = 1.0
    if math.isfinite(w) and low > 0.0:
        kappa = float(np.linalg.cond(_point(w, discrete) * np.eye(n) - M))
    slack = 10.0 * n * EPS * kappa
    lower = low * (1.0 - slack) if slack < 0.5 else 0.0
    margin = (1.0 - level) if discrete else -level
    if margin <= 1e3 * n * EPS * max(1.0, float(np.linalg.norm(M))):
        up, notes = math.inf, notes + ["stability of A within rounding: upper bound infinite"]
    at = (math.inf,) if not math.isfinite(w) else _freq(w, sample_period)
    return Bracket(low, lower, max(up, low), at, method, sweeps, tuple(notes))


def stability_radius(A: object, *, E: object | None = None, sample_period: float | None = None,
                     B: object | None = None, C: object | None = None,
                     rtol: float = 1e-9) -> Bracket:
    """Complex stability radius: ``min_ω σ_min(A − iωE)`` (discrete: ``min_θ σ_min(A − e^{iθ}E)``)
    or, with B and C, ``1/‖C(sE − A)⁻¹B‖∞`` for perturbations ``A + BΔC``. 0 when A is not
    asymptotically stable; ``at = (ω,)`` rad/s (discrete ``θ/T``)."""
    M, En = _square(A, E)
    n = M.shape[0]
    discrete = sample_period is not None
    method = METHOD_D if discrete else METHOD_C
    Ms = M if En is None else np.linalg.solve(En, M)
    structured = B is not None or C is not None
    tri = None if structured else _Triangular(M, En)
    lam = _spectrum(Ms, discrete)[0] if tri is None else tri.eigenvalues()
    level = float(np.max(np.abs(lam)) if discrete else np.max(lam.real))
    if not _stable(level, discrete):
        return Bracket(0.0, 0.0, 0.0, _unstable_at(lam, sample_period), method, 0,
                       ("A is not stable",))
    if tri is None:
        Bm = np.eye(n) if B is None else _matrix("B", B, n)
        Cm = np.eye(n) if C is None else _matrix("C", C, None, n)
        norm = hinf_norm(M, Bm, Cm, E=En, sample_period=sample_period, rtol=rtol)
        return _reciprocal(norm, "structured A + BΔC: 1/‖C(sE − A)⁻¹B‖∞")
    Em = np.eye(n) if En is None else En
    Binv = np.eye(n) if En is None else np.linalg.inv(En)
    p = _Plant(Ms, Binv, np.eye(n), np.zeros((n, n)), discrete)
    scale_a, scale_e = float(np.linalg.norm(M)), float(np.linalg.norm(Em))

    def value(w: float) -> float:
        s = tri.smin(_point(w, discrete))
        return math.inf if s == 0.0 else 1.0 / s

    low, w, up, sweeps, notes = _level_set(value, p, _starts(lam, discrete), rtol)
    s_hat = 1.0 / low  # an evaluated σ_min estimate: never below σ_min (see _Triangular)
    err = 10.0 * n * EPS * (scale_a + (1.0 if discrete else abs(w)) * scale_e)
    lower = 1.0 / up if up > 0.0 else math.inf
    backward = 10.0 * n * EPS * (scale_a + float(np.max(np.abs(lam))) * scale_e)
    if lower <= 2.0 * backward:
        lower, notes = 0.0, notes + ["radius within the eigenvalues' rounding: stability "
                                     "not proven, lower bound 0"]
    return Bracket(s_hat, min(lower, s_hat), s_hat + err, _freq(w, sample_period), method,
                   sweeps, tuple(notes))


def _reciprocal(norm: Bracket, what: str) -> Bracket:
    def inv(x: float) -> float:
        return 0.0 if x == math.inf else (math.inf if x == 0.0 else 1.0 / x)

    return Bracket(inv(norm.value), inv(norm.upper), inv(norm.lower), norm.at, norm.method,
                   norm.iterations, (what, *norm.notes))


# --------------------------------------------------------------------- real stability radius


def _mu_real(M: np.ndarray, rtol: float) -> tuple[float, float]:
    """Qiu et al. μ_R(M): (value at the best γ found, proven lower bound)."""
    R, I = M.real, M.imag
    top = float(np.linalg.svd(R, compute_uv=False)[0]) if R.size else 0.0
    norm_i = float(np.linalg.svd(I, compute_uv=False)[0]) if I.size else 0.0
    if norm_i <= 10.0 * EPS * max(top, norm_i) or min(M.shape) == 0:
        return top, top * (1.0 - 10.0 * EPS * max(M.shape))

    def f(u: float) -> float:
        g = math.exp(u)
        P = np.block([[R, -g * I], [I / g, R]])
        return float(np.linalg.svd(P, compute_uv=False)[1])

    a, b = math.log(1e-12), 0.0
    ratio = (math.sqrt(5.0) - 1.0) / 2.0
    c, d = b - ratio * (b - a), a + ratio * (b - a)
    fc, fd = f(c), f(d)
    while b - a > rtol:
        if fc <= fd:
            b, d, fd = d, c, fc
            c = b - ratio * (b - a)
            fc = f(c)
        else:
            a, c, fc = c, d, fd
            d = a + ratio * (b - a)
            fd = f(d)
    best = min(f(0.0), fc, fd)
    m = (a + b) / 2.0
    ga, gb, gm = math.exp(a), math.exp(b), math.exp(m)
    # Weyl: |σ₂(P(γ)) − σ₂(P(γm))| ≤ ‖P(γ) − P(γm)‖ ≤ ‖Im M‖(|γ − γm| + |1/γ − 1/γm|)
    lip = norm_i * (max(gb - gm, gm - ga) + max(1.0 / ga - 1.0 / gm, 1.0 / gm - 1.0 / gb))
    floor = f(m) - lip - 10.0 * EPS * max(M.shape) * (top + norm_i / ga)
    return best, max(0.0, min(floor, best))


def real_stability_radius(A: object, *, E: object | None = None,
                          sample_period: float | None = None, B: object | None = None,
                          C: object | None = None, rtol: float = 1e-6) -> Bracket:
    """Real (structured) stability radius of Qiu et al. (1995): the smallest ‖Δ‖₂, Δ real, with
    ``E x' = (A + BΔC)x`` not asymptotically stable (B = C = I unless given)."""
    M, En = _square(A, E)
    n = M.shape[0]
    Bm = np.eye(n) if B is None else _matrix("B", B, n)
    Cm = np.eye(n) if C is None else _matrix("C", C, None, n)
    Em = np.eye(n) if En is None else En
    discrete = sample_period is not None
    complex_r = stability_radius(M, E=En, sample_period=sample_period,
                                 B=None if B is None and C is None else Bm,
                                 C=None if B is None and C is None else Cm, rtol=1e-9)
    method = "Qiu et al. 1995 μ_R formula, sampled frequency search"
    if complex_r.upper == 0.0:
        return Bracket(0.0, 0.0, 0.0, complex_r.at, method, 0, ("A is not stable",))
    lam = np.linalg.eigvals(M if En is None else np.linalg.solve(En, M))

    def mu(w: float) -> tuple[float, float]:
        G = Cm @ np.linalg.solve(_point(w, discrete) * Em - M, Bm)
        return _mu_real(G, rtol)

    T = sample_period
    peak = complex_r.at[0] * (T if T else 1.0)
    if discrete:
        grid = np.linspace(0.0, math.pi, REAL_GRID).tolist()
    else:
        mags = np.abs(lam[np.abs(lam) > 0])
        lo = float(mags.min()) / 100.0 if mags.size else 1e-3
        hi = float(mags.max()) * 100.0 if mags.size else 1e3
        grid = [0.0, *np.geomspace(lo, hi, REAL_GRID).tolist()]
    cands = sorted(set(grid) | set(_starts(lam, discrete)) | {peak})
    vals = [mu(w)[0] for w in cands]
    order = np.argsort(-np.asarray(vals), kind="stable")[:3]
    best_w, best = cands[int(order[0])], vals[int(order[0])]
    from scipy.optimize import minimize_scalar

    evals = len(cands)
    for k in order:
        i = int(k)
        lo_w, hi_w = cands[max(i - 1, 0)], cands[min(i + 1, len(cands) - 1)]
        if hi_w <= lo_w:
            continue
        res = minimize_scalar(lambda w: -mu(w)[0], bounds=(lo_w, hi_w), method="bounded",
                              options={"xatol": rtol * max(1.0, abs(cands[i]))})
        evals += int(res.nfev)
        if -res.fun > best:
            best, best_w = float(-res.fun), float(res.x)
    val, floor = mu(best_w)
    upper = math.inf if floor <= 0.0 else 1.0 / floor
    value = math.inf if val <= 0.0 else 1.0 / val
    lower = min(complex_r.lower, value)
    notes = (f"sup over frequency sampled: {len(cands)} frequencies (grid, poles, complex "
             f"peak) + local refinement; lower bound is the complex radius r_C",)
    return Bracket(value, lower, max(upper, value), _freq(best_w, sample_period), method,
                   evals, notes)
