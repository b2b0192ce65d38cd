"""Second-order (structural) models ``M q'' + D q' + K q = F u``, ``y = Cq q + Cv q'``.

The model is stored in companion form with the state ``x = (q, q')``::

    E = [[I, 0], [0, M]],   A = [[0, I], [−K, −D]],   B = [[0], [F]],   C = [Cq, Cv]

a linearisation of ``λ²M + λD + K`` with the same eigenvalues (Tisseur & Meerbergen, SIAM
Review 2001). It is built sparse (scipy.sparse blocks) whatever the size, so a large model is
never made dense: above :data:`~eigengate.model.core.SPARSE_THRESHOLD` states (or with
``sparse: true``) A and E stay sparse and go to the sparse search; below, they are made
dense and analysed in full (QZ of the pencil; E is dropped when M is the identity). The
structure is read back from the matrices by :mod:`eigengate.analysis.structure`, which
certifies models with symmetric positive definite M, K and semidefinite D.

Errors name the file and the field (``plant.second_order.K``) with what was found and what
was expected: M, D, K square and of one size, F with one row per coordinate, Cq and Cv with
one column per coordinate and the same number of rows, M nonsingular.
"""

from __future__ import annotations

from typing import Any, Mapping, Sequence

from ..errors import ModelError
from .core import (SPARSE_THRESHOLD, Model, as_matrix, as_sparse, dense_limit, from_arrays,
                   is_sparse)

__all__ = ["from_second_order", "SECOND_ORDER_KEYS"]

#: Keys of a ``second_order:`` block.
SECOND_ORDER_KEYS = ("M", "D", "K", "F", "Cq", "Cv", "coordinates")


def _names(coordinates: Sequence[str] | None, n: int) -> list[str]:
    names = [f"q{i + 1}" for i in range(n)] if coordinates is None else list(coordinates)
    return names + [f"{c}'" for c in names]


def from_second_order(
    M: Any,
    K: Any,
    D: Any = None,
    F: Any = None,
    Cq: Any = None,
    Cv: Any = None,
    *,
    coordinates: Sequence[str] | None = None,
    inputs: Sequence[str] | None = None,
    outputs: Sequence[str] | None = None,
    sparse: bool | None = None,
    source: str = "<arrays>",
    lines: Mapping[str, int] | None = None,
    prefix: str = "",
    **kwargs: Any,
) -> Model:
    """A :class:`Model` of ``M q'' + D q' + K q = F u``, ``y = Cq q + Cv q'`` in companion form
    (module docstring). Matrices may be dense or scipy.sparse; ``D`` defaults to zero, ``F``
    to no inputs, ``Cq``/``Cv`` to no outputs. ``coordinates`` names q (the states are
    those names and the names with a prime); the default is q1…qn and q1'…qn'. ``prefix`` is
    put before field names in errors (``"plant.second_order."``)."""
    import numpy as np
    import scipy.sparse as sp

    lines = dict(lines or {})

    def where(key: str) -> str:
        return prefix + key

    def err(key: str, problem: str, hint: str | None = None) -> ModelError:
        return ModelError(source, where(key), problem, line=lines.get(where(key)), hint=hint)

    def square(value: Any, key: str) -> Any:
        m = as_sparse(value if is_sparse(value) else as_matrix(value, source, where(key),
                                                               line=lines.get(where(key))),
                      source, where(key), line=lines.get(where(key)))
        if m.shape[0] != m.shape[1]:
            raise err(key, f"must be square, got {m.shape[0]}×{m.shape[1]}")
        return m

    m_ = square(M, "M")
    n = m_.shape[0]
    if n == 0:
        raise err("M", "must not be empty, got a 0×0 matrix")
    k_ = square(K, "K")
    d_ = sp.csr_matrix((n, n)) if D is None else square(D, "D")
    for key, mat in (("K", k_), ("D", d_)):
        if mat.shape != (n, n):
            raise err(key, f"must be {n}×{n} like M, got {mat.shape[0]}×{mat.shape[1]}")
    keep = sparse if sparse is not None else (
        any(is_sparse(x) for x in (M, K, D)) and 2 * n > SPARSE_THRESHOLD)
    from .limits import MAX_SPARSE_STATES

    limit = MAX_SPARSE_STATES if keep else dense_limit()
    if 2 * n > limit:
        raise err("M", f"has {n} coordinates ({2 * n} states), more than the limit of {limit} "
                  f"states for a {'sparse' if keep else 'dense'} model",
                  None if keep else "store M, D and K as sparse matrix files (or set "
                  "sparse: true) to use the sparse modal search")
    _nonsingular(m_, err)

    def rect(value: Any, key: str, rows: int | None, cols: int | None) -> Any:
        if value is None:
            return None
        a = as_matrix(value, source, where(key), line=lines.get(where(key)))
        if rows is not None and a.shape[0] != rows:
            raise err(key, f"must have {rows} rows (one per coordinate of M), got "
                      f"{a.shape[0]}×{a.shape[1]}")
        if cols is not None and a.shape[1] != cols:
            raise err(key, f"must have {cols} columns (one per coordinate of M), got "
                      f"{a.shape[0]}×{a.shape[1]}")
        return a

    f_ = rect(F, "F", n, None)
    cq, cv = rect(Cq, "Cq", None, n), rect(Cv, "Cv", None, n)
    if cq is not None and cv is not None and cq.shape[0] != cv.shape[0]:
        raise err("Cv", f"must have {cq.shape[0]} rows like Cq (one per output), got "
                  f"{cv.shape[0]}")
    p = cq.shape[0] if cq is not None else (cv.shape[0] if cv is not None else 0)
    b = np.zeros((2 * n, 0)) if f_ is None else np.vstack([np.zeros((n, f_.shape[1])), f_])
    c = np.hstack([np.zeros((p, n)) if cq is None else cq, np.zeros((p, n)) if cv is None
                   else cv])
    eye = sp.identity(n, format="csr")
    a = sp.bmat([[None, eye], [-k_, -d_]], format="csr")
    ident_m = m_.nnz == n and bool((m_.diagonal() == 1.0).all())
    e = None if ident_m else sp.block_diag([eye, m_], format="csr")
    if coordinates is not None:
        names = list(coordinates)
        if len(names) != n or not all(isinstance(x, str) and x.strip() for x in names):
            raise err("coordinates", f"must name {n} coordinates (one per row of M) with "
                      f"non-empty strings, got {len(names)} entries")
    return from_arrays(a, b, c, None, e, states=_names(coordinates, n), inputs=inputs,
                       outputs=outputs, source=source, lines=lines, prefix=prefix,
                       sparse=bool(keep), structure="second order", **kwargs)


def _nonsingular(m: Any, err: Any) -> None:
    """Refuse a singular M (the companion pencil would have infinite eigenvalues): an exact
    zero pivot of its sparse LU, or a pivot below n·eps of the largest entry."""
    import numpy as np
    from scipy.sparse.linalg import splu

    n = m.shape[0]
    top = float(np.abs(m.data).max()) if m.nnz else 0.0
    try:
        lu = splu(m.tocsc())
        piv = np.abs(lu.U.diagonal())
        singular = top == 0.0 or float(piv.min()) <= n * 2.0 ** -52 * top
    except RuntimeError:
        singular = True
    if singular:
        raise err("M", "is singular (the mass matrix must be invertible)",
                  "a coordinate without mass is an algebraic constraint: give the model as "
                  "a descriptor state-space plant (A, E) instead")
