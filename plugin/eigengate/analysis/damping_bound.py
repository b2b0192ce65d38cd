"""A proven lower bound of the damping ratio of a second-order model with proportional damping.

For ``M q'' + D q' + K q = 0`` with M, K symmetric positive definite and D symmetric, an
eigenpair ``(λ, x)`` of ``λ²M + λD + K`` gives ``mλ² + dλ + k = 0`` with ``m = xᴴMx``,
``d = xᴴDx``, ``k = xᴴKx`` (Tisseur & Meerbergen, SIAM Review 2001, on the quadratic
eigenvalue problem, from memory). A complex pair has ``Re λ = −d/(2m)`` and ``|λ|² = k/m``,
so its damping ratio is exactly ``ζ = d/(2√(mk))``.

If ``D − αM − βK`` is positive semidefinite for some α, β ≥ 0, then ``d ≥ αm + βk`` and, with
``ω̃ = √(k/m)``,

    ζ ≥ α/(2ω̃) + βω̃/2,

Rayleigh (proportional) damping's closed form (Clough & Penzien, *Dynamics of Structures*,
from memory) now as an inequality. ``ω̃²`` is a Rayleigh quotient of the pencil (K, M), so it
lies in ``[λ(K)/μ(M), μ(K)/λ(M)]`` (λ, μ: proven lower and upper bounds of the eigenvalues,
here Gershgorin's rows), and the right-hand side is convex in ω̃: its minimum over that range
(``√(αβ)`` at ``ω* = √(α/β)`` when inside) bounds every mode's damping ratio.

α and β come from a least-squares fit of D by M and K over their entries, shrunk by
:data:`SHRINK` so that an exactly proportional D leaves a positive definite remainder (and
then scaled down by :data:`SCALES` while the remainder is not proven definite); the
remainder is formed in floating point, and its inertia count (Sylvester's law, through
:func:`eigengate.analysis.inertia.pencil_above`) proves it larger than the rounding of its own
formation, so the exact ``D − αM − βK`` is positive definite. No fit, no claim.
"""

from __future__ import annotations

import math
from typing import Any

from .inertia import _abs_norm2, gershgorin, pencil_above

__all__ = ["proportional_damping_bound", "SHRINK"]

#: Relative shrink of the fitted α, β: leaves δ(αM + βK) of an exactly proportional D, far
#: above the rounding of forming the remainder (about 1e-16 of D).
SHRINK = 1e-6
#: Fractions of the fitted α, β tried in turn when the remainder of the fit itself is not
#: definite (a D with more than proportional damping in some directions, or less in others).
SCALES = (1.0, 0.9, 0.5, 0.25)
_U = 2.0 ** -53


def _fit(M: Any, D: Any, K: Any) -> tuple[float, float] | None:
    """Least-squares α, β ≥ 0 of D ≈ αM + βK over the entries (Frobenius inner products)."""
    import numpy as np

    def dot(X: Any, Y: Any) -> float:
        return float(X.multiply(Y).sum())

    mm, kk, mk = dot(M, M), dot(K, K), dot(M, K)
    dm, dk = dot(D, M), dot(D, K)
    det = mm * kk - mk * mk
    if det > 1e-12 * mm * kk:
        alpha, beta = np.linalg.solve([[mm, mk], [mk, kk]], [dm, dk])
    else:  # M and K (nearly) parallel: one of them
        alpha, beta = dm / mm if mm else 0.0, 0.0
    alpha, beta = float(alpha), float(beta)
    if alpha < 0.0 or beta < 0.0:  # the better of the two one-term fits
        alpha, beta = (max(dm / mm, 0.0), 0.0) if mm and dm * dm / mm >= (dk * dk / kk if kk
                                                                            else 0.0) \
            else (0.0, max(dk / kk, 0.0) if kk else 0.0)
    if not (math.isfinite(alpha) and math.isfinite(beta)) or alpha == beta == 0.0:
        return None
    return alpha * (1.0 - SHRINK), beta * (1.0 - SHRINK)


def _minimum(alpha: float, beta: float, lo: float, hi: float) -> float:
    """min of α/(2ω) + βω/2 over ω in [lo, hi] (0 ≤ lo ≤ hi ≤ ∞; α, β ≥ 0, not both 0),
    rounded down a little."""
    if alpha > 0.0 and beta > 0.0:
        w = min(max(math.sqrt(alpha / beta), lo), hi)  # finite and positive
        value = alpha / (2.0 * w) + beta * w / 2.0
    elif alpha > 0.0:  # decreasing in ω: the top of the range
        value = 0.0 if math.isinf(hi) else alpha / (2.0 * hi)
    else:  # increasing in ω: the bottom of the range
        value = beta * lo / 2.0
    return value * (1.0 - 16.0 * _U)


def _remainder_definite(M: Any, D: Any, K: Any, alpha: float, beta: float,
                        norms: tuple[float, float, float]) -> bool:
    """Proof that the exact D − αM − βK is positive definite: its computed value exceeds the
    rounding of its own formation (each entry two products and two differences, each rounded
    once: at most 4u(|d| + α|m| + β|k|))."""
    import scipy.sparse as sp

    X = sp.csr_matrix(D - alpha * M - beta * K)
    formed = 4.0 * _U * (norms[0] + alpha * norms[1] + beta * norms[2]) * (1.0 + 8.0 * _U)
    lo_x, _ = gershgorin(X)
    return lo_x > formed or pencil_above(X, None, formed)


def proportional_damping_bound(M: Any, D: Any, K: Any) -> tuple[float, float, float] | None:
    """``(ζ_min, α, β)``: every complex mode of the model has damping ratio at least ζ_min,
    proven as in the module docstring; None when no proportional bound is proven. M and K
    must already be proven symmetric positive definite by the caller."""
    fit = _fit(M, D, K)
    if fit is None:
        return None
    norms = _abs_norm2(D), _abs_norm2(M), _abs_norm2(K)
    for scale in SCALES:  # the fit, then less of it: the first remainder proven definite
        alpha, beta = fit[0] * scale, fit[1] * scale
        if _remainder_definite(M, D, K, alpha, beta, norms):
            break
    else:
        return None
    lo_k, hi_k = gershgorin(K)
    lo_m, hi_m = gershgorin(M)
    w_lo = math.sqrt(max(lo_k, 0.0) / hi_m) * (1.0 - 8.0 * _U) if hi_m > 0.0 else 0.0
    w_hi = math.sqrt(hi_k / lo_m) * (1.0 + 8.0 * _U) if lo_m > 0.0 else math.inf
    zeta = _minimum(alpha, beta, w_lo, w_hi)
    # 0 when one term's range end is unproven (a stiffness-only fit with Gershgorin's lower
    # bound of K at or below 0, a mass-only fit with no upper bound): nothing proven, no claim
    return (zeta, alpha, beta) if zeta > 0.0 else None
