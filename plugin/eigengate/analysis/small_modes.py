"""The modal analysis of a small dense standard model, with fewer numpy calls.

For a finite float64 matrix of at most :data:`~eigengate.analysis.small_lapack.SMALL_ORDER`
states and no E (the models most repositories hold), :func:`eigengate.analysis.modes.analyse`
takes this path. For such a model numpy's fixed cost per call, not the arithmetic, is most of
the time, so this path does the general path's arithmetic with fewer calls:

* the LAPACK routines of :mod:`eigengate.analysis.small_lapack` (balancing, ``xGEEV``);
* every value the general path computes twice computed once: ``|λ|``, ``wᴴv``, ``|A|``
  (for the 1-norm and for the enclosure), ``‖A‖F`` (for the norm reported and for the
  residual floor), ``conj(w)`` (for ``wᴴv`` and the participation factors);
* the first-order bounds and the enclosure by the general path's own functions
  (:func:`~eigengate.analysis.bounds.first_order`, :func:`~eigengate.analysis.bounds.gershgorin`),
  so the arithmetic is the same operations in the same order;
* the clustering sweeps on Python floats (:func:`~eigengate.analysis.bounds.touching_small`).

The results are the general path's bit for bit: ``tests/test_modes_small_path.py`` checks every
field of every mode against the general path (scipy's public functions, the general bounds and
clustering) on random matrices of many kinds and scales.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from .bounds import cap_defective, enclose, first_order, gershgorin
from .small_lapack import small_eig

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

__all__ = ["decompose", "bounds"]


def _norm1(absa: "np.ndarray") -> float:
    """``numpy.linalg.norm(A, 1)`` from ``|A|``: its own reduction (largest column sum)."""
    import numpy as np

    return float(np.add.reduce(absa, axis=0).max())  # initial=0 changes nothing: sums ≥ 0


def decompose(A: "np.ndarray", small: tuple):
    """What :func:`eigengate.analysis.modes._decompose` returns for a standard model, and
    ``|work|``: ``(lam, vr, vl, ‖work‖F, balanced, work, |work|)``."""
    import numpy as np

    absa = np.abs(A)
    norm_a = _norm1(absa)
    work, balanced, absw = A, False, absa
    if A.shape[0] > 1 and norm_a > 0:
        bal = small[0](A, scale=1, permute=0, overwrite_a=0)[0]  # matrix_balance's LAPACK call
        absb = np.abs(bal)
        if _norm1(absb) < 0.9 * norm_a:
            work, balanced, absw = bal, True, absb
    lam, vl, vr = small_eig(work, small)
    flat = work.ravel(order="K")  # numpy.linalg.norm(work, "fro"), its own arithmetic
    return lam, vr, vl, math.sqrt(flat.dot(flat)), balanced, work, absw


def bounds(work: "np.ndarray", absw: "np.ndarray", lam: "np.ndarray", vr: "np.ndarray",
           vl: "np.ndarray", norm: float, base: float):
    """``(delta, kappa, rho, conj(vl))``: the first-order bounds (defective eigenvalues
    capped), the condition numbers and the enclosure radii (None where the enclosure fails),
    as :func:`~eigengate.analysis.bounds.estimate`, :func:`~eigengate.analysis.bounds.cap_defective`
    and :func:`~eigengate.analysis.bounds.enclose` compute them for ``work``."""
    import numpy as np

    absl = np.abs(lam)
    vlc = vl.conj()
    dotc = np.einsum("ij,ij->j", vlc, vr)
    dots = np.abs(dotc)
    if vr.dtype.kind == "c":  # two real products, as bounds._mul does
        av = (work @ vr.real) + 1j * (work @ vr.imag)
    else:
        av = work @ vr
    R = av - vr * lam
    # finite and non-zero |wᴴv| means finite, non-zero wᴴv: enclose's own test passes
    sure = all(0.0 < d < math.inf for d in dots.tolist())
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        delta, kappa = first_order(R, vr, vl, dots, absl, norm, 1.0)
        cap_defective(lam, delta, base, norm, lam.shape[0])
        rho = gershgorin(absw, absl, vr, vl, R, dotc) if sure else None
    if not sure:  # enclose decides (it refuses, or an overflow of |wᴴv| alone)
        rho = enclose(work, lam, vr, vl, R)
    return delta, kappa, rho, vlc
