"""Eigenvalue error bounds: a posteriori estimates from residuals, and enclosures.

Two kinds of bound, both computed from the eigenpairs LAPACK returned (``modes.analyse`` calls
this module once per model):

* **estimated** (every model): for each eigenpair the residual ``r = A v − λ v``
  (descriptor: ``A v − λ E v``) makes ``(λ, v)`` an exact eigenpair of ``A − r vᴴ/‖v‖²``, a
  perturbation of norm ``‖r‖/‖v‖``; first-order perturbation theory (Wilkinson 1965, Stewart &
  Sun 1990) then puts the exact eigenvalue within ``κ·‖r‖/‖v‖ = ‖r‖·‖w‖/|wᴴv|`` (generalized:
  ``|wᴴEv|``). The residual computed in double precision is itself wrong at the rounding level,
  so a floor for its rounding error is added (:data:`EST_FLOOR`), and the sum is doubled
  (:data:`EST_SAFETY`) for the neglected second-order term. A defective (or nearly defective)
  eigenvalue has κ → ∞ and gets the Hölder-type bound of its Jordan block instead
  (:func:`cap_defective`).
* **certified** (standard problems with at most :data:`ENCLOSE_LIMIT` states): discs that hold
  the exact eigenvalues of the double-precision matrix, whatever the rounding, from Gershgorin's
  theorem applied to ``X⁻¹AX = Λ + X⁻¹R`` (``R = AX − XΛ``) with ``X⁻¹`` bounded through an
  approximate inverse ``Y`` (``‖I − YX‖∞ < 1``) and every rounding error of the products bounded
  a priori by ``γ_k = k·u/(1 − k·u)`` times the product of absolute values (Higham, *Accuracy
  and Stability of Numerical Algorithms*, 2nd ed., ch. 3). A connected union of k discs
  disjoint from the others holds exactly k eigenvalues (Gershgorin's theorem), so the count is
  certified too. Nothing here depends on the BLAS, the thread count or the LAPACK driver beyond
  the eigenpairs themselves, which the bounds check.
"""

from __future__ import annotations

import functools
import math
from typing import TYPE_CHECKING, Mapping, Sequence

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

__all__ = ["estimate", "first_order", "column_norms", "frobenius", "enclose", "gershgorin",
           "components", "touching", "touching_small", "sweep_order", "cluster_radius", "cap_defective",
           "hoelder", "map_to_s", "ENCLOSE_LIMIT", "TOUCH"]

#: Factor on the first-order residual bound: covers a second-order remainder as large as the
#: first-order term itself (see DEVELOPERS.md, "Numerical decisions").
EST_SAFETY = 2.0
#: Rounding floor of a residual computed in double precision: c·√(n+1)·eps·(‖A‖F + |λ|‖E‖F)·‖v‖,
#: the probabilistic bound of Higham & Mary (SIAM J. Sci. Comput. 2019) with λ = 6 (c = 3 with
#: u = eps/2), which fails with probability below 2(n+1)·exp(−18) per entry.
EST_FLOOR = 3.0
#: Largest order for which the certified enclosure is computed (cost: two extra complex n³
#: products). A wall-clock budget would make verdicts depend on the machine's load, so the
#: limit is an order, never a time.
ENCLOSE_LIMIT = 400
#: Largest Jordan block size the defective-eigenvalue bound considers.
MAX_BLOCK = 16
#: Relative rounding floor of every reported figure (s from z, damping, frequency).
FIGURE_FLOOR = 8.0

_U = 2.0 ** -53  # unit roundoff of IEEE double


def _gamma(k: int) -> float:
    """``γ_k = k·u/(1 − k·u)`` (Higham, ch. 3), rounded up a little for its own rounding."""
    ku = k * _U
    return ku / (1.0 - ku) * (1.0 + 4.0 * _U) if ku < 0.5 else math.inf


def estimate(A: "np.ndarray", E: "np.ndarray | None", lam: "np.ndarray", vr: "np.ndarray",
             vl: "np.ndarray", ew: "np.ndarray") -> tuple["np.ndarray", "np.ndarray", "np.ndarray"]:
    """First-order a posteriori bounds of the eigenvalues ``lam`` (right vectors ``vr``, left
    vectors ``vl``, ``ew = Eᴴ·vl``): returns ``(bound, kappa, R)`` where ``R`` is the residual
    matrix ``A·V − E·V·Λ`` (reused by :func:`enclose`)."""
    import numpy as np

    ev = vr if E is None else _mul(E, vr)
    R = _mul(A, vr) - ev * lam
    dots = np.abs(np.einsum("ij,ij->j", ew.conj(), vr))
    norm_e = 1.0 if E is None else frobenius(E)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        bound, kappa = first_order(R, vr, vl, dots, np.abs(lam), frobenius(A), norm_e)
    return bound, kappa, R


def first_order(R: "np.ndarray", vr: "np.ndarray", vl: "np.ndarray", dots: "np.ndarray",
                absl: "np.ndarray", norm_a: float, norm_e: float
                ) -> tuple["np.ndarray", "np.ndarray"]:
    """:func:`estimate`'s bounds and condition numbers from the residuals ``R``, the vectors,
    ``dots = |wᴴ E v|``, ``absl = |λ|`` and the Frobenius norms of A and E (under the
    caller's ``numpy.errstate``: a zero ``dots`` divides by zero)."""
    import numpy as np

    eps = 2.0 ** -52  # float64 machine epsilon
    vnorm = column_norms(vr)
    scaled = absl if norm_e == 1.0 else absl * norm_e  # x·1.0 is x
    floor = EST_FLOOR * math.sqrt(R.shape[0] + 1) * eps * (norm_a + scaled) * vnorm
    wnorm = column_norms(vl)
    kappa = wnorm * vnorm / dots
    bound = EST_SAFETY * (column_norms(R) + floor) * wnorm / dots
    kappa = np.where(np.isfinite(kappa), kappa, 1.0 / eps)
    bound = np.where(np.isfinite(bound), bound, np.inf)
    bound = np.maximum(bound, FIGURE_FLOOR * eps * absl)
    return bound, kappa


def column_norms(X: "np.ndarray") -> "np.ndarray":
    """Euclidean norm of each column: ``numpy.linalg.norm(X, axis=0)``'s own arithmetic
    (its branch for one axis), without its argument handling."""
    import numpy as np

    square = (X.conj() * X).real if X.dtype.kind == "c" else X * X  # conj(x) is x when real
    return np.sqrt(np.add.reduce(square, axis=(0,)))


def frobenius(M) -> float:
    """Frobenius norm of a dense or scipy.sparse matrix."""
    import numpy as np

    if type(M).__module__.startswith("scipy.sparse"):
        return float(np.linalg.norm(M.data))  # a canonical sparse matrix: no duplicates
    return float(np.linalg.norm(M, "fro"))


def _mul(M: "np.ndarray", X: "np.ndarray") -> "np.ndarray":
    """``M @ X`` for a real ``M`` and complex ``X`` as two real products (half the work of
    the complex one; each entry is still an inner product of length n, so the rounding
    bounds of :func:`enclose` hold)."""
    import numpy as np

    if np.iscomplexobj(M) or not np.iscomplexobj(X):
        return M @ X
    return (M @ X.real) + 1j * (M @ X.imag)


def cap_defective(lam: "np.ndarray", delta: "np.ndarray", base: float, norm: float,
                  n: int) -> None:
    """Replace meaningless first-order bounds of (nearly) defective eigenvalues in place.

    For an eigenvalue of a Jordan block of size m the first-order bound is useless (κ → ∞ for
    an exact block), while the perturbation is of order h_m = ‖A‖·(c·n·eps)^(1/m) (Hölder-type
    bound). m is taken as the largest m ≤ MAX_BLOCK with at least m computed eigenvalues
    within 2·h_m; the bound is capped at h_m. Only eigenvalues whose first-order bound exceeds
    h_2 are examined, so ordinary spectra cost nothing here.
    """
    over = delta > hoelder(base, norm, 2)
    if not over.any():
        return
    import numpy as np

    for i in over.nonzero()[0]:
        d = np.abs(lam - lam[i])
        block = 2
        for m in range(3, min(n, MAX_BLOCK) + 1):
            if np.count_nonzero(d <= 2.0 * hoelder(base, norm, m)) >= m:
                block = m
        delta[i] = min(delta[i], hoelder(base, norm, block))


def hoelder(base: float, norm: float, m: int) -> float:
    """Hölder-type error scale ``‖A‖·(c·n·eps)^(1/m)`` of an eigenvalue of a Jordan block of
    size m (Golub & Van Loan, ch. 7), with ``base = c·n·eps·‖A‖``."""
    scale = max(norm, 2.2250738585072014e-308)
    return scale * (base / scale) ** (1.0 / m)


def enclose(A: "np.ndarray", lam: "np.ndarray", vr: "np.ndarray", vl: "np.ndarray",
            R: "np.ndarray") -> "np.ndarray | None":
    """Radii ρ_i of discs ``|μ − λ_i| ≤ ρ_i`` whose union holds every exact eigenvalue of the
    real or complex matrix ``A`` (Gershgorin's theorem on ``X⁻¹AX``), or None when the
    eigenvector matrix is too ill-conditioned for the bound (``‖I − YX‖∞ ≥ 1/2``).

    ``R`` is the computed ``A·X − X·Λ``. With ``Y`` the rows ``w_iᴴ/(w_iᴴ v_i)`` (the left
    vectors, an approximate inverse of ``X``) and ``C = I − YX``: ``X⁻¹ = (I − C)⁻¹Y``, so
    the row sums of ``|X⁻¹R|`` are at most ``g_i = t_i + c_i·‖t‖∞/(1 − ‖C‖∞)`` with
    ``t = |Y|·(|R|·1)`` and ``c = |C|·1``. Every computed quantity enters through an upper
    bound of its exact value: a complex inner product of length k has an error of at most
    ``√2·γ_{2k}`` times the product of absolute values (each real component is a real inner
    product of length 2k; Higham, ch. 3), and the bound arithmetic itself, all on non-negative
    numbers, is inflated by ``(1 + γ)``.
    """
    import numpy as np

    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        dots = np.einsum("ij,ij->j", vl.conj(), vr)
        if not np.isfinite(dots).all() or (dots == 0).any():
            return None
        return gershgorin(np.abs(A), np.abs(lam), vr, vl, R, dots)


def gershgorin(absa: "np.ndarray", absl: "np.ndarray", vr: "np.ndarray", vl: "np.ndarray",
               R: "np.ndarray", dots: "np.ndarray") -> "np.ndarray | None":
    """:func:`enclose` from ``|A|``, ``|λ|`` and ``dots = wᴴv`` (finite and non-zero), under
    the caller's ``numpy.errstate``."""
    import numpy as np

    n = absa.shape[0]
    Y = (vl / dots.conj()).conj().T
    g, up = rounding(n)
    absx = np.abs(vr)
    absy = np.abs(Y)
    xsum = absx.sum(axis=1) * up  # |X|·1
    # |R_exact| ≤ |R| + g·(|A||X| + |X||Λ|), summed along rows: ... ·1 by matrix-vector
    rsum = (np.abs(R).sum(axis=1) + g * (absa @ xsum + absx @ absl)) * up * up
    C = (identity(n) if n <= 32 else np.eye(n)) - Y @ vr
    csum = (np.abs(C).sum(axis=1) + g * (absy @ xsum) + _U * n) * up * up
    cnorm = float(csum.max())
    if not math.isfinite(cnorm) or cnorm >= 0.5:
        return None
    t = (absy @ rsum) * up * up
    rho = (t + csum * (float(t.max()) / (1.0 - cnorm))) * up * up
    if not np.isfinite(rho).all():
        return None
    return rho


@functools.lru_cache(maxsize=64)
def rounding(n: int) -> tuple[float, float]:
    """``(√2·γ_{2n+4}, 1 + γ_{4n+8})``: the rounding factors of :func:`gershgorin` (products
    of length n; the bound arithmetic itself, no cancellation)."""
    return math.sqrt(2.0) * _gamma(2 * n + 4), 1.0 + _gamma(4 * n + 8)


@functools.lru_cache(maxsize=32)
def identity(n: int) -> "np.ndarray":
    """The identity of order n, read-only (small orders only: one per order is kept)."""
    import numpy as np

    eye = np.eye(n)
    eye.flags.writeable = False
    return eye


#: Discs closer than this factor times the sum of their radii touch (rounding of the test).
TOUCH = 1.0 + 4.0 * _U


def components(lam: "np.ndarray", rho: "np.ndarray") -> list[int]:
    """Label of the connected component of each disc (discs that overlap or touch share one)."""
    return touching(lam, rho, TOUCH)


def touching(lam: "np.ndarray", radius: "np.ndarray", factor: float) -> list[int]:
    """Connected components of the relation ``|λi − λj| ≤ factor·(ri + rj)``: the smallest
    index of each point's component, by union-find over a sweep along the real axis."""
    import numpy as np

    n = lam.shape[0]
    order = np.argsort(lam.real, kind="stable")
    re = lam.real[order]
    rmax = float(radius.max()) if n else 0.0
    # Only points whose real parts lie within reach of the next one can touch; in the usual
    # spectrum there are none and the sweep below is skipped.
    reach_all = factor * (radius[order] + rmax)
    close = np.nonzero(np.diff(re) <= reach_all[:-1])[0] if n > 1 else ()
    return _join(lam, radius, factor, order, re, sorted(set(int(a) for a in close)), rmax)


def touching_small(lam: list[complex], radius: list[float], factor: float,
                   sweep: "tuple[list[int], list[float]] | None" = None) -> list[int]:
    """:func:`touching` of finite ``lam`` and ``radius`` (no NaN) given as lists: the same
    arithmetic on Python floats, without numpy's per-call cost (for a few dozen points).
    ``sweep``: :func:`sweep_order` of ``lam``, when the caller has it."""
    order, re = sweep_order([z.real for z in lam]) if sweep is None else sweep
    n = len(order)
    rmax = max(radius) if n else 0.0
    close = [a for a in range(n - 1) if re[a + 1] - re[a] <= factor * (radius[order[a]] + rmax)]
    if not close:  # the usual spectrum: every point its own component
        return list(range(n))
    return _join(lam, radius, factor, order, re, close, rmax)


def sweep_order(real: list[float]) -> tuple[list[int], list[float]]:
    """The order of :func:`touching`'s sweep (by real part, stable, as
    ``argsort(kind="stable")``) and the real parts in that order."""
    order = sorted(range(len(real)), key=real.__getitem__)
    return order, [real[i] for i in order]


def _join(lam, radius, factor: float, order, re, close: Sequence[int], rmax: float
          ) -> list[int]:
    """Union-find of :func:`touching` over the candidate positions ``close`` (ascending) of
    the sweep order ``order`` (real parts ``re`` in that order)."""
    n = len(order)
    edges = []
    for a in close:
        i = order[a]
        ri = radius[i]
        reach = factor * (ri + rmax)
        b = a + 1
        while b < n and re[b] - re[a] <= reach:
            j = order[b]
            if abs(lam[i] - lam[j]) <= factor * (ri + radius[j]):
                edges.append((i, j))
            b += 1
    if not edges:  # candidates, none touching (a complex pair's members, say)
        return list(range(n))
    # union-find: each root is the smallest index of its component, whatever the order
    parent = list(range(n))

    def find(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for i, j in edges:
        ri, rj = find(i), find(j)
        if ri != rj:
            parent[max(ri, rj)] = min(ri, rj)
    return [find(i) for i in range(n)]


def cluster_radius(lam: "Sequence[complex] | np.ndarray", rho: "Sequence[float] | np.ndarray | None",
                   labels: Sequence[int] | None, members: Sequence[int], centre: complex,
                   sizes: "Mapping[int, int] | None" = None) -> float:
    """Radius about ``centre`` of a disc holding exactly the eigenvalues of ``members``, when
    their discs form whole components of their own (the count is then certified); else inf.
    ``sizes``: the number of discs of each component label, when the caller has counted."""
    if rho is None or labels is None:
        return math.inf
    if sizes is not None and len(members) == 1:  # one disc: alone in its component or not
        i = members[0]
        if sizes[labels[i]] != 1:
            return math.inf
        return (abs(complex(lam[i]) - centre) + float(rho[i])) * (1.0 + 4.0 * _U)
    own = {labels[i] for i in members}
    count = (sum(1 for lab in labels if lab in own) if sizes is None
             else sum(sizes[lab] for lab in own))
    if count != len(members):
        return math.inf  # the component holds eigenvalues of another mode (or a conjugate)
    r = max(abs(complex(lam[i]) - centre) + float(rho[i]) for i in members)
    return r * (1.0 + 4.0 * _U)


def map_to_s(radius: float, z: complex, T: float) -> float:
    """A radius in the s-plane that holds ``log(z')/T`` for every ``|z' − z| ≤ radius``
    (|ln|z'| − ln|z|| ≤ −ln(1 − ρ/|z|), |arg z' − arg z| ≤ asin(ρ/|z|)); inf when the disc
    reaches z = 0."""
    r = abs(z)
    if not math.isfinite(radius) or radius >= r:
        return math.inf
    q = radius / r
    return math.hypot(-math.log1p(-q), math.asin(q)) / T * (1.0 + 16.0 * _U)
