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
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

__all__ = ["Bracket", "NotApplicable", "hinf_norm", "stability_radius", "real_stability_radius",
           "transient_growth", "pseudospectral_abscissa", "growth_curve", "sigma_min_grid"]

EPS = float(np.finfo(float).eps)
#: Iteration limits: level-set and criss-cross sweeps, growth steps, real-radius grid size.
MAX_SWEEPS, MAX_STEPS, REAL_GRID = 60, 20000, 96
#: Growth steps are also limited by work (each is an n³ product and norm): ≤ WORK / n³ steps.
WORK = 3e10
#: The growth upper bound is sharpened to max(rtol, UPPER_RTOL) relative (its steps shrink as
#: the square root of this tolerance near the peak; 1e-3 keeps n = 200 within seconds).
UPPER_RTOL = 1e-3


@dataclass(frozen=True)
class Bracket:
    """A figure with proven bounds: ``lower ≤ true value ≤ upper`` (rounding included)."""

    value: float
    lower: float
    upper: float
    at: tuple[float, ...]
    method: str
    iterations: int
    notes: tuple[str, ...] = ()


class NotApplicable(ValueError):
    """The figure is not defined for this input (the message says why)."""


# ---------------------------------------------------------------------------- input checks


def _matrix(name: str, X: object, rows: int | None = None, cols: int | None = None) -> np.ndarray:
    M = np.asarray(X, dtype=float)
    if M.ndim == 1 and rows is not None and cols is None:
        M = M.reshape(rows, -1) if M.size else np.zeros((rows, 0))
    if M.ndim != 2:
        raise NotApplicable(f"{name}: expected a 2-D matrix, found {M.ndim} dimension(s)")
    if not np.all(np.isfinite(M)):
        raise NotApplicable(f"{name}: entries must be finite")
    if rows is not None and M.shape[0] != rows:
        raise NotApplicable(f"{name}: expected {rows} rows, found {M.shape[0]}")
    if cols is not None and M.shape[1] != cols:
        raise NotApplicable(f"{name}: expected {cols} columns, found {M.shape[1]}")
    return M


def _square(A: object, E: object | None) -> tuple[np.ndarray, np.ndarray | None]:
    M = _matrix("A", A)
    if M.shape[0] != M.shape[1] or M.shape[0] == 0:
        raise NotApplicable(f"A: expected a non-empty square matrix, found {M.shape}")
    if E is None:
        return M, None
    En = _matrix("E", E, M.shape[0], M.shape[0])
    s = np.linalg.svd(En, compute_uv=False)
    if s[-1] <= 1e3 * M.shape[0] * EPS * s[0]:
        raise NotApplicable("E is singular (or numerically so: σ_min/σ_max = "
                            f"{s[-1] / s[0] if s[0] else 0.0:.1e}); the figure needs an invertible"
                            " E (a model with algebraic constraints has no defined radius here)")
    return M, En


def _standard(A: object, E: object | None) -> np.ndarray:
    """``E⁻¹A`` (or A) for growth and pseudospectra."""
    M, En = _square(A, E)
    return M if En is None else np.linalg.solve(En, M)


def _spectrum(M: np.ndarray, discrete: bool) -> tuple[np.ndarray, float]:
    lam = np.linalg.eigvals(M)
    return lam, float(np.max(np.abs(lam)) if discrete else np.max(lam.real))


def _backward(M: np.ndarray) -> float:
    """Allowance for the backward error of a dense decomposition of M (eig, SVD)."""
    return 10.0 * M.shape[0] * EPS * float(np.linalg.norm(M))


def _stable(level: float, discrete: bool) -> bool:
    return level < 1.0 if discrete else level < 0.0


class _Triangular:
    """``A − zE`` in (generalized) Schur form ``S − zT`` (unitary factors dropped: the singular
    values are the same), so that ``σ_min`` costs triangular solves instead of an SVD."""

    def __init__(self, A: np.ndarray, E: np.ndarray | None = None) -> None:
        import scipy.linalg as la

        if E is None:
            self.S = la.rsf2csf(*la.schur(A))[0]
            self.T: np.ndarray | None = None
        else:
            self.S, self.T = la.qz(A.astype(complex), E.astype(complex), output="complex")[:2]
        self.n = A.shape[0]
        k = min(self.n, 3)
        self.start = np.linalg.qr(np.vander(np.linspace(1.0, 2.0, self.n), k, increasing=True)
                                  .astype(complex))[0]

    def eigenvalues(self) -> np.ndarray:
        d = np.diag(self.S)
        return d if self.T is None else d / np.diag(self.T)

    def shifted(self, z: complex) -> np.ndarray:
        if self.T is None:
            return self.S - z * np.eye(self.n)
        return self.S - z * self.T

    def smin(self, z: complex) -> float:
        """Block inverse iteration on ``(RᴴR)⁻¹`` from a fixed start: for orthonormal X,
        ``1/σ_max(R⁻¹X)`` is never below ``σ_min(R)`` (an upper bound whatever the
        convergence); stops when it settles to 1e-12."""
        import scipy.linalg as la

        R = self.shifted(z)
        if np.min(np.abs(np.diag(R))) == 0.0:
            return 0.0
        X, best = self.start, math.inf
        for _ in range(150):
            Y = la.solve_triangular(R, X, check_finite=False)
            top = float(np.linalg.svd(Y, compute_uv=False)[0])
            if not math.isfinite(top) or top == 0.0:
                return self.svd(z)
            est = 1.0 / top
            if best - est <= 1e-12 * est:
                break
            best = min(best, est)
            W = la.solve_triangular(R, Y, trans="C", check_finite=False)
            X = np.linalg.qr(W)[0]
        self.start = X  # warm start for the next (nearby) point: same calls, same floats
        return min(best, est)

    def svd(self, z: complex) -> float:
        """``σ_min`` by a full SVD (of the real embedding ``[[Re R, −Im R], [Im R, Re R]]``,
        whose singular values are those of R, each twice)."""
        R = self.shifted(z)
        big = np.block([[R.real, -R.imag], [R.imag, R.real]])
        return float(np.linalg.svd(big, compute_uv=False)[-1])


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


# --------------------------------------------------------------------------- transient growth


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


# ------------------------------------------------------------------------------ pseudospectra


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
