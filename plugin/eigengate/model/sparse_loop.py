"""Static feedback around a sparse plant, kept sparse.

``u[inputs] = −K x`` (state gain) or ``u[inputs] = −K y[outputs]`` (output gain) closes to
``A_cl = A + B_s G`` with ``G = −(I + K D_ss)⁻¹ K C_m`` (``C_m = I`` for a state gain), the
formulas of :mod:`eigengate.model.interconnect` with the n×n products never formed dense:
``B_s G`` has a nonzero row only where ``B_s`` has one, so an actuator at a few states adds a
few (possibly full) rows. The sparse search factors such a matrix through the Woodbury
identity (:mod:`eigengate.analysis.lowrank`), so those rows cause no fill.
"""

from __future__ import annotations

from typing import Any, Sequence

from .interconnect import _well_posed

__all__ = ["sparse_gain_feedback"]


def sparse_gain_feedback(a: Any, b: Any, c: Any, d: Any, k: Any, inputs: Sequence[int],
                         outputs: Sequence[int] | None) -> tuple[Any, Any, Any, Any]:
    """(A_cl sparse CSR, B_cl, C_cl, D_cl) of a state gain (``outputs`` None) or an output
    gain around the sparse plant (a, b, c, d)."""
    import numpy as np
    import scipy.sparse as sp

    sel = np.zeros((b.shape[1], len(inputs)))
    sel[list(inputs), range(len(inputs))] = 1.0
    bs, ds = b @ sel, d @ sel
    if outputs is None:  # C_m = I, D_m = 0
        mm = np.eye(len(inputs))
        gx = -(mm @ k)
        gr = np.zeros((len(inputs), b.shape[1]))
    else:
        out = list(outputs)
        cm, dm = c[out, :], d[out, :]
        mm = _well_posed(np.eye(len(inputs)) + k @ (dm @ sel), "K·D")
        gx = -(mm @ k @ cm)
        gr = -(mm @ k @ dm)
    a_cl = (a + sp.csr_matrix(bs) @ sp.csr_matrix(gx)).tocsr()
    a_cl.sum_duplicates()
    a_cl.eliminate_zeros()
    a_cl.sort_indices()
    return a_cl, b + bs @ gr, c + ds @ gx, d + ds @ gr
