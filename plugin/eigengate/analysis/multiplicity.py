"""The geometric multiplicity of a cluster of eigenvalues: how many independent eigenvectors
it has, which tells a defective (Jordan-block) cluster from a semisimple one."""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

    from ..model.core import Model

__all__ = ["SVD_RANK_LIMIT", "geometric_multiplicity", "vector_rank"]

#: Above this order, geometric multiplicity is read from the eigenvectors instead of an SVD.
SVD_RANK_LIMIT = 400


def geometric_multiplicity(model: "Model", centre: complex, vectors: "np.ndarray", size: int,
                           norm: float) -> int:
    """Geometric multiplicity of a cluster: null-space dimension of A - λE at the cluster mean."""
    import numpy as np

    n = model.n_states
    eps = np.finfo(float).eps
    if n <= SVD_RANK_LIMIT:
        E = np.eye(n) if model.E is None else model.E
        sv = np.linalg.svd(model.A - centre * E, compute_uv=False)
        tol = 1e3 * n * eps * (norm + abs(centre))
        return int(min(size, max(1, int(np.sum(sv <= tol)))))
    # above the limit: directions of the vectors' span on which A − λE is at rounding level
    # (σ_j((A − λE)Q) ≥ σ_{n−r+j}(A − λE), so they count null directions as the SVD above
    # does), or the vectors' own rank when that is larger
    u, sv, _ = np.linalg.svd(vectors, full_matrices=False)
    Q = u[:, sv > 1e-10 * sv[0]]
    AQ = model.A @ Q - centre * (Q if model.E is None else model.E @ Q)
    tol = 1e3 * n * eps * (norm + abs(centre))
    flat = int(np.sum(np.linalg.svd(AQ, compute_uv=False) <= tol))
    return int(min(size, max(flat, vector_rank(vectors, size))))


def vector_rank(vectors: "np.ndarray", size: int) -> int:
    """Geometric multiplicity of a cluster of ``size`` from its eigenvectors: they are
    (nearly) parallel when it is defective (used above :data:`SVD_RANK_LIMIT` states and for
    sparse models)."""
    import numpy as np

    eps = np.finfo(float).eps
    unit = vectors / np.linalg.norm(vectors, axis=0)
    sv = np.linalg.svd(unit, compute_uv=False)
    # a group of parallel unit vectors has a singular value ≥ 1, so 0.5 caps the tolerance,
    # which for size ≥ 16 would otherwise exceed sv[0] and call any cluster defective
    return int(max(1, np.sum(sv > min(10.0 * eps ** (1.0 / size) * sv[0], 0.5))))
