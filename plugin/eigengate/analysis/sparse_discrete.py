"""Sparse discrete-time models: the eigenvalues of largest modulus, and what they cover.

For ``x[k+1] = A x[k]`` a requirement's region ``Re s ≥ v`` (stability: v = 0, a decay rate
α: v = −α) is ``|z| ≥ e^{vT}`` in the z-plane (``s = ln(z)/T``). Plain Arnoldi
(``scipy.sparse.linalg.eigs(A, which="LM")``, ARPACK; Lehoucq, Sorensen & Yang, 1998) returns
the k eigenvalues of largest modulus; when it converged, every eigenvalue it did not return
has a modulus no larger than the smallest it did, so the region is *searched* once that
modulus is below ``e^{vT}``. k is doubled (at most :data:`MAX_RUNS` runs) until it is.
Damping and frequency regions are spirals and wedges in the z-plane that a modulus search
does not cover: their verdicts stay uncertain unless structure excludes them.

Proofs: every ``|z| ≤ ‖A‖∞`` (the largest absolute row sum, Gershgorin's theorem; its rounding
bounded by γ_k), so a region beyond it holds no eigenvalue (certified); a symmetric A is
certified by inertia counts of ``A ∓ rI`` (:mod:`eigengate.analysis.structure`).
"""

from __future__ import annotations

import math
from typing import Any, Callable, Iterable

__all__ = ["z_radius", "discrete_uncovered", "largest_moduli", "MAX_RUNS"]

#: Most Arnoldi runs (k = 8, 16, 32, …) of one discrete model's search.
MAX_RUNS = 4

_U = 2.0 ** -53


def z_radius(target: Any, sample_period: float) -> float | None:
    """The modulus r with ``target`` = ``|z| ≥ r`` (None: not a modulus region)."""
    if target.kind != "right":
        return None
    return math.exp(max(min(target.value * sample_period, 700.0), -700.0))


def discrete_uncovered(search: Any, target: Any) -> list[tuple[float, float, float, float]]:
    """Parts of ``target`` the search did not cover: none when every eigenvalue not found has
    a modulus below the region's; the whole region (as one s-plane strip) otherwise."""
    r = z_radius(target, search.sample_period)
    if r is not None and search.outer is not None and search.outer < r:
        return []
    if r is None:
        return [(-math.inf, math.inf, 0.0, math.inf)]
    return [(target.value, math.inf, 0.0, math.pi / search.sample_period)]


def row_radius(A: Any) -> float:
    """A rigorous bound on the spectral radius of a sparse A: ‖A‖∞ with its rounding."""
    import numpy as np

    if A.nnz == 0:
        return 0.0
    sums = np.asarray(abs(A).sum(axis=1)).ravel()
    k = int(np.diff(A.indptr).max()) + 2
    return float(sums.max()) * (1.0 + k * _U / (1.0 - k * _U))


def largest_moduli(A: Any, targets: Iterable[Any], sample_period: float, k: int,
                   symmetric: bool, pairs: Any, magnitude: Callable[..., float | None]
                   ) -> tuple[float | None, int, float]:
    """Run the modulus search until the smallest region radius is covered; returns (the
    bound on every eigenvalue not found, runs made, the row-sum radius)."""
    radius = row_radius(A)
    radii = [r for r in (z_radius(t, sample_period) for t in targets) if r is not None]
    need = min(radii) if radii else 0.0
    n = A.shape[0]
    outer = None
    runs = 0
    while runs < MAX_RUNS and k < n - 1:
        outer = magnitude(A, k, symmetric, 115 + runs, pairs)
        runs += 1
        if radius < need or (outer is not None and outer < need):
            break
        k *= 2
    return outer, runs, radius
