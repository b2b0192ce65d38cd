"""Stacked matrices of an operating-point grid: one array of shape ``(points..., rows, cols)``
in a ``.npz`` or ``.mat`` file, a matrix per grid point.

The file is found, confined to the repository and size-checked by
:func:`eigengate.model.matrixfiles.load_reference` (the same rules as any matrix file); this
module supplies the readers, which check the array's header (dtype, number of dimensions,
entries) before its data is read, then the leading dimensions against the grid's axes and
every entry for NaN or infinity, naming the grid point where one is found.
"""

from __future__ import annotations

import functools
import math
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Mapping, Sequence

from ..errors import ModelError
from .limits import MAX_MATRIX_ENTRIES
from .matrix_archives import _read_mat, _read_npz
from .matrixfiles import load_reference

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

__all__ = ["MAX_STACK_ENTRIES", "load_stack"]

#: Most entries a stacked array may hold (a thousand 100×100 matrices is 10 million).
MAX_STACK_ENTRIES = 4 * MAX_MATRIX_ENTRIES


_MAT_NUMERIC = ("double", "single", "int8", "int16", "int32", "int64", "uint8", "uint16",
                "uint32", "uint64")


def _check_header(shape: tuple, kind: Any, name: str, rel: str, bad: Any) -> None:
    """A stack's header: real numbers (a numpy dtype or a MATLAB class), at least three
    dimensions, at most :data:`MAX_STACK_ENTRIES` entries."""
    real = kind in _MAT_NUMERIC if isinstance(kind, str) else kind.kind in "iuf"
    if not real:
        raise bad(f"refers to the array {name!r} in {rel!r}, which holds "
                  f"{kind if isinstance(kind, str) else kind.name} values, not real numbers",
                  "save a dense float array")
    if len(shape) < 3:
        raise bad(f"refers to the array {name!r} in {rel!r}, shaped "
                  f"{'×'.join(map(str, shape)) or 'scalar'}, which is not a stack of matrices",
                  "a stacked array is shaped (points along each axis..., rows, columns)")
    if math.prod(shape) > MAX_STACK_ENTRIES:
        raise bad(f"refers to the array {name!r} in {rel!r}, shaped "
                  f"{'×'.join(map(str, shape))}, more than the limit of {MAX_STACK_ENTRIES} "
                  "entries")


_STACK_READERS = {".npz": functools.partial(_read_npz, check=_check_header),
                  ".mat": functools.partial(_read_mat, check=_check_header)}


def load_stack(ref: Mapping[str, Any], axes: Sequence[tuple[str, Sequence[str]]], *,
               source: str, field: str, line: int | None, base_dir: Path | None,
               root: Path | None, read: Callable[[str], bytes] | None = None
               ) -> tuple["np.ndarray", str]:
    """The stacked array a ``{file, key}`` reference names, checked against the grid.

    ``axes`` are the grid's axes in order, each ``(name, the texts of its values)``: the
    array must be shaped ``(len(values) of each axis..., rows, cols)`` and finite. Returns the
    array (float64) and the file's repository-relative path.
    """
    import numpy as np

    arr, rel = load_reference(ref, source=source, field=field, line=line, base_dir=base_dir,
                              root=root, read=read, readers=_STACK_READERS)
    if not isinstance(arr, np.ndarray):  # a sparse matrix (save_npz) is no stack
        raise ModelError(source, field, f"refers to {rel!r}, which holds one sparse matrix, "
                         "not a stack of matrices", line=line)
    arr = np.asarray(arr, dtype=float)
    lead = tuple(len(values) for _, values in axes)
    if arr.ndim != len(lead) + 2 or arr.shape[:len(lead)] != lead:
        want = "×".join(map(str, lead)) + "×rows×columns"
        names = " × ".join(f"{n} ({len(v)})" for n, v in axes)
        raise ModelError(source, field, f"is shaped {'×'.join(map(str, arr.shape))} in "
                         f"{rel!r}, but the grid {names} needs {want}", line=line,
                         hint="the leading dimensions follow grid.axes, in their order")
    bad = ~np.isfinite(arr)
    if bad.any():
        at = tuple(int(i) for i in np.argwhere(bad)[0])
        point = ",".join(f"{n}={v[i]}" for (n, v), i in zip(axes, at))
        entry = at[len(lead):]
        raise ModelError(source, field, f"holds {arr[at]} in {rel!r} at grid point {point}, "
                         f"entry [{entry[0]}, {entry[1]}] ({int(bad.sum())} non-finite "
                         f"entries in all)", line=line,
                         hint="every matrix of the stack must be finite")
    return arr, rel
