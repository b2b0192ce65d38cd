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
from .limits import MAX_MATRIX_ENTRIES, MAX_MATRIX_FILE_BYTES
from .matrix_archives import _check_shape, _check_sparse, _read_mat, _read_npz

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

__all__ = ["MAX_MATRIX_ENTRIES", "MAX_MATRIX_FILE_BYTES", "MATRIX_SUFFIXES", "REFERENCE_KEYS",
           "is_reference", "load_reference"]

#: A plain CSV number: what Python's float() reads minus underscores, non-ASCII digits,
#: inf/nan spellings and inner blanks.
_CSV_NUMBER = r"[ \t]*[-+]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][-+]?[0-9]+)?[ \t]*"
#: Endings of matrix files that can be referenced.
MATRIX_SUFFIXES = (".npz", ".mat", ".mtx", ".csv")
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
