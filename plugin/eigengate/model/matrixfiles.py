"""Matrices kept in files next to the model: ``{file: "plant.npz", key: "A"}``.

Reads ``.npz`` (numpy, never pickles: named arrays of ``numpy.savez``, or the one sparse matrix
of ``scipy.sparse.save_npz``), ``.mat`` (MATLAB v4-v7 through ``scipy.io.loadmat``, dense or
sparse), ``.mtx`` (Matrix Market, an open NIST format, through ``scipy.io.mmread``) and
``.csv`` (plain numbers separated by commas, ``#`` comments). Sparse matrices come back as
scipy.sparse matrices, never made dense here. Every size is checked from the file's headers
before its data is read: the ``.npy`` headers and zip entries of an archive, the variable
headers of a ``.mat`` file (shape, and for a sparse one the declared nonzeros and the
uncompressed size of its element), the size line of a Matrix Market file; a dense matrix
against :data:`MAX_MATRIX_ENTRIES`, a sparse one against the state limit
(``model.limits.MAX_SPARSE_STATES``) and the nonzeros this machine's memory allows
(``model.limits.sparse_entry_limit``). A path is
relative to the model file's folder and must resolve, symlinks followed, inside the repository
root: a model file in a pull request must not make CI read files elsewhere on the machine.
Nothing is cached here; the caller gets the repository-relative path of every file read so a
cache can hash their contents.

A caller that reads files from somewhere other than the working tree (git history, say) passes
``read``: a callable from a repository-relative POSIX path to the file's bytes. The path is then
resolved lexically (``..`` may not climb above the root) and nothing touches the filesystem.
"""

from __future__ import annotations

from pathlib import Path
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any, Callable

from .formats import suggest
from ..errors import ModelError

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

__all__ = ["MAX_MATRIX_ENTRIES", "MAX_MATRIX_FILE_BYTES", "MATRIX_SUFFIXES", "REFERENCE_KEYS",
           "is_reference", "load_reference"]

#: Largest referenced matrix file read, in bytes (a dense 4000×4000 float64 matrix is 128 MB).
MAX_MATRIX_FILE_BYTES = 256 * 1024 * 1024
#: Most entries a referenced matrix may hold: the largest state matrix a model may have
#: (model.MAX_STATES squared). Checked from file headers before any data is read.
MAX_MATRIX_ENTRIES = 4000 * 4000
#: A plain CSV number: what Python's float() reads minus underscores, non-ASCII digits,
#: inf/nan spellings and inner blanks.
_CSV_NUMBER = r"[ \t]*[-+]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][-+]?[0-9]+)?[ \t]*"
#: Endings of matrix files that can be referenced.
MATRIX_SUFFIXES = (".npz", ".mat", ".mtx", ".csv")
#: Members of a ``scipy.sparse.save_npz`` archive, by storage format (others are refused).
_SAVE_NPZ = {"csr": ("data", "indices", "indptr"), "csc": ("data", "indices", "indptr"),
             "coo": ("data", "row", "col")}
#: Keys of a reference mapping.
REFERENCE_KEYS = ("file", "key")


def is_reference(value: Any) -> bool:
    """True when ``value`` is a mapping, which in a matrix field means a file reference."""
    return isinstance(value, Mapping)


def load_reference(
    ref: Mapping[str, Any],
    *,
    source: str,
    field: str,
    line: int | None,
    base_dir: Path | None,
    root: Path | None,
    read: Callable[[str], bytes] | None = None,
    readers: Mapping[str, Callable[..., Any]] | None = None,
) -> tuple[Any, str]:
    """Load the matrix a reference mapping points at (a numpy array, or a scipy.sparse
    matrix for a sparse file).

    Parameters
    ----------
    ref
        ``{"file": relative path, "key": name}``; ``key`` picks the array in ``.npz`` and
        ``.mat`` files and may be left out when the file holds exactly one.
    source, field, line
        Where the reference is written, for error messages.
    base_dir
        Folder of the model file; paths are relative to it.
    root
        Repository root; the resolved file must lie inside it. Defaults to ``base_dir``.
    read
        When given, files are read through it instead of the filesystem: it takes the
        repository-relative POSIX path and returns the bytes (``FileNotFoundError`` when there
        is no such file, ``IsADirectoryError`` or ``OSError`` otherwise); ``base_dir`` is then
        the model file's folder relative to the root (``root`` is not used).
    readers
        Readers by suffix, ``reader(path or stream, rel, key, bad)``, in place of this
        module's (the stacked arrays of ``model.stacked``): other suffixes are refused; the
        path is confined and the size checked the same way.

    Returns
    -------
    tuple of numpy.ndarray and str
        The array as stored (the caller checks it with ``as_matrix``) and the file's path
        relative to ``root`` with POSIX slashes.

    Raises
    ------
    ModelError
        For a malformed reference, a path outside the repository, a missing, oversized or
        unreadable file, a missing or unknown key, or pickled/object content.
    """
    def bad(problem: str, hint: str | None = None, sub: str = "") -> ModelError:
        return ModelError(source, field + sub, problem, line=line, hint=hint)

    for k in ref:
        if k not in REFERENCE_KEYS:
            close = suggest(str(k), REFERENCE_KEYS)
            raise bad(f"has an unknown key {k!r} in a matrix file reference",
                      f"did you mean {close!r}?" if close else "a reference has 'file' and 'key'")
    name = ref.get("file")
    if not isinstance(name, str) or not name.strip():
        raise bad(f"must be a non-empty path string, got {name!r}",
                  "a matrix is a list of rows or {file: 'path.npz', key: 'A'}", ".file")
    key = ref.get("key")
    if key is not None and not isinstance(key, str):
        raise bad(f"must be a string naming the array, got {key!r}", sub=".key")
    if base_dir is None:
        raise bad(f"refers to the file {name!r}, but this model was not read from a file",
                  "pass base_dir to resolve file references", ".file")
    if Path(name).is_absolute() or name.startswith(("/", "\\")) or Path(name).drive:
        raise bad(f"must be a path relative to the model file's folder, got the absolute "
                  f"path {name!r}", "absolute paths do not travel between machines", ".file")
    use = _READERS if readers is None else readers
    if read is not None:
        return _load_through(read, name, key, str(base_dir), bad, use)
    base_dir = Path(base_dir)
    root = Path(root) if root is not None else base_dir
    root_real = root.resolve()
    target = (base_dir / name).resolve()
    # resolve() follows symlinks, so a link pointing out of the repository is caught here,
    # before anything about the target (even whether it exists) is revealed.
    if not target.is_relative_to(root_real):
        raise bad(f"points outside the repository: {name!r} resolves outside the "
                  "repository root", "keep matrix files inside the repository", ".file")
    rel = target.relative_to(root_real).as_posix()
    if not target.is_file():
        raise bad(f"refers to {rel!r}, which does not exist" if not target.exists()
                  else f"refers to {rel!r}, which is not a file", sub=".file")
    suffix = target.suffix.lower()
    if suffix not in MATRIX_SUFFIXES:
        raise bad(f"refers to {rel!r}, an unknown matrix file type {target.suffix or '(none)'!r}",
                  "matrix files end in " + ", ".join(MATRIX_SUFFIXES), ".file")
    size = target.stat().st_size
    if size > MAX_MATRIX_FILE_BYTES:
        raise bad(f"refers to {rel!r}, {size} bytes, larger than the limit of "
                  f"{MAX_MATRIX_FILE_BYTES} bytes", sub=".file")
    if suffix not in use:
        raise bad(f"refers to {rel!r}, a {suffix} file, which cannot hold this array",
                  "such arrays are read from " + ", ".join(sorted(use)) + " files", ".file")
    return use[suffix](target, rel, key, bad), rel


def _load_through(read: Callable[[str], bytes], name: str, key: str | None, base_dir: str,
                  bad: Any, use: Mapping[str, Callable[..., Any]]) -> tuple[Any, str]:
    """Resolve ``name`` lexically against ``base_dir`` (repository-relative) and read it with
    ``read``; the same confinement, type and size rules as for files on disk."""
    import io
    import posixpath

    rel = posixpath.normpath(posixpath.join(base_dir.replace("\\", "/"), name.replace("\\", "/")))
    if rel == ".." or rel.startswith("../") or rel.startswith("/"):
        raise bad(f"points outside the repository: {name!r} resolves outside the "
                  "repository root", "keep matrix files inside the repository", ".file")
    suffix = posixpath.splitext(rel)[1].lower()
    if suffix not in MATRIX_SUFFIXES:
        raise bad(f"refers to {rel!r}, an unknown matrix file type {suffix or '(none)'!r}",
                  "matrix files end in " + ", ".join(MATRIX_SUFFIXES), ".file")
    try:
        data = read(rel)
    except FileNotFoundError:
        raise bad(f"refers to {rel!r}, which does not exist", sub=".file") from None
    except OSError as exc:
        raise bad(f"refers to {rel!r}, which cannot be read ({exc})", sub=".file") from None
    if len(data) > MAX_MATRIX_FILE_BYTES:
        raise bad(f"refers to {rel!r}, {len(data)} bytes, larger than the limit of "
                  f"{MAX_MATRIX_FILE_BYTES} bytes", sub=".file")
    if suffix not in use:
        raise bad(f"refers to {rel!r}, a {suffix} file, which cannot hold this array",
                  "such arrays are read from " + ", ".join(sorted(use)) + " files", ".file")
    return use[suffix](io.BytesIO(data), rel, key, bad), rel


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


def _read_mtx(path: "Path | Any", rel: str, key: str | None, bad: Any) -> Any:
    """A Matrix Market file: its header (size line) checked by ``scipy.io.mminfo`` before
    ``scipy.io.mmread`` reads the entries; coordinate files come back sparse."""
    import numpy as np
    import scipy.io
    import scipy.sparse

    if key is not None:
        raise bad(f"is {key!r}, but a .mtx file holds a single matrix",
                  "remove key from the reference", ".key")
    # A path as a string, a buffer rewound: scipy's reader aborts the process (a C++
    # exception) on an open file object of the operating system.
    src = str(path) if isinstance(path, Path) else path
    try:
        if not isinstance(path, Path):
            path.seek(0)
        rows, cols, entries, fmt, field, symmetry = scipy.io.mminfo(src)
        if field not in ("real", "integer"):
            raise bad(f"refers to {rel!r}, a Matrix Market file of {field} entries",
                      "eigengate reads real or integer matrices", ".file")
        if fmt == "array":
            _check_shape((rows, cols), "(matrix)", rel, bad)
        else:
            stored = entries * (1 if symmetry == "general" else 2)
            _check_sparse(rows, cols, stored, rel, bad)
        if not isinstance(path, Path):
            path.seek(0)
        value = scipy.io.mmread(src)
    except ModelError:
        raise
    except (OSError, ValueError, TypeError, IndexError, OverflowError, RuntimeError) as exc:
        raise bad(f"refers to {rel!r}, which is not a readable Matrix Market file ({exc})",
                  sub=".file") from None
    if scipy.sparse.issparse(value):
        return scipy.sparse.csr_matrix(value)
    return np.asarray(value)


def _read_csv(path: "Path | Any", rel: str, key: str | None, bad: Any) -> "np.ndarray":
    import array
    import codecs
    import re

    import numpy as np

    if key is not None:
        raise bad(f"is {key!r}, but a .csv file holds a single matrix",
                  "remove key from the reference", ".key")
    row_re = re.compile(f"{_CSV_NUMBER}(?:,{_CSV_NUMBER})*")
    cell_re = re.compile(_CSV_NUMBER)
    values = array.array("d")  # 8 bytes an entry: no list of Python floats
    width = rows = 0
    number = 0
    try:
        # Read line by line (a file on disk is never held whole), decoding strictly.
        raw = io_lines(path)
        for number, line in enumerate(codecs.iterdecode(raw, "utf-8"), start=1):
            body = line.split("#", 1)[0]
            if number == 1:
                body = body.removeprefix("\ufeff")
            if not body.strip():
                continue
            body = body.strip("\r\n")
            cells = body.split(",")
            if not row_re.fullmatch(body):
                column, cell = next((c, v) for c, v in enumerate(cells, start=1)
                                    if not cell_re.fullmatch(v))
                raise bad(f"refers to {rel!r}, whose line {number}, column {column} (row "
                          f"{rows + 1}) is {cell.strip()!r}, not a plain finite number",
                          "write numbers like 0.5, -2 or 1e-3; underscores, inf and nan are refused")
            if rows and len(cells) != width:
                raise bad(f"refers to {rel!r}, whose line {number} has {len(cells)} numbers "
                          f"while the first row has {width}")
            width = len(cells)
            rows += 1
            if rows * width > MAX_MATRIX_ENTRIES:
                raise bad(f"refers to {rel!r}, which holds more than {MAX_MATRIX_ENTRIES} "
                          f"entries by row {rows}", "a model has at most 4000 states")
            values.extend(map(float, cells))
    except UnicodeDecodeError as exc:
        raise bad(f"refers to {rel!r}, which is not UTF-8 text (line {number + 1}, byte "
                  f"{exc.start} of that line)", sub=".file") from None
    except OSError as exc:
        raise bad(f"refers to {rel!r}, which cannot be read ({exc.strerror or exc})",
                  sub=".file") from None
    if not rows:
        raise bad(f"refers to {rel!r}, which holds no numbers")
    return np.frombuffer(values, dtype=float).reshape(rows, width).copy()


_READERS = {".npz": _read_npz, ".mat": _read_mat, ".mtx": _read_mtx, ".csv": _read_csv}


def io_lines(path: "Path | Any"):
    """The byte lines of a file on disk or of an in-memory buffer (keeps line endings)."""
    if hasattr(path, "getvalue"):
        yield from path.getvalue().splitlines(keepends=True)
        return
    with open(path, "rb") as fh:
        yield from fh
