"""The archive formats of referenced matrix files: ``.npz`` (numpy's named arrays, or the one
sparse matrix of ``scipy.sparse.save_npz``; never pickles) and ``.mat`` (MATLAB v4-v7 through
``scipy.io.loadmat``, dense or sparse), each size checked from the archive's own headers (the
``.npy`` headers and zip entries, a ``.mat`` variable's shape, declared nonzeros and
uncompressed size) before any data is read, and the shape and sparse-size checks the other
readers share. References are resolved, confined and dispatched in
:mod:`eigengate.model.matrixfiles`.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable

from .formats import suggest
from ..errors import ModelError
from .limits import MAX_MATRIX_ENTRIES, MAX_MATRIX_FILE_BYTES

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

__all__: list[str] = []  # private to model.matrixfiles and model.stacked

#: Members of a ``scipy.sparse.save_npz`` archive, by storage format (others are refused).
_SAVE_NPZ = {"csr": ("data", "indices", "indptr"), "csc": ("data", "indices", "indptr"),
             "coo": ("data", "row", "col")}


def _pick(names: list[str], key: str | None, rel: str, bad: Any) -> str:
    if key is None:
        if len(names) == 1:
            return names[0]
        raise bad(f"must name the array to read from {rel!r}, which holds "
                  f"{len(names)}: {', '.join(sorted(names)) or '(none)'}",
                  "add key: NAME to the reference", ".key")
    if key not in names:
        close = suggest(key, names)
        raise bad(f"names {key!r}, which {rel!r} does not hold (it holds "
                  f"{', '.join(sorted(names)) or 'nothing'})",
                  f"did you mean {close!r}?" if close else None, ".key")
    return key


def _read_npz(path: "Path | Any", rel: str, key: str | None, bad: Any,
              check: "Callable[[tuple, Any, str, str, Any], None] | None" = None
              ) -> "np.ndarray":
    import zipfile
    import zlib

    import numpy as np

    try:
        # allow_pickle=False: a pickled array would run code from the file when loaded.
        # np.load leaves its own file open when the archive is not a readable zip: open it here.
        with (open(path, "rb") if isinstance(path, Path) else path) as fh, \
                np.load(fh, allow_pickle=False) as archive:
            if not isinstance(archive, np.lib.npyio.NpzFile):
                raise bad(f"refers to {rel!r}, which is not a .npz archive", sub=".file")
            if {"format", "shape", "data"} <= set(archive.files):
                if key is not None:
                    raise bad(f"is {key!r}, but {rel!r} holds one sparse matrix (written by "
                              "scipy.sparse.save_npz)", "remove key from the reference", ".key")
                return _sparse_npz(archive, rel, bad)
            name = _pick(list(archive.files), key, rel, bad)
            if check is None:
                _check_npy_header(archive.zip, name, rel, bad)
            else:  # another reader's rule for the header (model.stacked's stacks)
                check(*_npy_header(archive.zip, name, rel, bad), name, rel, bad)
            try:
                return np.asarray(archive[name])
            except ValueError:
                raise bad(f"refers to the array {name!r} in {rel!r}, which holds pickled "
                          "object data; eigengate never unpickles files",
                          "save plain float arrays with numpy.savez") from None
    except ModelError:  # a ValueError too: let our own message through unchanged
        raise
    except (OSError, zipfile.BadZipFile, EOFError, ValueError, zlib.error) as exc:
        raise bad(f"refers to {rel!r}, which is not a readable .npz archive ({exc})",
                  sub=".file") from None


def _sparse_npz(archive: Any, rel: str, bad: Any) -> Any:
    """The sparse matrix of a ``save_npz`` archive: every member's .npy header checked (the
    format and shape arrays must be tiny, the index and value arrays must fit the declared
    shape and the memory limits) before any is read, then the structure itself."""
    import numpy as np
    import scipy.sparse as sp

    heads = {n: _npy_header(archive.zip, n, rel, bad) for n in archive.files}
    for n in ("format", "shape"):
        shape, dtype = heads[n]
        if len(shape) > 1 or (shape[0] if shape else 1) > 8 or dtype.itemsize > 64:
            raise bad(f"refers to {rel!r}, whose {n!r} entry is shaped {shape} of {dtype}, not "
                      "what scipy.sparse.save_npz writes", sub=".file")
    fmt = archive["format"]
    fmt = fmt.item().decode("ascii", "replace") if fmt.dtype.kind == "S" else str(fmt.item())
    if fmt not in _SAVE_NPZ:
        raise bad(f"refers to {rel!r}, a sparse matrix stored as {fmt!r}, which is not read",
                  "save it in csr, csc or coo format", ".file")
    shape = archive["shape"]
    if shape.dtype.kind not in "iu" or shape.shape != (2,) or (shape < 0).any():
        raise bad(f"refers to {rel!r}, whose shape entry {shape.tolist()!r} is not two "
                  "non-negative integers", sub=".file")
    rows, cols = (int(d) for d in shape)
    members = _SAVE_NPZ[fmt]
    missing = [m for m in members if m not in heads]
    if missing:
        raise bad(f"refers to {rel!r}, a {fmt} matrix without its {missing[0]!r} array",
                  sub=".file")
    lengths = {}
    for m in members:
        mshape, dtype = heads[m]
        if len(mshape) != 1 or dtype.kind not in ("iu" if m != "data" else "iuf"):
            raise bad(f"refers to {rel!r}, whose {m!r} array is shaped {mshape} of {dtype}, "
                      f"not a 1-D array of {'numbers' if m == 'data' else 'integers'}",
                      sub=".file")
        lengths[m] = mshape[0]
    nnz = lengths["data"]
    _check_sparse(rows, cols, nnz, rel, bad)
    ptr = {"csr": rows + 1, "csc": cols + 1}.get(fmt)
    expected = {m: nnz for m in members if m != "indptr"}
    if ptr is not None:
        expected["indptr"] = ptr
    for m, want in expected.items():
        if lengths[m] != want:
            raise bad(f"refers to {rel!r}, whose {m!r} array has {lengths[m]} entries where a "
                      f"{rows}×{cols} {fmt} matrix with {nnz} stored entries has {want}",
                      sub=".file")
    arrays = [np.asarray(archive[m]) for m in members]
    try:
        if fmt == "coo":
            data, row, col = arrays
            if nnz and (row.min() < 0 or row.max() >= rows or col.min() < 0
                        or col.max() >= cols):
                raise ValueError("row or column index out of range")
            return sp.coo_matrix((data, (row, col)), shape=(rows, cols)).tocsr()
        make = sp.csr_matrix if fmt == "csr" else sp.csc_matrix
        out = make(tuple(arrays), shape=(rows, cols))
        out.check_format(full_check=True)  # indices in range, indptr non-decreasing
        return out
    except (ValueError, IndexError) as exc:
        raise bad(f"refers to {rel!r}, whose {fmt} structure is malformed ({exc})",
                  sub=".file") from None


def _check_sparse(rows: int, cols: int, nnz: int, rel: str, bad: Any) -> None:
    """Refuse a sparse matrix by its declared shape and stored-entry count."""
    from .limits import MAX_SPARSE_STATES, sparse_entry_limit

    if max(rows, cols) > MAX_SPARSE_STATES:
        raise bad(f"refers to {rel!r}, a sparse matrix shaped {rows}×{cols}, more than the "
                  f"limit of {MAX_SPARSE_STATES} rows or columns", sub=".file")
    limit = sparse_entry_limit()
    if nnz > limit:
        raise bad(f"refers to {rel!r}, a sparse matrix declaring {nnz} stored entries, more "
                  f"than the {limit} this machine's memory allows", sub=".file")
    if nnz > rows * cols:
        raise bad(f"refers to {rel!r}, a {rows}×{cols} sparse matrix declaring {nnz} stored "
                  "entries, more than it has places", sub=".file")


def _check_npy_header(zf: Any, name: str, rel: str, bad: Any) -> None:
    """Refuse an array of the archive by its zip entry and .npy header alone: declared size,
    dtype and shape, before a byte of its data is decompressed."""
    shape, _ = _npy_header(zf, name, rel, bad)
    _check_shape(tuple(shape), name, rel, bad)


def _npy_header(zf: Any, name: str, rel: str, bad: Any) -> tuple[tuple, Any]:
    """Shape and dtype of an archive member from its zip entry and .npy header (declared
    size, format version and object content checked)."""
    import numpy as np

    member = name if name in zf.namelist() else name + ".npy"
    info = zf.getinfo(member)
    if info.file_size > MAX_MATRIX_FILE_BYTES:
        raise bad(f"refers to the array {name!r} in {rel!r}, which declares {info.file_size} "
                  f"bytes uncompressed, more than the limit of {MAX_MATRIX_FILE_BYTES} bytes",
                  sub=".file")
    with zf.open(member) as fh:
        version = np.lib.format.read_magic(fh)
        if version == (1, 0):
            shape, _, dtype = np.lib.format.read_array_header_1_0(fh)
        elif version == (2, 0):
            shape, _, dtype = np.lib.format.read_array_header_2_0(fh)
        else:
            raise bad(f"refers to the array {name!r} in {rel!r}, stored in .npy format "
                      f"{version[0]}.{version[1]}, which is not read",
                      "save it with numpy.savez (format 1.0 or 2.0)", ".file")
    if dtype.hasobject:
        raise bad(f"refers to the array {name!r} in {rel!r}, which holds pickled object data; "
                  "eigengate never unpickles files", "save plain float arrays with numpy.savez")
    return tuple(shape), dtype


def _check_shape(shape: tuple, name: str, rel: str, bad: Any) -> None:
    import math

    if len(shape) > 2:
        raise bad(f"refers to the array {name!r} in {rel!r}, which has {len(shape)} dimensions; "
                  "a matrix has at most 2")
    entries = math.prod(shape)
    if entries > MAX_MATRIX_ENTRIES:
        raise bad(f"refers to the array {name!r} in {rel!r}, shaped "
                  f"{'×'.join(str(d) for d in shape)}, more than the limit of "
                  f"{MAX_MATRIX_ENTRIES} entries", "a model has at most 4000 states")


def _read_mat(path: "Path | Any", rel: str, key: str | None, bad: Any,
              check: "Callable[[tuple, Any, str, str, Any], None] | None" = None
              ) -> "np.ndarray":
    import warnings

    import numpy as np
    import scipy.io
    import scipy.sparse

    try:
        with warnings.catch_warnings():
            # scipy warns about odd headers; the numbers are what matters and -W error must not
            # turn a readable file into a crash.
            warnings.simplefilter("ignore")
            # Names and shapes from the headers first: a sparse matrix is made dense below,
            # and a compressed one can be far larger than its file.
            found = scipy.io.whosmat(path)
            shapes = {n: s for n, s, _ in found}
            name = _pick(list(shapes), key, rel, bad)
            kind = dict((n, c) for n, _, c in found)[name]
            if check is not None:  # another reader's rule (model.stacked's stacks)
                check(tuple(shapes[name]), kind, name, rel, bad)
            elif kind == "sparse":
                rows, cols = (int(d) for d in shapes[name])
                _check_sparse(rows, cols, _mat_nonzeros(path, name, rel, bad), rel, bad)
            else:
                _check_shape(tuple(shapes[name]), name, rel, bad)
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
    if name not in content:
        raise bad(f"refers to {rel!r}, whose variable {name!r} cannot be read", sub=".file")
    value = content[name]
    if scipy.sparse.issparse(value):
        return value.tocsr()
    return np.asarray(value)


#: MAT-file v5 data types (MathWorks, "MAT-File Format", level 5): the ones walked here.
_MI_INT8, _MI_UINT32, _MI_MATRIX, _MI_COMPRESSED = 1, 6, 14, 15


def _mat_nonzeros(path: "Path | Any", name: str, rel: str, bad: Any) -> int:
    """Stored entries (nzmax) a sparse variable of a level-5 MAT-file declares, from its
    element headers, with the uncompressed size it declares checked against the memory
    budget; only the first bytes of the variable's compressed element are inflated. A
    version 4 file is not compressed, so its size (already checked) bounds the read, and the
    count is taken as 0."""
    import struct
    import zlib

    from .limits import memory_budget

    with (open(path, "rb") if isinstance(path, Path) else _rewound(path)) as fh:
        head = fh.read(128)
        if len(head) < 128 or head[126:128] not in (b"IM", b"MI"):
            return 0  # a v4 file (whosmat read it): uncompressed
        order = "<" if head[126:128] == b"IM" else ">"
        while True:
            tag = fh.read(8)
            if len(tag) < 8:
                raise bad(f"refers to {rel!r}, whose variable {name!r} is not found in its "
                          "element headers", sub=".file")
            kind, size = struct.unpack(order + "II", tag)
            start = fh.tell()
            if kind == _MI_COMPRESSED:
                inflate = zlib.decompressobj()
                body = inflate.decompress(fh.read(min(size, 4096)), 256)
            else:
                body = tag + fh.read(min(size, 248))
            fh.seek(start + size + ((-size) % 8 if kind != _MI_COMPRESSED else 0))
            found = _mat_matrix_header(body, order)
            if found is not None and found[0] == name:
                _, nzmax, declared = found
                if declared > memory_budget():
                    raise bad(f"refers to {rel!r}, whose variable {name!r} declares "
                              f"{declared} bytes uncompressed, more than this machine's "
                              f"memory budget of {memory_budget()} bytes", sub=".file")
                return nzmax


def _mat_matrix_header(body: bytes, order: str) -> tuple[str, int, int] | None:
    """(name, nzmax, declared size) of a miMATRIX element from its first bytes, or None."""
    import struct

    def element(at: int) -> tuple[int, int, int]:  # type, size, offset of data
        kind, size = struct.unpack_from(order + "II", body, at)
        if kind >> 16:  # small data element: size and type share the first word
            return kind & 0xFFFF, kind >> 16, at + 4
        return kind, size, at + 8

    try:
        kind, declared, at = element(0)
        if kind != _MI_MATRIX:
            return None
        kind, size, at = element(at)  # array flags: class and flags, then nzmax
        if kind != _MI_UINT32 or size != 8:
            return None
        _, nzmax = struct.unpack_from(order + "II", body, at)
        at += 8
        kind, size, at = element(at)  # dimensions
        at += size + (-size) % 8
        kind, size, at = element(at)  # array name
        if kind != _MI_INT8:
            return None
        return body[at:at + size].decode("ascii", "replace"), nzmax, declared
    except struct.error:
        return None


class _rewound:
    """A buffer rewound on entry and left open on exit (the caller owns it)."""

    def __init__(self, fh: Any) -> None:
        self.fh = fh

    def __enter__(self) -> Any:
        self.fh.seek(0)
        return self.fh

    def __exit__(self, *exc: Any) -> None:
        self.fh.seek(0)
