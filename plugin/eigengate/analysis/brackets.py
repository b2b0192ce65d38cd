"""What every robustness figure shares: the :class:`Bracket` a figure is returned as (estimate,
proven bounds, where the extreme lies, the method, the iterations), :class:`NotApplicable`,
the iteration and work limits, the input checks, and the (generalized) Schur form whose
triangular solves give ``σ_min(A − zE)`` (:class:`_Triangular`) for the stability radius and
the pseudospectra. The figures themselves are in :mod:`eigengate.analysis.robustness` (H∞ norm,
stability radii), :mod:`eigengate.analysis.growth` and :mod:`eigengate.analysis.pseudospectra`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["Bracket", "NotApplicable", "EPS", "MAX_SWEEPS", "MAX_STEPS", "REAL_GRID", "WORK",
           "UPPER_RTOL"]

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
