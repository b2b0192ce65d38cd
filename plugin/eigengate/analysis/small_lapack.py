"""LAPACK called directly for small dense matrices: the routines scipy calls, without scipy.linalg.

Up to :data:`SMALL_ORDER` states a float64 matrix is balanced and decomposed by calling the
routines that ``scipy.linalg.matrix_balance`` and ``scipy.linalg.eig(left=True, right=True)``
call (xGEBAL, xGEEV of scipy's own ``_flapack`` extension, with the same arguments, workspace
and post-processing), skipping their checks and dispatch: for a model of 2–12 states those
are most of the time, so the results are the same bit for bit and cost less
(``tests/test_modes_small_path.py`` checks both claims' first half against scipy).

The extension module is loaded from scipy's installation under its own name
(``scipy.linalg._flapack``) without importing the ``scipy.linalg`` package, whose import costs
about 0.3 s per process (measured on the project's 2-core machine: a cold check of 2,000
small model files takes about 2.5 s in all). A later ``import scipy.linalg`` finds the same
module object in ``sys.modules`` and uses it. Where scipy is laid out otherwise, the normal
import is used.
"""

from __future__ import annotations

import functools
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

__all__ = ["SMALL_ORDER", "small_lapack", "small_eig", "small_eig_stacked", "flapack"]

#: Up to this order a float64 matrix takes the direct LAPACK calls.
SMALL_ORDER = 32
_NAME = "scipy.linalg._flapack"


@functools.lru_cache(maxsize=1)
def flapack() -> Any:
    """scipy's LAPACK extension module, loaded once (see the module docstring)."""
    import sys

    loaded = sys.modules.get(_NAME)
    if loaded is not None:
        return loaded
    try:
        import importlib.machinery
        import importlib.util
        import os

        spec = importlib.util.find_spec("scipy")  # finds the package without running it
        if spec is None or not spec.origin:
            raise ImportError("scipy is not installed")
        folder = os.path.join(os.path.dirname(spec.origin), "linalg")
        for suffix in importlib.machinery.EXTENSION_SUFFIXES:
            path = os.path.join(folder, "_flapack" + suffix)
            if os.path.isfile(path):
                break
        else:
            raise ImportError("no scipy.linalg._flapack extension file")
        ext = importlib.util.spec_from_file_location(_NAME, path)
        if ext is None or ext.loader is None:
            raise ImportError("cannot load scipy.linalg._flapack")
        module = importlib.util.module_from_spec(ext)
        ext.loader.exec_module(module)
        if not all(hasattr(module, f) for f in ("dgebal", "dgeev", "dgeev_lwork")):
            raise ImportError("scipy.linalg._flapack lacks dgebal/dgeev")
        sys.modules.setdefault(_NAME, module)
        return sys.modules[_NAME]
    except (ImportError, OSError):
        from scipy.linalg import _flapack  # the ordinary way, with scipy.linalg imported

        return _flapack


def small_lapack(A: "np.ndarray") -> tuple | None:
    """``(gebal, geev, lwork)`` for a finite float64 matrix up to SMALL_ORDER; None otherwise
    (the general path, which also raises on non-finite entries as scipy does)."""
    import math

    import numpy as np

    n = A.shape[0]
    # a finite sum means finite entries (an inf or a nan makes it inf or nan); a sum that
    # overflows from finite entries sends them to the general path, which gives the same
    if not (0 < n <= SMALL_ORDER and A.dtype == np.float64 and A.ndim == 2
            and A.shape == (n, n) and math.isfinite(np.add.reduce(A, axis=None))):
        return None
    return _lapack_for(n)


@functools.lru_cache(maxsize=SMALL_ORDER)
def _lapack_for(n: int) -> tuple:
    lib = flapack()
    # scipy.linalg.lapack._compute_lwork: the optimal workspace LAPACK reports, as an int
    work, info = lib.dgeev_lwork(n, compute_vl=1, compute_vr=1)
    if info != 0:  # pragma: no cover - LAPACK's workspace query does not fail for n >= 1
        raise ValueError(f"LAPACK's workspace query failed: {info}")
    return lib.dgebal, lib.dgeev, int(work.real)


def _pair_columns(imag: list) -> list[int] | None:
    """The first column of each complex pair, as ``scipy.linalg._decomp`` finds them (its
    mask, with its guard against a LAPACK ordering slip, ticket 709), when the pairs do not
    overlap (LAPACK's own layout); None otherwise (the column-by-column loop then)."""
    first = [i for i, x in enumerate(imag) if x > 0]
    if [i for i, x in enumerate(imag) if x < 0] == [i + 1 for i in first]:
        return first  # each pair (+, −) in turn: scipy's mask is exactly ``first``
    n = len(imag)
    first = [i for i in range(n) if imag[i] > 0 or (i + 1 < n and imag[i + 1] < 0)]
    if first and (first[-1] + 1 >= n or any(b - a == 1 for a, b in zip(first, first[1:]))):
        return None
    return first


def _complex_vectors(w: "np.ndarray", vin: "np.ndarray") -> "np.ndarray":
    """Complex eigenvectors from xGEEV's real output, as ``scipy.linalg._decomp`` builds
    them: for a pair, columns j and j+1 hold the real and imaginary parts."""
    import numpy as np

    v = np.array(vin, dtype=w.dtype)
    m = w.imag > 0
    m[:-1] |= w.imag[1:] < 0
    for i in np.flatnonzero(m):
        v.imag[:, i] = vin[:, i + 1]
        np.conj(v[:, i], v[:, i + 1])
    return v


@functools.lru_cache(maxsize=256)
def _pair_index(first: tuple[int, ...]) -> tuple:
    """The indices of the first and second columns of the pairs ``first`` (kept: the same few
    layouts of pairs recur from model to model): slices where the pairs follow each other
    (every second column from one on, the usual layout: the same elements, copied faster),
    index arrays otherwise."""
    import numpy as np

    start = first[0] if first else 0
    if list(first) == list(range(start, start + 2 * len(first), 2)):
        stop = start + 2 * len(first)
        return slice(start, stop, 2), slice(start + 1, stop, 2)
    one = np.array(first, dtype=np.intp)
    one.flags.writeable = False
    two = one + 1
    two.flags.writeable = False
    return one, two


def _complex_pairs(vl: "np.ndarray", vr: "np.ndarray", first: list[int]) -> "np.ndarray":
    """:func:`_complex_vectors` of both xGEEV outputs at once, for pairs that do not overlap
    (first columns ``first``): ``both``, whose rows ``both[0]``, ``both[1]`` are the columns
    of vl and vr, so ``both[0].T``, ``both[1].T`` are the same values in the same (Fortran)
    layout."""
    import numpy as np

    one, two = _pair_index(tuple(first))
    both = np.array((vl.T, vr.T), dtype=np.complex128)  # rows: the columns of vl, vr
    both.imag[:, one] = both.real[:, two]
    both[:, two] = both[:, one].conj()
    return both


def small_eig(work: "np.ndarray", small: tuple):
    """``scipy.linalg.eig(work, left=True, right=True, check_finite=False)`` for a real
    float64 matrix, as scipy computes it (same routine, workspace and post-processing)."""
    return small_eig_stacked(work, small)[:3]


def small_eig_stacked(work: "np.ndarray", small: tuple):
    """:func:`small_eig` and, where the vectors are complex pairs that do not overlap (the
    usual layout), the array ``both`` that ``vl`` and ``vr`` are the transposed rows of
    (see :func:`_complex_pairs`); None in its place otherwise."""
    _, geev, lwork = small
    # dgeev(a, compute_vl, compute_vr, lwork, overwrite_a), positional: f2py's faster parse
    wr, wi, vl, vr, info = geev(work, 1, 1, lwork, 0)
    if info != 0:  # the general path raises scipy's own error
        import scipy.linalg as la

        return la.eig(work, left=True, right=True, check_finite=False) + (None,)
    w = wr + 1j * wi
    imag = wi.tolist()  # w.imag but for the sign of a zero, which no test below sees
    both = None
    if any(imag):  # not every imaginary part zero
        first = _pair_columns(imag)
        if first is not None:
            both = _complex_pairs(vl, vr, first)
            vl, vr = both[0].T, both[1].T
        else:
            vl, vr = _complex_vectors(w, vl), _complex_vectors(w, vr)
    return w, vl, vr, both
