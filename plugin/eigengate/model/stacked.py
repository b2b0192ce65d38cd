"""Stacked matrices of an operating-point grid: one array of shape ``(points..., rows, cols)``
in a ``.npz`` or ``.mat`` file, a matrix per grid point.

The file is found, confined to the repository and size-checked by
:func:`eigengate.model.matrixfiles.load_reference` (the same rules as any matrix file); this
module supplies the readers, which check the array's header (dtype, number of dimensions,
entries) before its data is read, then the leading dimensions against the grid's axes and
every entry for NaN or infinity, naming the grid point where one is found.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Mapping, Sequence

from ..errors import ModelError
from .matrixfiles import MAX_MATRIX_ENTRIES, _npy_header, _pick, load_reference

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

__all__ = ["MAX_STACK_ENTRIES", "load_stack"]

#: Most entries a stacked array may hold (a thousand 100×100 matrices is 10 million).
MAX_STACK_ENTRIES = 4 * MAX_MATRIX_ENTRIES


def _check_header(shape: tuple, kind: str, name: str, rel: str, bad: Any) -> None:
    if kind not in "iuf":
        raise bad(f"refers to the array {name!r} in {rel!r}, which holds {kind!r}-kind "
                  "values, not real numbers", "save float arrays")
    if len(shape) < 3:
        raise bad(f"refers to the array {name!r} in {rel!r}, shaped "
                  f"{'×'.join(map(str, shape)) or 'scalar'}, which is not a stack of matrices",
                  "a stacked array is shaped (points along each axis..., rows, columns)")
    if math.prod(shape) > MAX_STACK_ENTRIES:
        raise bad(f"refers to the array {name!r} in {rel!r}, shaped "
                  f"{'×'.join(map(str, shape))}, more than the limit of {MAX_STACK_ENTRIES} "
                  "entries")


def _read_npz(path: "Path | Any", rel: str, key: str | None, bad: Any) -> "np.ndarray":
    import zipfile
    import zlib

    import numpy as np

    try:
        with (open(path, "rb") if isinstance(path, Path) else path) as fh, \
                np.load(fh, allow_pickle=False) as archive:
            if not isinstance(archive, np.lib.npyio.NpzFile):
                raise bad(f"refers to {rel!r}, which is not a .npz archive", sub=".file")
            name = _pick(list(archive.files), key, rel, bad)
            shape, dtype = _npy_header(archive.zip, name, rel, bad)
            _check_header(tuple(shape), dtype.kind, name, rel, bad)
            return np.asarray(archive[name], dtype=float)
    except ModelError:
        raise
    except (OSError, zipfile.BadZipFile, EOFError, ValueError, zlib.error) as exc:
        raise bad(f"refers to {rel!r}, which is not a readable .npz archive ({exc})",
                  sub=".file") from None


def _read_mat(path: "Path | Any", rel: str, key: str | None, bad: Any) -> "np.ndarray":
    import warnings

    import numpy as np
    import scipy.io

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            found = scipy.io.whosmat(path)
            name = _pick([n for n, _, _ in found], key, rel, bad)
            shape, kind = next((tuple(s), c) for n, s, c in found if n == name)
            if kind not in ("double", "single", "int8", "int16", "int32", "int64", "uint8",
                            "uint16", "uint32", "uint64"):
                raise bad(f"refers to the variable {name!r} in {rel!r}, of MATLAB class "
                          f"{kind!r}, not a dense numeric array", "save a dense double array")
            _check_header(shape, "f", name, rel, bad)
            if hasattr(path, "seek"):
                path.seek(0)
            content = scipy.io.loadmat(path, variable_names=[name])
    except ModelError:
        raise
    except NotImplementedError:
        raise bad(f"refers to {rel!r}, a MATLAB v7.3 (HDF5) file, which is not supported",
                  "save it with save(..., '-v7')", ".file") from None
    except (OSError, ValueError, TypeError, scipy.io.matlab.MatReadError) as exc:
        raise bad(f"refers to {rel!r}, which is not a readable .mat file ({exc})",
                  sub=".file") from None
    return np.asarray(content[name], dtype=float)


_STACK_READERS = {".npz": _read_npz, ".mat": _read_mat}


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
