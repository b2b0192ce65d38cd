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

from .bounds import (_U, EST_FLOOR, EST_SAFETY, FIGURE_FLOOR, cap_defective, column_norms, enclose,
                     hoelder, identity, rounding)
from .small_lapack import small_eig_stacked

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

__all__ = ["decompose", "bounds", "first_order", "gershgorin"]


def _norm1(absa: "np.ndarray") -> float:
    """``numpy.linalg.norm(A, 1)`` from ``|A|``: its own reduction (largest column sum)."""
    import numpy as np

    # x.max() is numpy.maximum.reduce(x); initial=0 changes nothing: sums ≥ 0
    return float(np.maximum.reduce(np.add.reduce(absa, axis=0)))


def decompose(A: "np.ndarray", small: tuple):
    """What :func:`eigengate.analysis.modes._decompose` returns for a standard model, ``|work|``
    and the vectors stacked (:func:`~eigengate.analysis.small_lapack.small_eig_stacked`):
    ``(lam, vr, vl, both, ‖work‖F, balanced, work, |work|)``."""
    import numpy as np

    absa = np.abs(A)
    norm_a = _norm1(absa)
    work, balanced, absw = A, False, absa
    if A.shape[0] > 1 and norm_a > 0:
        # matrix_balance's LAPACK call, dgebal(a, scale=1, permute=0, overwrite_a=0)
        bal = small[0](A, 1, 0, 0)[0]
        absb = np.abs(bal)
        if _norm1(absb) < 0.9 * norm_a:
            work, balanced, absw = bal, True, absb
    lam, vl, vr, both = small_eig_stacked(work, small)
    flat = work.ravel(order="K")  # numpy.linalg.norm(work, "fro"), its own arithmetic
    return lam, vr, vl, both, math.sqrt(flat.dot(flat)), balanced, work, absw


#: Below these, no product, quotient or sum of :func:`bounds` can overflow (see there).
_QUIET_NORM = 1e100
_QUIET_DOT = 1e-100


def bounds(work: "np.ndarray", absw: "np.ndarray", lam: "np.ndarray", vr: "np.ndarray",
           vl: "np.ndarray", both: "np.ndarray | None", norm: float, base: float):
    """``(delta, kappa, rho, conj(vl))``: the first-order bounds (defective eigenvalues
    capped), the condition numbers and the enclosure radii (None where the enclosure fails),
    as :func:`~eigengate.analysis.bounds.estimate`, :func:`~eigengate.analysis.bounds.cap_defective`
    and :func:`~eigengate.analysis.bounds.enclose` compute them for ``work``; the first three
    as lists. ``both``: the stacked vectors of
    :func:`~eigengate.analysis.small_lapack.small_eig_stacked` (or None), whose column norms
    are taken in one reduction (each row of a C-ordered ``both`` is a column of a
    Fortran-ordered vl or vr: the same contiguous sums)."""
    import numpy as np

    absl = np.abs(lam)
    if both is not None:
        bothc = both.conj()
        vlc = bothc[0].T  # vl.conj(), the same values and layout
        wnorm, vnorm = np.sqrt(np.add.reduce((bothc * both).real, axis=(2,))).tolist()
    else:
        vlc = vl.conj()
        vnorm, wnorm = column_norms(vr).tolist(), column_norms(vl).tolist()
    dotc = np.einsum("ij,ij->j", vlc, vr)
    dots = np.abs(dotc).tolist()
    if vr.dtype.kind == "c":  # two real products, as bounds._mul does
        av = (work @ vr.real) + 1j * (work @ vr.imag)
    else:
        av = work @ vr
    R = av - vr * lam
    # finite and non-zero |wᴴv| means finite, non-zero wᴴv: enclose's own test passes
    sure = all(0.0 < d < math.inf for d in dots)
    # Unit eigenvectors (|v|, |w| ≤ 1), ‖work‖F < 1e100 and |wᴴv| > 1e-100 keep every entry
    # below (n + 1)·1e100 (R), 1e100 (the rows of Y), n²·1e204 (the products and sums of
    # gershgorin): no division by zero, overflow or invalid operation, so numpy.errstate
    # has nothing to change (underflow, which it leaves alone, aside).
    if sure and norm < _QUIET_NORM and min(dots, default=1.0) > _QUIET_DOT:
        delta, kappa, rho = _bounds(work, absw, lam, vr, vl, vlc, R, dotc, dots, absl, vnorm,
                                    wnorm, norm, base)
    else:
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            delta, kappa, rho = _bounds(work, absw, lam, vr, vl, vlc, R, dotc, dots, absl,
                                        vnorm, wnorm, norm, base, sure)
    return delta, kappa, rho, vlc


def _bounds(work, absw, lam, vr, vl, vlc, R, dotc, dots, absl, vnorm, wnorm, norm, base,
            sure: bool = True):
    """:func:`bounds` once its products are formed (under the caller's numpy.errstate)."""
    delta, kappa = first_order(vnorm, wnorm, column_norms(R).tolist(), dots, absl.tolist(),
                               R.shape[0], norm)
    h2 = hoelder(base, norm, 2)
    if any(d > h2 for d in delta):  # cap_defective's own test
        import numpy as np

        capped = np.array(delta)
        cap_defective(lam, capped, base, norm, lam.shape[0])
        delta = capped.tolist()
    if sure:
        rho = gershgorin(absw, absl, vr, vlc, R, dotc)
    else:  # enclose decides (it refuses, or an overflow of |wᴴv| alone)
        radii = enclose(work, lam, vr, vl, R)
        rho = None if radii is None else radii.tolist()
    return delta, kappa, rho


def first_order(vnorm: list[float], wnorm: list[float], rnorm: list[float], dots: list[float],
                absl: list[float], n: int, norm_a: float) -> tuple[list[float], list[float]]:
    """:func:`eigengate.analysis.bounds.first_order` of a standard model (E = I) of order n,
    from the column norms (``bounds.column_norms``) of the right vectors, the left vectors
    and the residuals, with the arithmetic on each eigenvalue's numbers in Python floats
    (the same IEEE operations in the same order)."""
    eps = 2.0 ** -52
    floor_scale = EST_FLOOR * math.sqrt(n + 1) * eps
    least = FIGURE_FLOOR * eps
    safety, finite, inf, worst = EST_SAFETY, math.isfinite, math.inf, 1.0 / eps
    delta, kappa = [], []
    for v, w, r, d, a in zip(vnorm, wnorm, rnorm, dots, absl):
        floor = floor_scale * (norm_a + a) * v
        if d == 0.0:  # numpy's x/0: inf or nan, neither finite
            k = b = math.nan
        else:
            k = w * v / d
            b = safety * (r + floor) * w / d
        kappa.append(k if finite(k) else worst)
        b = b if finite(b) else inf
        low = least * a
        delta.append(low if low > b else b)  # max(b, low)
    return delta, kappa


def gershgorin(absa: "np.ndarray", absl: "np.ndarray", vr: "np.ndarray", vlc: "np.ndarray",
               R: "np.ndarray", dots: "np.ndarray") -> list[float] | None:
    """:func:`eigengate.analysis.bounds.gershgorin` as a list, from ``vlc = conj(vl)``, its
    arithmetic on each row's numbers in Python floats (the same IEEE operations in the same
    order); the sums and products by numpy as there (``x.sum(axis=1)`` is
    ``numpy.add.reduce(x, axis=1)``). ``Y = conj(vl) / d`` here, ``conj(vl / conj(d))``
    there: numpy's complex quotient (Smith's) carries the conjugates through exactly, but
    for the sign of an exact zero, which no result reads (only ``|Y|`` and the sums of
    ``I − Y·X``, taken in absolute value)."""
    import numpy as np

    n = absa.shape[0]
    add = np.add.reduce
    Y = (vlc / dots).T
    g, up = rounding(n)
    absx = np.abs(vr)
    absy = np.abs(Y)
    xsum = add(absx, axis=1) * up
    rsum = [(a + g * (b + c)) * up * up for a, b, c in
            zip(add(np.abs(R), axis=1).tolist(), (absa @ xsum).tolist(), (absx @ absl).tolist())]
    C = identity(n) - Y @ vr
    tail = _U * n
    csum = [(a + g * b + tail) * up * up for a, b in
            zip(add(np.abs(C), axis=1).tolist(), (absy @ xsum).tolist())]
    if not all(map(math.isfinite, csum)):  # numpy's max would be inf or nan: refused
        return None
    cnorm = max(csum)
    if cnorm >= 0.5:
        return None
    t = [x * up * up for x in (absy @ np.array(rsum)).tolist()]
    scale = max(t) / (1.0 - cnorm)  # a nan in t makes its own rho nan: refused below
    rho = [(a + c * scale) * up * up for a, c in zip(t, csum)]
    return rho if all(map(math.isfinite, rho)) else None
