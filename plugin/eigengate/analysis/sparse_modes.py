"""Sparse modal analysis: the modes in the regions requirements judge, by shift-invert Arnoldi.

A model with 10⁵–10⁶ states cannot be decomposed in full, and need not be: a requirement
judges the eigenvalues in one region of the s-plane (right of a decay-rate line, inside a
damping sector, beyond a frequency). This module finds the eigenvalues there and says how far
the search reached; the spectrum it returns is *partial* (:attr:`Spectrum.search`).

* **Where eigenvalues can be.** For a standard model, Bendixson's theorem (Acta Math. 1902)
  puts every eigenvalue of A in the rectangle ``λmin(H) ≤ Re λ ≤ λmax(H)``,
  ``|Im λ| ≤ ρ(S)`` with ``H = (A + Aᵀ)/2`` and ``S = (A − Aᵀ)/2``; Gershgorin's theorem
  bounds those from the rows of H and S (O(nnz), rounding of the row sums bounded by
  ``γ_k`` of Higham, *Accuracy and Stability*, ch. 3). That rectangle, cut down to each
  requirement's region (:class:`Target`), is what the search must cover. A descriptor
  model has no such bound, so its search covers discs only.
* **Shift-invert Arnoldi** (ARPACK through ``scipy.sparse.linalg.eigs``) with the operator
  ``(A − σE)⁻¹E`` applied through one sparse LU (``scipy.sparse.linalg.splu``) per shift σ
  finds the k eigenvalues nearest σ; when it converged, every eigenvalue it did not return
  lies at least as far from σ as the farthest one it did, so the open disc of that radius is
  *searched*. Shifts are placed at the centres of the parts of the region no disc covers
  yet (a quadtree over the rectangle, conjugate symmetry halving it), up to
  :data:`MAX_SHIFTS` factorisations; k is doubled once at a shift (the LU reused) before a
  new one is made. This guards against missing a rightmost eigenvalue far from the first
  shift, as repeated shifts do in Meerbergen & Roose (IMA J. Numer. Anal. 1996): the search
  goes on until the region right of the line is covered. Its limit: Arnoldi can miss an
  eigenvalue whose eigenvector the start vector barely meets, so a region covered this way
  is *searched*, not proved empty. Verdicts say so and are never certified by the search.
* **The largest frequencies** (``max_frequency``) come from plain Arnoldi on A (which="LM"):
  every eigenvalue it did not return is no larger than the smallest it did.
* **Error bounds**: each eigenpair gets the residual bound of the dense path
  (:func:`eigengate.analysis.bounds.estimate`): ``2·(‖Av − λEv‖ + floor)·‖w‖/|wᴴEv|``, the
  left vector w from a second Arnoldi run on the transposed operator with the same LU
  (w = v when A and E are symmetric). The backward error ``‖Av − λEv‖/‖v‖`` is the
  residual part; κ turns it into an eigenvalue bound to first order.
* **Certificates from structure**: where Bendixson's rectangle misses a requirement's region
  entirely, no eigenvalue can lie there, which is a proof (rigorous row sums). For a
  symmetric A, Sylvester's law of inertia would count the eigenvalues right of a line from
  the pivots of an LDLᵀ factorisation; scipy has no sparse LDLᵀ, and the pivots of SuperLU's
  LU are not an inertia count in general (row interchanges break the congruence), so this
  module does not claim it (see :func:`inertia_right_of` for what is done instead).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Iterable

from ..errors import ModelError
from ..model.core import Model
from .bounds import cap_defective, estimate, frobenius
from .modes import (BOUND_FACTOR, Mode, Spectrum, _clusters, _mode_fields, analyse, sort_key,
                    vector_rank)
from .sparse_regions import Disc, Rect, Search, Target

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

__all__ = ["Target", "Disc", "Search", "analyse_sparse", "spectrum_of", "bendixson", "K_START",
           "MAX_SHIFTS", "SMALL"]

#: Eigenvalues asked of each shift at first (doubled once when its disc falls short).
K_START = 8
#: Most sparse LU factorisations (shifts) one model's search makes.
MAX_SHIFTS = 8
#: At most this many states, a sparse model is decomposed in full (ARPACK needs k < n − 1).
SMALL = 24
#: ARPACK's relative accuracy of the Ritz values (the bounds come from the true residuals).
ARNOLDI_TOL = 1e-13
#: Most implicit restarts of one Arnoldi run; a run that does not converge claims no disc.
MAX_RESTARTS = 300
#: Seed of the start vectors: the same search on every run.
SEED = 15

_U = 2.0 ** -53

def _gamma(k: int) -> float:
    ku = k * _U
    return ku / (1.0 - ku) * (1.0 + 4.0 * _U)


def bendixson(A: Any) -> Rect:
    """Bendixson's rectangle of a sparse real A (upper half), from Gershgorin row sums of its
    symmetric and skew-symmetric parts, widened by the rounding of those sums."""
    import numpy as np

    A = A.tocsr()
    At = A.T.tocsr()
    H = (A + At) * 0.5
    S = (A - At) * 0.5
    diag = H.diagonal()
    absH = abs(H)
    off = np.asarray(absH.sum(axis=1)).ravel() - np.abs(diag)
    skew = np.asarray(abs(S).sum(axis=1)).ravel()
    width = int(np.diff(A.indptr).max() + np.diff(At.indptr).max()) + 4
    # each row sum of k terms (and the halving) is wrong by at most γ_k times the sum of
    # absolute values, which is at most the row sum of |H| (or |S|)
    slack = _gamma(width) * float(np.asarray(absH.sum(axis=1)).max()) + 1e-300
    x1 = float((diag + off).max()) + slack
    x0 = float((diag - off).min()) - slack
    top = float(skew.max())  # exactly 0 for a symmetric A: (a − a)/2 has no rounding
    y1 = top * (1.0 + _gamma(width)) + 1e-300 if top > 0 else 0.0
    return (x0, x1, 0.0, y1)


# ------------------------------------------------------------------ the search


@dataclass
class _Pairs:
    """Eigenpairs found so far: values, right vectors, left vectors (columns)."""

    lam: list
    vr: list
    vl: list
    q: list  # right vectors orthonormalised against those of near values


def _operator(lu: Any, E: Any, n: int, dtype: Any, transpose: bool) -> Any:
    from scipy.sparse.linalg import LinearOperator

    if transpose:
        Et = None if E is None else E.T.tocsr()

        def mv(x):
            return lu.solve(x if Et is None else Et @ x, trans="T")
    else:
        def mv(x):
            return lu.solve(x if E is None else E @ x)
    return LinearOperator((n, n), matvec=mv, dtype=dtype)


def _arnoldi(op: Any, k: int, n: int, seed: int, which: str = "LM") -> tuple[Any, Any, bool]:
    """(values, vectors, converged) of ARPACK's ``k`` eigenvalues of ``op``."""
    import numpy as np
    from scipy.sparse.linalg import ArpackError, ArpackNoConvergence, eigs

    rng = np.random.default_rng(seed)
    v0 = rng.standard_normal(n)
    if np.dtype(op.dtype).kind == "c":
        v0 = v0 + 1j * rng.standard_normal(n)
    try:
        mu, v = eigs(op, k=k, which=which, v0=v0, ncv=min(n - 1, max(2 * k + 1, 20)),
                     tol=ARNOLDI_TOL, maxiter=MAX_RESTARTS)
        return mu, v, True
    except ArpackNoConvergence as exc:  # keep what converged; claim no disc
        return exc.eigenvalues, exc.eigenvectors, False
    except ArpackError:
        return np.zeros(0, complex), np.zeros((n, 0), complex), False


def _factor(A: Any, E: Any, sigma: complex, scale: float) -> tuple[Any, complex]:
    """Sparse LU of ``A − σE`` (σ nudged when it hits an eigenvalue exactly)."""
    import scipy.sparse as sp

    from .lowrank import factor

    n = A.shape[0]
    ident = sp.identity(n, format="csc") if E is None else E
    for attempt in range(4):
        shift: complex | float = sigma if sigma.imag != 0 else sigma.real  # real LU if real
        M = (A - shift * ident) if shift != 0 else A.astype(float)
        try:
            return factor(sp.csc_matrix(M)), sigma
        except RuntimeError:  # exactly singular: σ is an eigenvalue
            sigma = sigma + complex(1e-7 * scale * 10.0 ** attempt, 0.0)
    raise ModelError("<sparse>", "plant.A", "could not factor A − σE at any shift tried")


def _left_vectors(lam_r: Any, mu_t: Any, u: Any, sigma: complex) -> Any:
    """Left vectors matched to ``lam_r`` from the transposed run (values σ + 1/μ); a value
    with no match within 1e-8 relative gets a zero column (its bound becomes infinite)."""
    import numpy as np

    n = u.shape[0]
    lam_t = sigma + 1.0 / mu_t
    out = np.zeros((n, len(lam_r)), dtype=complex)
    for i, lam in enumerate(lam_r):
        if not len(lam_t):
            break
        j = int(np.argmin(np.abs(lam_t - lam)))
        if abs(lam_t[j] - lam) <= 1e-8 * max(1.0, abs(lam)):
            out[:, i] = u[:, j].conj()  # (A − λE)ᵀ u = 0 ⇔ wᴴ(A − λE) = 0 with w = ū
    return out


def _add(pairs: _Pairs, lam: Any, vr: Any, vl: Any) -> int:
    """Add eigenpairs, dropping any whose right vector lies in the span of those already
    kept for a value within 1e-8 relative (the same eigenvalue found from two shifts);
    returns how many were added. The span test projects out, twice (Gram–Schmidt with
    reorthogonalisation), the orthonormalised vectors kept with each near value."""
    import numpy as np

    added = 0
    for i in range(len(lam)):
        v = vr[:, i] / np.linalg.norm(vr[:, i])
        near = [j for j, old in enumerate(pairs.lam)
                if abs(old - lam[i]) <= 1e-8 * max(1.0, abs(lam[i]))]
        r = v
        for _ in range(2 if near else 0):
            for j in near:
                r = r - pairs.q[j] * np.vdot(pairs.q[j], r)
        size = float(np.linalg.norm(r))
        if near and size < 1e-6:
            continue
        pairs.lam.append(complex(lam[i]))
        pairs.vr.append(v)
        pairs.vl.append(vl[:, i])
        pairs.q.append(r / size)
        added += 1
    return added


def _run(A: Any, E: Any, sigma: complex, k: int, symmetric: bool, scale: float, seed: int,
         pairs: _Pairs, lu: Any = None, left: Any = None) -> tuple[Disc | None, Any, complex]:
    """One shift: k eigenvalues nearest σ (and their left vectors) into ``pairs``; returns
    the searched disc (None when ARPACK did not converge), the LU, and σ used."""
    import numpy as np

    n = A.shape[0]
    if lu is None:
        lu, sigma = _factor(A, E, sigma, scale)
    dtype = complex if sigma.imag != 0 else float
    mu, v, ok = _arnoldi(_operator(lu, E, n, dtype, False), k, n, seed)
    keep = np.abs(mu) > 0
    mu, v = mu[keep], v[:, keep]
    lam = sigma + 1.0 / mu
    if symmetric:
        w = v
    elif left is not None:  # a symmetric second-order model: left vectors from the right
        w = left(lam, v)
    else:
        mu_t, u, _ = _arnoldi(_operator(lu, E, n, dtype, True), k, n, seed + 1)
        w = _left_vectors(lam, mu_t[np.abs(mu_t) > 0], u[:, np.abs(mu_t) > 0], sigma)
    if not _add(pairs, lam, v, w):
        return None, lu, sigma  # nothing new: no disc, and the search stops
    if not ok or len(lam) < k:
        return Disc(sigma, 0.0), lu, sigma
    return Disc(sigma, float(np.abs(lam - sigma).max())), lu, sigma


def _magnitude(A: Any, k: int, symmetric: bool, seed: int, pairs: _Pairs) -> float | None:
    """The k eigenvalues of largest magnitude (plain Arnoldi) into ``pairs``; returns the
    bound every other eigenvalue's magnitude is below (None when not converged)."""
    import numpy as np
    from scipy.sparse.linalg import aslinearoperator

    n = A.shape[0]
    lam, v, ok = _arnoldi(aslinearoperator(A), k, n, seed)
    if symmetric:
        w = v
    else:
        lt, u, _ = _arnoldi(aslinearoperator(A.T.tocsr()), k, n, seed + 1)
        w = _left_vectors(lam, 1.0 / np.where(lt == 0, np.inf, lt), u, 0j)
    _add(pairs, lam, v, w)
    return float(np.abs(lam).min()) if ok and len(lam) == k else None


def _next_shift(leaves: list[Rect]) -> complex:
    """A shift at the centre of the largest uncovered leaf; real when the leaf sits on the
    real axis and is no taller than it is wide (a real LU costs a quarter of a complex one)."""
    x0, x1, y0, y1 = max(leaves, key=lambda r: (math.hypot(r[1] - r[0], r[3] - r[2]), r))
    xc = 0.5 * (x0 + x1)
    if y0 == 0.0 and (y1 - y0) <= max(x1 - x0, 0.0):
        return complex(xc, 0.0)
    return complex(xc, 0.5 * (y0 + y1))


def spectrum_of(model: Model, targets: Iterable[Target] | None = None) -> Spectrum:
    """The spectrum every front end reads: the sparse search for a sparse model (covering
    ``targets``), every eigenvalue otherwise."""
    return analyse_sparse(model, targets) if model.sparse else analyse(model)


def analyse_sparse(model: Model, targets: Iterable[Target] | None = None) -> Spectrum:
    """The partial spectrum of a sparse model: the modes in ``targets`` (default: the closed
    right half-plane), with what the search covered in :attr:`Spectrum.search`."""
    import numpy as np
    import scipy.sparse as sp

    if model.discrete and model.E is not None:
        raise ModelError(model.source, "plant.E", "is given for a discrete model, but the "
                         "sparse analysis of discrete models takes x[k+1] = A x[k] only",
                         line=model.line_of("plant.E"), hint="give E⁻¹A as A")
    A = sp.csr_matrix(model.A, dtype=float)
    E = None if model.E is None else sp.csr_matrix(model.E, dtype=float)
    n = A.shape[0]
    if n <= SMALL:  # ARPACK needs k < n − 1: decompose in full (a complete spectrum)
        import dataclasses

        return analyse(dataclasses.replace(model, A=A.toarray(),
                                           E=None if E is None else E.toarray()))
    targets = tuple(targets) if targets else (Target("right", 0.0),)
    symmetric = (A != A.T).nnz == 0 and (E is None or (E != E.T).nnz == 0)
    norm = frobenius(A) + (0.0 if E is None else frobenius(E))
    scale = max(norm / math.sqrt(n), 1e-300)
    box = None if E is not None or model.discrete else bendixson(A)
    pairs = _Pairs([], [], [], [])
    discs: list[Disc] = []
    outer = None
    shifts = 0
    tried: set[complex] = set()
    k = min(K_START, n - 2)
    if box is not None and any(t.kind == "outside" and t.clip(box) is not None
                               for t in targets):
        outer = _magnitude(A, k, symmetric, SEED + 100, pairs)
    from .structure import companion_left

    left = None if symmetric or model.discrete else companion_left(A, E)
    radius = None
    if model.discrete:  # the eigenvalues of largest modulus, nothing else (sparse_discrete)
        from .sparse_discrete import largest_moduli

        outer, shifts, radius = largest_moduli(A, targets, float(model.sample_period or 0.0),
                                               k, symmetric,
                                               pairs, lambda *a: _magnitude(*a))
    while shifts < MAX_SHIFTS and not model.discrete:
        if box is None:
            if shifts:
                break
            leaves = []
            sigma = complex(max((t.value for t in targets if t.kind == "right"), default=0.0))
        else:
            leaves = [leaf for t in targets
                      for leaf in Search(box, tuple(discs), outer, targets, shifts, 0, n,
                                         symmetric).uncovered(t)]
            if not leaves and shifts:
                break
            # nothing left to search before the first shift (Bendixson's rectangle misses
            # every region): one shift at its right edge still lists the rightmost modes
            sigma = _next_shift(leaves) if leaves else complex(box[1], 0.0)
            leaves = [leaf for leaf in leaves if _next_shift([leaf]) not in tried]
            if not leaves and shifts:  # every part left was tried and gave nothing new
                break       # (a value of multiplicity > k, or no convergence there)
            sigma = _next_shift(leaves) if leaves else sigma
        if sigma in tried:
            break
        tried.add(sigma)
        disc, lu, sigma = _run(A, E, sigma, k, symmetric, scale, SEED + 2 * shifts, pairs,
                               left=left)
        shifts += 1
        if disc is None:
            continue
        if disc.radius > 0 and leaves and not any(disc.holds(r) for r in leaves) \
                and 2 * k < n - 1:  # once more at this shift with twice the eigenvalues
            bigger, _, _ = _run(A, E, sigma, 2 * k, symmetric, scale, SEED + 2 * shifts,
                                pairs, lu, left)
            disc = bigger if bigger is not None and bigger.radius > 0 else disc
        if disc.radius > 0:
            discs.append(disc)
    lu = None  # the last LU is not needed by the certificates below: free it first
    # conjugates of the complex eigenpairs (a real model's spectrum is symmetric)
    lam0 = np.array(pairs.lam, dtype=complex)
    vr0 = np.stack(pairs.vr, axis=1) if pairs.vr else np.zeros((n, 0), complex)
    vl0 = np.stack(pairs.vl, axis=1) if pairs.vl else np.zeros((n, 0), complex)
    cx = np.nonzero(np.abs(lam0.imag) > 0)[0]
    _add(pairs, lam0[cx].conj(), vr0[:, cx].conj(), vl0[:, cx].conj())
    if not pairs.lam:
        raise ModelError(model.source, "plant.A", "the sparse search found no eigenvalue",
                         line=model.line_of("plant.A"), hint="check the model's matrices")
    lam = np.array(pairs.lam, dtype=complex)
    vr = np.stack(pairs.vr, axis=1)
    vl = np.stack(pairs.vl, axis=1)
    ew = vl if E is None else E.T @ vl  # Eᴴw for a real E
    delta, kappa, _ = estimate(A, E, lam, vr, vl, ew)
    missing = ~np.any(vl != 0, axis=0)  # no left vector matched: no bound
    delta[missing] = np.inf
    base = BOUND_FACTOR * n * 2.0 ** -52 * max(norm, 1e-300)
    cap_defective(lam, delta, base, norm, len(lam))
    raw = np.abs(vr * ew.conj())
    sums = raw.sum(axis=0)
    sums[sums == 0] = 1.0
    part = raw / sums
    rows = []
    for members in _clusters(lam, delta):
        vals = lam[members]
        centre = complex(vals.mean())
        err = max(float(np.max(np.abs(vals - centre))), float(delta[members].max()))
        geometric = 1 if len(members) == 1 else vector_rank(vr[:, members], len(members))
        if abs(centre.imag) <= err:
            centre = complex(centre.real, 0.0)
        elif centre.imag < 0:
            continue
        rows.append(_mode_fields(model, centre, err, len(members), geometric,
                                 float(kappa[members].max()), part[:, members].mean(axis=1)))
    rows.sort(key=sort_key)
    modes = tuple(Mode(index=i + 1, states=model.states, **r) for i, r in enumerate(rows))
    from .structure import prove

    search = Search(box=box, discs=tuple(discs), outer=outer, targets=targets, shifts=shifts,
                    found=len(lam), n=n, symmetric=symmetric,
                    proofs=prove(A, E, [t for t in targets if box is None or
                                        t.clip(box) is not None], symmetric,
                                 model.sample_period),
                    sample_period=model.sample_period, radius=radius)
    return Spectrum(model=model, modes=modes, infinite=0, norm=norm, balanced=False,
                    search=search)
