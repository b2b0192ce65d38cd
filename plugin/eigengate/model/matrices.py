"""Matrix values of a model checked: finite real 2-D arrays (dense or sparse), their sizes
within what this machine can analyse, their scale within double precision; each problem a
ModelError naming the file and field, with the first bad entry."""

from __future__ import annotations

from itertools import chain
from typing import TYPE_CHECKING, Any

from . import limits as _limits
from ..errors import ModelError

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

__all__ = ["as_matrix", "matrix_and_top", "check_scale_top", "as_sparse", "is_sparse", "dense_limit", "MAX_STATES",
           "SPARSE_THRESHOLD", "MAX_MAGNITUDE", "MIN_SCALE"]

#: Largest number of states of a dense model (dense eigen-decomposition stays in seconds);
#: :func:`dense_limit` lowers it where memory is short.
MAX_STATES = 4000
#: A model given as sparse matrices keeps them sparse (and gets the sparse modal search of
#: :mod:`eigengate.analysis.sparse_modes`) above this many states, or when asked to; at or
#: below it, it is made dense and analysed in full.
SPARSE_THRESHOLD = 2000
#: Largest magnitude of a matrix entry: norms, products and the s-plane mapping stay finite
#: in double precision (squares stay below 1e300).
MAX_MAGNITUDE = 1e150
#: Smallest nonzero scale (largest entry) of A or E: below it LAPACK works in or near the
#: subnormal range, where eigenvalues lose every digit.
MIN_SCALE = 1e-150
_NUMBER_TYPES = frozenset((int, float))  # exact types: bool, a subclass of int, is refused
_LIST_TYPE = {list}


def as_matrix(
    value: Any,
    source: str,
    field_path: str,
    *,
    line: int | None = None,
    allow_vector: bool = False,
) -> "np.ndarray":
    """Convert ``value`` to a finite real 2-D float array or raise :class:`ModelError`.

    Accepts nested lists, numpy arrays and scalars (a scalar is a 1×1 matrix). A flat list is
    taken as one row when ``allow_vector`` is true. Booleans, strings, complex numbers, NaN
    and Inf are refused with the position of the first bad entry.
    """
    if type(value) is list and value:  # the usual inline matrix: checked in a few C passes
        plain = _plain_rows(value)
        if plain is not None:
            return plain[0]
    return _general_matrix(value, source, field_path, line, allow_vector)


def matrix_and_top(value: Any, source: str, field_path: str, line: int | None
                   ) -> "tuple[np.ndarray, float]":
    """:func:`as_matrix` of ``value`` and the largest magnitude of its entries (0.0 when it
    has none), for :func:`check_scale_top`: one reduction serves both checks."""
    if type(value) is list and value:
        plain = _plain_rows(value)
        if plain is not None:
            return plain
    import numpy as np

    arr = _general_matrix(value, source, field_path, line, False)
    return arr, float(np.abs(arr).max()) if arr.size else 0.0


def _plain_rows(rows: list[Any]) -> "tuple[np.ndarray, float] | None":
    """The float array of ``rows`` and its largest magnitude, when ``rows`` is a list of
    equal-length lists of int and float entries of magnitude at most :data:`MAX_MAGNITUDE`
    (what the general path accepts of a list of lists, built the same way); None for
    anything else, which the general path words."""
    if set(map(type, rows)) != _LIST_TYPE or len(set(map(len, rows))) != 1 \
            or not set(map(type, chain.from_iterable(rows))) <= _NUMBER_TYPES:
        return None
    import numpy as np

    arr = np.array(rows, dtype=float).reshape(len(rows), len(rows[0]))
    if not arr.size:
        return arr, 0.0
    top = float(np.abs(arr).max())
    if not top <= MAX_MAGNITUDE:
        return None  # NaN, Inf or too large: the general path names the entry
    return arr, top


def _general_matrix(value: Any, source: str, field_path: str, line: int | None,
                    allow_vector: bool) -> "np.ndarray":
    import numpy as np

    def bad(problem: str, hint: str | None = None) -> ModelError:
        return ModelError(source, field_path, problem, line=line, hint=hint)

    if is_sparse(value):  # a sparse matrix where a dense one is needed: checked, then dense
        value = as_sparse(value, source, field_path, line=line)
        _check_dense_size(value.shape, bad)
        value = value.toarray()
    if isinstance(value, np.ndarray):
        arr = value
        if arr.dtype == bool or arr.dtype.kind not in "iuf":
            if arr.dtype.kind == "c":
                if arr.size and not np.any(arr.imag):
                    arr = arr.real
                else:
                    raise bad("must be real, got complex entries")
            else:
                raise bad(f"must hold real numbers, got an array of dtype {arr.dtype}")
        if arr.ndim == 0:
            arr = arr.reshape(1, 1)
        elif arr.ndim == 1:
            if not allow_vector:
                raise bad(f"must be a 2-D matrix, got a 1-D array of length {arr.shape[0]}",
                          "write it as [[...]] for one row")
            arr = arr.reshape(1, -1)
        elif arr.ndim != 2:
            raise bad(f"must be a 2-D matrix, got a {arr.ndim}-D array of shape {arr.shape}")
        arr = np.array(arr, dtype=float, copy=True)
    else:
        rows = value if type(value) is list and value and \
            set(map(type, value)) == _LIST_TYPE else _rows_of(value, bad, allow_vector)
        width = len(rows[0]) if rows else 0
        # Fast path: passes in C over the row lengths and entry types; the loop below only
        # runs to find and name the first bad entry.
        rows_ok = len(set(map(len, rows))) <= 1 and \
            set(map(type, chain.from_iterable(rows))) <= _NUMBER_TYPES
        for i, row in enumerate(() if rows_ok else rows):
            if len(row) != width:
                raise bad(f"must have rows of equal length, row 1 has {width} entries "
                          f"and row {i + 1} has {len(row)}")
            for j, entry in enumerate(row):
                if isinstance(entry, bool) or not isinstance(entry, (int, float)):
                    kind = "complex" if isinstance(entry, complex) else type(entry).__name__
                    raise bad(f"must hold real numbers, entry ({i + 1},{j + 1}) is "
                              f"{entry!r} ({kind})")
        arr = np.array(rows, dtype=float).reshape(len(rows), width)  # a new array already
    # one reduction in the usual case (NaN fails the comparison too); the checks below run
    # only to name the first bad entry
    if arr.size and not np.abs(arr).max() <= MAX_MAGNITUDE:
        finite = np.isfinite(arr)
        if not finite.all():
            i, j = np.argwhere(~finite)[0]
            raise bad(f"must hold finite numbers, entry ({i + 1},{j + 1}) is {arr[i, j]}")
        big = np.abs(arr) > MAX_MAGNITUDE
        if big.any():
            i, j = np.argwhere(big)[0]
            raise bad(f"must hold numbers of magnitude at most {MAX_MAGNITUDE:g}, entry "
                      f"({i + 1},{j + 1}) is {arr[i, j]:g}",
                      "rescale the units: beyond that the eigenvalue computation overflows "
                      "double precision")
    return arr


def is_sparse(value: Any) -> bool:
    """Whether ``value`` is a scipy.sparse matrix or array (checked without importing scipy)."""
    return type(value).__module__.startswith("scipy.sparse")


def dense_limit() -> int:
    """Most states of a dense model on this machine (:data:`MAX_STATES`, or fewer where
    physical memory cannot hold the dense analysis's copies; see ``model.limits``)."""
    return _limits.dense_state_limit(MAX_STATES)


def _check_dense_size(shape: tuple[int, ...], bad) -> None:
    """Refuse to make a matrix of ``shape`` dense when it could not be held in memory."""
    from .limits import memory_budget

    entries = 1
    for d in shape:
        entries *= int(d)
    if 8 * entries > memory_budget() // 2:
        raise bad(f"is {'×'.join(str(d) for d in shape)}, too large to hold as a dense matrix "
                  f"({8 * entries} bytes)", "only A and E of a large model may stay sparse")


def as_sparse(value: Any, source: str, field_path: str, *, line: int | None = None) -> Any:
    """A scipy.sparse matrix checked like :func:`as_matrix` checks a dense one (real, finite,
    magnitudes in range), as a canonical float64 CSR matrix (sorted indices, no duplicates,
    no stored zeros)."""
    import numpy as np
    import scipy.sparse as sp

    def bad(problem: str, hint: str | None = None) -> ModelError:
        return ModelError(source, field_path, problem, line=line, hint=hint)

    m = sp.csr_matrix(value)
    if m.ndim != 2:  # pragma: no cover - csr_matrix is always 2-D
        raise bad(f"must be a 2-D matrix, got {m.ndim} dimensions")
    if m.dtype == bool or m.dtype.kind not in "iufc":
        raise bad(f"must hold real numbers, got a sparse matrix of dtype {m.dtype}")
    if m.dtype.kind == "c":
        if np.any(m.data.imag):
            raise bad("must be real, got complex entries")
        m = sp.csr_matrix((m.data.real, m.indices, m.indptr), shape=m.shape)
    m = sp.csr_matrix(m, dtype=float, copy=True)
    m.sum_duplicates()
    m.eliminate_zeros()
    m.sort_indices()
    data = m.data
    for test, what, hint in (
            (~np.isfinite(data), "finite numbers", None),
            (np.abs(data) > MAX_MAGNITUDE, f"numbers of magnitude at most {MAX_MAGNITUDE:g}",
             "rescale the units: beyond that the eigenvalue computation overflows double "
             "precision")):
        if test.any():
            k = int(np.argmax(test))
            i = int(np.searchsorted(m.indptr, k, side="right")) - 1
            raise bad(f"must hold {what}, entry ({i + 1},{int(m.indices[k]) + 1}) is "
                      f"{data[k]:g}", hint)
    return m


def check_scale_top(arr: "np.ndarray", top: float, bad) -> None:
    """:func:`_check_scale` of a dense ``arr`` whose largest magnitude ``top`` is known."""
    if 0.0 < top < MIN_SCALE:
        _check_scale(arr, bad)


def _check_scale(arr: "np.ndarray", bad) -> None:
    """Refuse a nonzero matrix whose largest entry is below MIN_SCALE."""
    import numpy as np

    if is_sparse(arr):
        data = getattr(arr, "data")
        top = float(np.abs(data).max()) if data.size else 0.0
        if 0.0 < top < MIN_SCALE:
            raise bad(f"is too small to analyse: its largest entry is {top:g}, below "
                      f"{MIN_SCALE:g}", "rescale the units (or write 0 for a zero matrix)")
        return
    top = float(np.abs(arr).max()) if arr.size else 0.0
    if 0.0 < top < MIN_SCALE:
        i, j = np.unravel_index(int(np.argmax(np.abs(arr))), arr.shape)
        raise bad(f"is too small to analyse: its largest entry ({i + 1},{j + 1}) is {top:g}, "
                  f"below {MIN_SCALE:g}", "rescale the units (or write 0 for a zero matrix)")


def _rows_of(value: Any, bad, allow_vector: bool) -> list[list[Any]]:
    if isinstance(value, bool) or isinstance(value, (int, float, complex)):
        return [[value]]
    if not isinstance(value, (list, tuple)):
        raise bad(f"must be a matrix (a list of rows), got {type(value).__name__} {value!r:.60}")
    if not value:
        return []
    if all(isinstance(r, (list, tuple)) for r in value):
        return [list(r) for r in value]
    if any(isinstance(r, (list, tuple)) for r in value):
        raise bad("must be a list of rows, got a mix of rows and numbers")
    if allow_vector:
        return [list(value)]
    raise bad(f"must be a 2-D matrix (a list of rows), got a flat list of {len(value)} numbers",
              "write [[a, b]] for one row or [[a], [b]] for one column")
