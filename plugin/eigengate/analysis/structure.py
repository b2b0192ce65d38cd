"""Certificates from a sparse model's structure: regions proved free of eigenvalues.

An iterative search never proves a region empty (:mod:`eigengate.analysis.sparse_modes`);
structure can. Two structures are recognised from the matrices themselves:

* **Symmetric models** (A symmetric, E absent or symmetric positive definite): every
  eigenvalue is real, and inertia counts of ``A − cE`` (:mod:`eigengate.analysis.inertia`,
  Sylvester's law of inertia) prove that none lies at or right of c. A requirement's region
  meets the real axis in ``[v, ∞)`` (decay rate, stability), ``[0, ∞)`` (damping below
  ζ < 1) or ``|s| ≥ v`` (frequency: two counts).
* **Second-order models** ``M q'' + D q' + K q = F u`` in the companion form the loader builds
  (``A = [[0, I], [−K, −D]]``, ``E = blkdiag(I, M)``, checked entry by entry). For an
  eigenpair ``(λ, x)`` of ``λ²M + λD + K``, ``xᴴ`` gives ``mλ² + dλ + k = 0`` with
  ``m = xᴴMx``, ``d = xᴴDx``, ``k = xᴴKx`` real. With M, K symmetric positive definite and
  D positive semidefinite: complex roots have ``Re λ = −d/(2m)`` and ``|λ|² = k/m``, real
  roots are negative and at most ``−k/d`` (the product of the roots is k/m > 0, their sum
  −d/m ≤ 0). So, with μ(X) the largest and λ(X) the smallest eigenvalue (Rayleigh quotients):
  ``Re λ ≤ −min(λ(D)/(2μ(M)), λ(K)/μ(D))``; damping ratio ``d/(2√(mk)) ≥
  λ(D)/(2√(μ(M)μ(K)))`` or 1; ``|λ| ≤ max(√(μ(K)/λ(M)), μ(D)/λ(M))``. Upper bounds μ come
  from Gershgorin's rows, lower bounds λ are proved by inertia counts (Tisseur & Meerbergen,
  SIAM Review 2001, on the quadratic eigenvalue problem, from memory, for these relations).
  Where D is (nearly) proportional to M and K, the damping ratio has a sharper proven bound
  (:mod:`eigengate.analysis.damping_bound`): ``D − αM − βK ⪰ 0`` gives ``ζ ≥ α/(2ω) + βω/2``
  at ``ω = √(k/m)``, minimised over the proven range of ω.

Each proof is a sentence for the verdict message; no proof, no claim.
"""

from __future__ import annotations

import functools
import math
from typing import Any, Iterable

from .inertia import gershgorin, is_symmetric, pencil_above, pencil_below

__all__ = ["second_order_parts", "prove"]


def second_order_parts(A: Any, E: Any) -> tuple[Any, Any, Any] | None:
    """(M, D, K) when (A, E) is exactly the companion form of a second-order model."""
    import numpy as np
    import scipy.sparse as sp

    n2 = A.shape[0]
    if n2 % 2:
        return None
    n = n2 // 2
    A = sp.csr_matrix(A)
    top = A[:n, :]
    eye = sp.identity(n, format="csr")
    if top[:, :n].nnz or (top[:, n:] != eye).nnz:
        return None
    if E is None:
        M = eye
    else:
        E = sp.csr_matrix(E)
        if E[:n, n:].nnz or E[n:, :n].nnz or (E[:n, :n] != eye).nnz:
            return None
        M = E[n:, n:].tocsr()
    K = (-A[n:, :n]).tocsr()
    D = (-A[n:, n:]).tocsr()
    if not np.all(np.isfinite(K.data)):  # pragma: no cover - checked on loading
        return None
    return M, D, K


def companion_left(A: Any, E: Any) -> Any:
    """For the companion form of a second-order model with symmetric M, D, K, a function
    (λ, right vectors) → left vectors: ``w = conj([(D + λM)x; x])`` with x the top half of the
    right vector solves ``wᴴ(A − λE) = 0`` (substitute and use ``(λ²M + λD + K)x = 0``), so
    no second Arnoldi run on the transposed operator is needed; None for other models."""
    import numpy as np

    parts = second_order_parts(A, E)
    if parts is None or not all(is_symmetric(X) for X in parts):
        return None
    M, D, _ = parts
    n = M.shape[0]

    def left(lam: Any, v: Any) -> Any:
        x = v[:n, :]
        top = D @ x + (M @ x) * np.asarray(lam)[None, :]
        return np.vstack([top, x]).conj()
    return left


def _sym_target(E: Any, t: Any, below: Any, above: Any) -> str | None:
    """The proof for a symmetric pencil (A, E) that target ``t`` holds no eigenvalue
    (``below``, ``above``: pencil_below and pencil_above of the pencil at c)."""
    what = "A − cE" if E is not None else "A − cI"
    law = (f"every eigenvalue is real (A symmetric{', E symmetric positive definite' if E is not None else ''}); "
           f"Sylvester's law of inertia: the LDLᵀ pivots of {what} (no pivoting, residual "
           "bounded) are all negative")
    if t.kind == "right" or (t.kind == "sector" and 0.0 <= t.value < 1.0):
        c = t.value if t.kind == "right" else 0.0
        if below(c):
            return f"{law} at c = {c:.6g}, so every eigenvalue is below {c:.6g}"
        return None
    if t.kind == "outside" and t.value > 0:
        if below(t.value) and above(-t.value):
            return (f"{law} at c = {t.value:.6g} and positive at c = {-t.value:.6g}, so every "
                    f"eigenvalue lies strictly between them")
    return None


class _Quadratic:
    """Proven bounds of M, D, K, computed when first needed."""

    def __init__(self, M: Any, D: Any, K: Any) -> None:
        self.M, self.D, self.K = M, D, K
        self.hi = {k: max(gershgorin(X)[1], 0.0) for k, X in (("M", M), ("D", D), ("K", K))}
        self._above: dict[tuple[str, float], bool] = {}

    def above(self, name: str, t: float) -> bool:
        """Proof that every eigenvalue of the named matrix exceeds t."""
        key = (name, t)
        if key not in self._above:
            X = {"M": self.M, "D": self.D, "K": self.K}[name]
            lo, _ = gershgorin(X)
            self._above[key] = lo > t or (math.isfinite(t) and pencil_above(X, None, t))
        return self._above[key]

    def semidefinite_d(self) -> bool:
        return self.D.nnz == 0 or gershgorin(self.D)[0] >= 0.0 or self.above("D", 0.0)

    def spd_mk(self) -> bool:
        return self.above("M", 0.0) and self.above("K", 0.0)

    @functools.cached_property
    def proportional(self) -> tuple[float, float, float] | None:
        """(ζ_min, α, β) of the proportional-damping bound, once (M, K proven SPD first)."""
        from .damping_bound import proportional_damping_bound

        return proportional_damping_bound(self.M, self.D, self.K)


_SO = ("M and K symmetric positive definite{d} (inertia counts of LDLᵀ factorisations, "
       "Sylvester's law of inertia; upper bounds from Gershgorin's rows): for an eigenpair "
       "of λ²M + λD + K, xᴴ(λ²M + λD + K)x = 0 gives {why}")


def _so_target(q: _Quadratic, t: Any) -> str | None:
    """The proof for a second-order model that target ``t`` holds no eigenvalue."""
    grow = 1.0 + 1e-12  # strictness of the thresholds against the bounds' own rounding
    if t.kind == "right":
        alpha = max(-t.value, 0.0)
        if q.spd_mk() and q.above("D", 2.0 * alpha * q.hi["M"] * grow) \
                and q.above("K", alpha * q.hi["D"] * grow):
            return _SO.format(d=f", D − {2 * alpha * q.hi['M']:.6g}·I positive definite" if alpha
                              else ", D positive definite",
                              why=f"Re λ ≤ −min(λmin(D)/(2λmax(M)), λmin(K)/λmax(D)) < "
                              f"{-alpha:.6g}")
        return None
    if t.kind == "sector" and 0.0 < t.value < 1.0:
        need = 2.0 * t.value * math.sqrt(q.hi["M"] * q.hi["K"]) * grow
        if not q.spd_mk():
            return None
        if q.above("D", need):
            return _SO.format(d=f", D − {need:.6g}·I positive definite",
                              why=f"damping ratio ≥ min(1, λmin(D)/(2√(λmax(M)λmax(K)))) > "
                              f"{t.value:.6g}")
        bound = q.proportional
        if bound is not None and bound[0] > t.value * grow:
            zeta, alpha, beta = bound
            return _SO.format(d=f", D − {alpha:.6g}·M − {beta:.6g}·K positive definite",
                              why=f"d ≥ {alpha:.6g}·m + {beta:.6g}·k, so every complex mode "
                              f"has damping ratio d/(2√(mk)) ≥ min over ω = √(k/m) in its "
                              f"proven range of α/(2ω) + βω/2 = {zeta:.6g} > {t.value:.6g}")
        return None
    if t.kind == "outside" and t.value > 0:
        need = max(q.hi["K"] / t.value ** 2, q.hi["D"] / t.value) * grow
        if q.semidefinite_d() and q.above("K", 0.0) and q.above("M", need):
            return _SO.format(d=", D positive semidefinite",
                              why=f"|λ| ≤ max(√(λmax(K)/λmin(M)), λmax(D)/λmin(M)) < "
                              f"{t.value:.6g}")
    return None


def _discrete_target(A: Any, t: Any, sample_period: float) -> str | None:
    """The proof for a symmetric discrete model that ``|z| ≥ r`` holds no eigenvalue."""
    from .sparse_discrete import z_radius

    r = z_radius(t, sample_period)
    if r is not None and pencil_below(A, None, r) and pencil_above(A, None, -r):
        return (f"every eigenvalue is real (A symmetric); Sylvester's law of inertia: the LDLᵀ "
                f"pivots of A − rI are all negative and those of A + rI all positive at "
                f"r = {r:.6g} (no pivoting, residual bounded), so every |z| < {r:.6g}")
    return None


def prove(A: Any, E: Any, targets: Iterable[Any], symmetric: bool,
          sample_period: float | None = None) -> tuple[tuple[Any, str], ...]:
    """(target, proof) for each target that structure proves free of eigenvalues."""
    targets = tuple(targets)
    out: list[tuple[Any, str]] = []
    if sample_period is not None:
        for t in targets if symmetric else ():
            why = _discrete_target(A, t, sample_period)
            if why:
                out.append((t, why))
        return tuple(out)
    if symmetric:
        # several targets often share a shift (stable and min_damping both at c = 0): each
        # LDLᵀ count is made once
        below = functools.lru_cache(maxsize=None)(lambda c: pencil_below(A, E, c))
        above = functools.lru_cache(maxsize=None)(lambda c: pencil_above(A, E, c))
        for t in targets:
            why = _sym_target(E, t, below, above)
            if why:
                out.append((t, why))
        return tuple(out)
    parts = second_order_parts(A, E)
    if parts is None or not all(is_symmetric(X) for X in parts):
        return ()
    q = _Quadratic(*parts)
    for t in targets:
        why = _so_target(q, t)
        if why:
            out.append((t, "second-order structure: " + why))
    return tuple(out)
