"""Content-addressed cache of check results, so re-checking an unchanged repository is fast.

An entry's key hashes the tool version, the cache format, the effective configuration, the
model file's repository path and bytes. The entry records the hash of every matrix file the
model referenced; a changed reference is a miss.

So that an unchanged repository is not read and hashed again on every check, the pack also
records the status (size, modification and change times, inode) of each model and matrix
file with its key or hash, as a version-control index does: a file whose status is the same
is taken to have the same bytes. A status is recorded only when the file had not changed for
two seconds before the check began, so a change within one timestamp tick cannot go unseen.

Entries live in one pack file per configuration, read once and written once per run,
atomically. A pack is a short header, a JSON *head* (the entries' data: what reports read),
an index of the entries' blobs, and a *body* of raw bytes holding the blobs (float64
matrices, participation factors and mode tables, JSON texts of line tables), read only when
something uses them. Never pickles, never code. The header holds the sizes and a CRC-32 of
all three: a pack that fails it or whose index does not fit its body, or an entry that
cannot be parsed or checked, is ignored and rebuilt, never trusted. The folder explains
itself (README, .gitignore, CACHEDIR.TAG).
"""

from __future__ import annotations

import array
import hashlib
import json
import os
import struct
import sys
import time
import zlib
from pathlib import Path
from typing import Any, Callable

from .pool import item_bytes
from .summary import summary_of

__all__ = ["ResultCache", "Pack", "PackBlobs", "RawBlobs", "CACHE_DIR", "read_pack", "write_pack"]

from .cache_format import CACHE_DIR  # noqa: E402 (re-exported)
_README = """\
This folder is eigengate's result cache. It is safe to delete at any time; eigengate
rebuilds it. Each entry is keyed by the hash of a model file's bytes, the files it references,
the effective configuration and the eigengate version. Use --no-cache to bypass it.
"""
_TAG = ("Signature: 8a477f597d28d172789f06886806bc55\n"
        "# This file is a cache directory tag created by eigengate.\n"
        "# For information about cache directory tags see https://bford.info/cachedir/\n")


def _sha(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


#: A file changed this soon before a check began could change again within the same
#: timestamp tick without its status showing it: its status is not recorded.
_RACY_NS = 2_000_000_000


def _signature(st: os.stat_result) -> list[int]:
    return [st.st_size, st.st_mtime_ns, st.st_ctime_ns, st.st_ino]


#: First bytes of a pack; then the sizes of head, index and body and a CRC-32 of all three
#: (little-endian, 8+8+8+4 bytes).
_MAGIC = b"eigengate result pack\n"
_HEADER = struct.Struct("<QQQI")
#: Per blob, in the index: offset and size in the body, rows and columns (-1, -1 for a text).
_INDEX_COLUMNS = 4


class Pack:
    """A pack read back and checked: its head (JSON), blob index and body."""

    def __init__(self, head: dict, index: list, body: memoryview) -> None:
        self.head, self._body = head, body
        #: offset, size, rows, columns of each blob in turn, flat (a row per blob would cost
        #: a list per blob to build: thousands for each warm check)
        self._index = index
        self._count = len(index) // _INDEX_COLUMNS

    def row(self, i: int) -> tuple[int, int, int, int]:
        """Offset, size, rows and columns of blob ``i``."""
        k = _INDEX_COLUMNS * i
        f = self._index
        return f[k], f[k + 1], f[k + 2], f[k + 3]

    def shapes(self, first: int, count: int) -> list[tuple[int, int] | None]:
        f = self._index
        return [None if f[k + 3] < 0 else (f[k + 2], f[k + 3])
                for k in range(_INDEX_COLUMNS * first, _INDEX_COLUMNS * (first + count),
                               _INDEX_COLUMNS)]

    def blobs(self, first: Any, count: Any) -> "PackBlobs":
        """The blobs of one entry; ValueError when its span is not within the index."""
        if type(first) is not int or type(count) is not int or not (
                0 <= first and 0 <= count <= self._count - first):
            raise ValueError("entry blobs lie outside the pack index")
        return PackBlobs(self, first, count)

    def items(self, first: Any, count: Any) -> list[tuple[bytes, list | None]]:
        """An entry's blobs as ``(bytes, shape or None)``, as :func:`write_pack` takes them;
        ValueError when its span is not within the index."""
        self.blobs(first, count)
        out = []
        for off, size, rows, cols in map(self.row, range(first, first + count)):
            out.append((bytes(self._body[off:off + size]), None if cols < 0 else [rows, cols]))
        return out


class _BlobReader:
    """Reading methods of :class:`eigengate.scan.serial.Blobs` over raw blobs: each is its
    bytes (float64, little-endian, or UTF-8 JSON) with its shape (None for a text), served
    by ``_raw``."""

    __slots__ = ()

    def _raw(self, i: Any) -> tuple[Any, int, int]:  # pragma: no cover - abstract
        raise NotImplementedError

    def array(self, i: Any):
        import numpy as np

        raw, rows, cols = self._raw(i)
        if cols < 0:
            raise ValueError(f"blob {i} is not an array")
        return np.frombuffer(raw, dtype="<f8", count=rows * cols).reshape(rows, cols)

    def rows(self, i: Any) -> list[list[float]]:
        """An array blob as rows of Python floats, read without numpy (a warm re-check
        renders findings' mode rows from these)."""
        raw, rows, cols = self._raw(i)
        if cols < 0:
            raise ValueError(f"blob {i} is not an array")
        flat = _little("d", raw).tolist()
        return [flat[k:k + cols] for k in range(0, rows * cols, cols)]

    def json(self, i: Any):
        raw, _, cols = self._raw(i)
        if cols >= 0:
            raise ValueError(f"blob {i} is not a text")
        return json.loads(bytes(raw))


class PackBlobs(_BlobReader):
    """The blobs of one cache entry, served from the body of its pack."""

    __slots__ = ("_pack", "_first", "_count")

    def __init__(self, pack: Pack, first: int, count: int) -> None:
        self._pack, self._first, self._count = pack, first, count

    def _raw(self, i: Any) -> tuple[Any, int, int]:
        if type(i) is not int or not 0 <= i < self._count:
            raise ValueError(f"blob {i!r} is not one of the entry's {self._count}")
        off, size, rows, cols = self._pack.row(self._first + i)
        return self._pack._body[off:off + size], rows, cols

    def shapes(self) -> list[tuple[int, int] | None]:
        """``(rows, columns)`` of each array blob, None for each text."""
        return self._pack.shapes(self._first, self._count)


class RawBlobs(_BlobReader):
    """Blobs as a worker sends them (``(bytes, [rows, columns] or None)``, what
    :func:`write_pack` takes), checked on arrival: sizes fit shapes."""

    __slots__ = ("_items", "_shapes")

    def __init__(self, items: list) -> None:
        shapes: list[tuple[int, int] | None] = []
        for raw, shape in items:
            if shape is None:
                shapes.append(None)
                continue
            rows, cols = shape
            if rows < 0 or cols < 0 or len(raw) != 8 * rows * cols:
                raise ValueError("blob size does not fit its shape")
            shapes.append((rows, cols))
        self._items, self._shapes = items, shapes

    def _raw(self, i: Any) -> tuple[Any, int, int]:
        if type(i) is not int or not 0 <= i < len(self._items):
            raise ValueError(f"blob {i!r} is not one of the entry's {len(self._items)}")
        raw, shape = self._items[i]
        return (raw, -1, -1) if shape is None else (raw, shape[0], shape[1])

    def shapes(self) -> list[tuple[int, int] | None]:
        return self._shapes


def _little(code: str, raw) -> array.array:
    """Little-endian 8-byte numbers of ``raw`` as an array of this machine's order."""
    out = array.array(code)
    out.frombytes(raw)
    if sys.byteorder != "little":  # pragma: no cover - big-endian machines
        out.byteswap()
    return out


def write_pack(head: dict, entry_blobs: dict[str, list[tuple[bytes, list | None]]]) -> bytes:
    """The bytes of a pack: ``head`` (whose entries get their ``blobs`` as ``[first, count]``
    in the index) and, for each entry key, its blobs as ``(bytes, shape or None)``. Blobs
    are 8-byte aligned in the body."""
    chunks: list[bytes] = []
    index: list[tuple[int, int, int, int]] = []
    size = 0
    for key, items in entry_blobs.items():
        head["entries"][key]["blobs"] = [len(index), len(items)]
        for raw, shape in items:
            pad = -size % 8
            if pad:
                chunks.append(b"\0" * pad)
                size += pad
            rows, cols = (-1, -1) if shape is None else shape
            index.append((size, len(raw), rows, cols))
            chunks.append(raw)
            size += len(raw)
    head_bytes = json.dumps(head, separators=(",", ":")).encode("utf-8")
    flat = array.array("q", [v for row in index for v in row])
    if sys.byteorder != "little":  # pragma: no cover - big-endian machines
        flat.byteswap()
    index_bytes = flat.tobytes()
    body = b"".join(chunks)
    crc = zlib.crc32(body, zlib.crc32(index_bytes, zlib.crc32(head_bytes)))
    return b"".join((_MAGIC, _HEADER.pack(len(head_bytes), len(index), len(body), crc),
                     head_bytes, index_bytes, body))


def read_pack(raw: bytes) -> Pack:
    """A pack from its bytes, checked whole (sizes, checksum, every blob inside the body with
    a size that fits its shape); ValueError when it is not one, or not whole."""
    start = len(_MAGIC) + _HEADER.size
    if raw[:len(_MAGIC)] != _MAGIC or len(raw) < start:
        raise ValueError("not an eigengate result pack")
    n_head, n_blobs, n_body, crc = _HEADER.unpack_from(raw, len(_MAGIC))
    n_index = 8 * _INDEX_COLUMNS * n_blobs
    if len(raw) != start + n_head + n_index + n_body:
        raise ValueError("pack size does not match its header")
    view = memoryview(raw)
    head_bytes = view[start:start + n_head]
    index_bytes = view[start + n_head:start + n_head + n_index]
    body = view[start + n_head + n_index:]
    if zlib.crc32(body, zlib.crc32(index_bytes, zlib.crc32(head_bytes))) != crc:
        raise ValueError("pack checksum does not match")
    flat = _little("q", index_bytes).tolist()
    c = _INDEX_COLUMNS
    for off, size, rows, cols in zip(flat[0::c], flat[1::c], flat[2::c], flat[3::c]):
        if off < 0 or size < 0 or off > n_body - size or (
                rows != -1 if cols < 0 else rows < 0 or size != 8 * rows * cols):
            raise ValueError("pack index does not fit its body")
    head = json.loads(bytes(head_bytes))
    if not isinstance(head, dict):
        raise ValueError("pack head is not an object")
    return Pack(head, flat, body)


class ResultCache:
    """The cache of one configuration: one pack of entries below ``root / CACHE_DIR``.

    ``get`` serves entries from the pack read at the first lookup; ``put`` collects new ones;
    ``save`` writes the pack once, atomically, keeping the entries used or made in this run
    and, up to a limit, older ones (so scans of parts of a repository do not evict each
    other). One pack per configuration digest, so two configurations never mix.
    """

    MAX_ENTRIES = 100_000

    def __init__(self, root: Path, config_digest: str, *, folder: Path | None = None) -> None:
        from ..version import __version__
        from .cache_format import FORMAT

        self.root = Path(root)
        self.folder = Path(folder) if folder is not None else self.root / CACHE_DIR
        self._salt = f"eigengate {__version__}\0cache {FORMAT}\0config {config_digest}\0"
        self._salt_bytes = self._salt.encode()
        self._pack = self.folder / f"v{FORMAT}" / f"{_sha(self._salt_bytes)[:24]}.pack"
        self._old: dict[str, Any] | None = None
        self._read: Pack | None = None
        self._tables: dict[str, dict] = {"files": {}, "refs": {}, "sniff": {}}
        self._new: dict[str, tuple[dict, list]] = {}
        self._used: dict[str, None] = {}  # ordered: the pack keeps the scan's order
        self._started = time.time_ns()
        self._at_exit = False
        #: Status records to add: "files" (model file → key), "refs" (matrix file → hash),
        #: "sniff" (file → whether its content has a model_format key).
        self._noted: dict[str, dict[str, list]] = {"files": {}, "refs": {}, "sniff": {}}

    def key(self, source: str, content: bytes) -> str:
        return _sha(self._salt_bytes + source.encode() + b"\0" + content)

    def _ref_hashes(self, refs) -> dict[str, str] | None:
        out = {}
        for rel in refs:
            try:
                path = self.root / rel
                st = os.stat(path)
                digest = self._recorded("refs", rel, st)
                if digest is None:
                    digest = _sha(path.read_bytes())
                    self._note("refs", rel, st, digest)
                out[rel] = digest
            except OSError:
                return None
        return out

    def _recorded(self, table: str, rel: str, st: os.stat_result) -> str | None:
        if self._old is None:
            self._entries()
        row = self._noted[table].get(rel) or self._tables[table].get(rel)
        # _signature(st), compared field by field (a warm check asks this of every file)
        if type(row) is list and len(row) == 5 and row[0] == st.st_size \
                and row[1] == st.st_mtime_ns and row[2] == st.st_ctime_ns \
                and row[3] == st.st_ino and type(row[4]) is str:
            return row[4]
        return None

    def _note(self, table: str, rel: str, st: os.stat_result | None, value: str) -> None:
        if st is not None and max(st.st_mtime_ns, st.st_ctime_ns) < self._started - _RACY_NS:
            row = _signature(st) + [value]
            self._entries()
            if self._tables[table].get(rel) != row:  # only what is new makes a save
                self._noted[table][rel] = row

    def status_row(self, table: str, rel: str) -> list | None:
        """The status record ``[size, mtime, ctime, inode, value]`` of ``rel`` in ``table``
        ("files", "refs", "sniff") as the next save writes it, or None."""
        self._entries()
        row = self._noted[table].get(rel) or self._tables[table].get(rel)
        return row if type(row) is list and len(row) == 5 and type(row[4]) is str else None

    def status_table(self, table: str) -> dict[str, list]:
        """Every status record of ``table`` as the next save writes it."""
        self._entries()
        return {rel: row for rel, row in {**self._tables[table], **self._noted[table]}.items()
                if type(row) is list and len(row) == 5 and type(row[4]) is str}

    def entry_refs(self, key: str) -> dict[str, str] | None:
        """The referenced files of entry ``key`` with their hashes (made or used in this
        run), or None when the next save does not hold it."""
        new = self._new.get(key)
        if new is not None:
            return dict(new[0]["refs"])
        entry = self._entries().get(key) if key in self._used else None
        refs = entry.get("refs") if isinstance(entry, dict) else None
        return dict(refs) if isinstance(refs, dict) else None

    def known_key(self, rel: str, st: os.stat_result) -> str | None:
        """The key of model file ``rel`` when its status is the one recorded with it."""
        return self._recorded("files", rel, st)

    def file_key(self, rel: str, st: os.stat_result | None, path: str,
                 content: bytes | None = None) -> str | None:
        """The key of model file ``rel`` (at ``path``, status ``st`` taken before reading):
        the recorded one when its status is unchanged, else from its bytes (``content`` when
        already read), recording the status; None when it cannot be read."""
        key = None if st is None else self.known_key(rel, st)
        if key is None:
            if content is None:
                try:
                    with open(path, "rb") as fh:
                        content = fh.read()
                except OSError:
                    return None
            key = self.key(rel, content)
            self.note_key(rel, st, key)
        return key

    def note_key(self, rel: str, st: os.stat_result | None, key: str) -> None:
        """Record the status of model file ``rel`` (taken before it was read) with its key."""
        self._note("files", rel, st, key)

    def references(self, rel: str, content: bytes) -> tuple[str, ...] | None:
        """The files (matrix files, vector-field modules) that model file ``rel`` with these
        bytes referenced when it was last analysed, or None when the pack has no entry for it
        (for a hook mapping changed files to the models that depend on them)."""
        entry = self._entries().get(self.key(rel, content))
        refs = entry.get("refs") if isinstance(entry, dict) else None
        return tuple(refs) if isinstance(refs, dict) else None
    def sniffed(self, rel: str, st: os.stat_result) -> bool | None:
        """Whether file ``rel`` had a model_format key when last read with this status."""
        said = self._recorded("sniff", rel, st)
        return None if said is None else said == "model"

    def note_sniff(self, rel: str, st: os.stat_result | None, is_model: bool) -> None:
        self._note("sniff", rel, st, "model" if is_model else "plain")

    def _entries(self) -> dict[str, Any]:
        if self._old is None:
            try:
                pack = read_pack(self._pack.read_bytes())
                head = pack.head
                entries = head.get("entries") if head.get("salt") == self._salt else None
                if isinstance(entries, dict):
                    self._old, self._read = entries, pack
                    for table in self._tables:
                        rows = head.get(table)
                        self._tables[table] = rows if isinstance(rows, dict) else {}
                else:
                    self._old = {}
            except (OSError, ValueError):
                self._old = {}  # missing or corrupt: start again, never trust it
        return self._old

    def get(self, key: str) -> tuple[dict[str, Any], PackBlobs, Callable[[], Any]] | None:
        """The stored summary, blobs and a reader of the whole data for ``key``
        (:mod:`eigengate.scan.summary`), or None (missing, corrupt, or a reference changed).
        The whole data is the entry's last blob, a JSON text."""
        entry = self._entries().get(key)
        try:
            # a missing entry (None) raises TypeError here, handled like a malformed one
            refs, summary, (first, count) = entry["refs"], entry["summary"], entry["blobs"]  # type: ignore[index]
            if type(refs) is not dict or type(summary) is not dict or type(count) is not int \
                    or count < 1:
                return None
            pack = self._read
            whole = pack.blobs(first, count)  # type: ignore[union-attr]
            if pack.row(first + count - 1)[3] >= 0:  # type: ignore[union-attr]
                return None  # the last blob is not a text
            if refs and self._ref_hashes(sorted(refs)) != refs:
                return None
        except (KeyError, TypeError, ValueError, AttributeError):
            return None
        self._used[key] = None
        return summary, PackBlobs(pack, first, count - 1), lambda: whole.json(count - 1)  # type: ignore[arg-type]

    def put(self, key: str, data: dict[str, Any], blobs: list, refs: list[str]) -> None:
        """Remember ``data`` and its blob items (see :class:`eigengate.scan.serial.Blobs`) for
        ``key``; written by :meth:`save`."""
        hashes = self._ref_hashes(refs)
        if hashes is not None:
            self._new[key] = ({"refs": hashes, "summary": summary_of(data)},
                              [*blobs, json.dumps(data, separators=(",", ":"))])

    def _old_blobs(self, entry: dict) -> list[tuple[bytes, Any]] | None:
        try:
            return self._read.items(*entry["blobs"])  # type: ignore[union-attr]
        except (KeyError, TypeError, ValueError, AttributeError):
            return None

    def save(self) -> None:
        """Write the pack atomically if anything new was made; failures are ignored (the
        cache is optional, and a half-written pack is never visible)."""
        if not self._new and not any(self._noted.values()):
            return
        old = self._entries()
        order = [k for k in self._used if k in old]
        order += [k for k in old if k not in self._used and k not in self._new]
        order = order[:max(0, self.MAX_ENTRIES - len(self._new))]
        entries: dict[str, Any] = {}
        blobs: dict[str, list] = {}
        for k in order:
            kept = self._old_blobs(old[k])
            if kept is not None:
                entries[k] = {"refs": old[k].get("refs"), "summary": old[k].get("summary")}
                blobs[k] = kept
        for k, (entry, items) in self._new.items():
            entries[k] = dict(entry)
            blobs[k] = [item_bytes(x) for x in items]
        head: dict[str, Any] = {"salt": self._salt, "entries": entries}
        refs = {h for e in entries.values() for h in (e.get("refs") or {}).values()}
        for table, wanted in (("files", entries), ("refs", refs)):
            rows = {**self._tables[table], **self._noted[table]}
            head[table] = {rel: row for rel, row in rows.items()
                           if type(row) is list and len(row) == 5 and row[4] in wanted}
        sniff = {**self._tables["sniff"], **self._noted["sniff"]}
        head["sniff"] = dict(list(sniff.items())[-self.MAX_ENTRIES:])
        raw = write_pack(head, blobs)
        try:
            self._ensure_folder()
            self._pack.parent.mkdir(parents=True, exist_ok=True)
            import tempfile  # a no-change check writes nothing

            fd, tmp = tempfile.mkstemp(prefix=".tmp-", dir=self._pack.parent)
            with os.fdopen(fd, "wb") as fh:
                fh.write(raw)
            os.replace(tmp, self._pack)
        except OSError:
            return
        self._old, self._new = None, {}
        self._noted = {"files": {}, "refs": {}, "sniff": {}}

    def save_at_exit(self) -> None:
        """:meth:`save` when this process ends (once however often asked)."""
        if not self._at_exit:
            import atexit

            self._at_exit = True
            atexit.register(self.save)

    def _ensure_folder(self) -> None:
        if (self.folder / "CACHEDIR.TAG").is_file():
            return
        if self.folder.is_dir():  # made by hand, or its tag was deleted: restore the files
            self._explain(self.folder)
            return
        self.folder.parent.mkdir(parents=True, exist_ok=True)
        # Build the explanatory files in a temporary folder, then move it into place, so a
        # half-made cache folder is never seen; a concurrent creator simply wins.
        import tempfile

        tmp = Path(tempfile.mkdtemp(prefix=".eigengate-cache-", dir=self.folder.parent))
        try:
            self._explain(tmp)
            try:
                os.rename(tmp, self.folder)
            except OSError:
                pass
        finally:
            if tmp.exists():
                for f in tmp.iterdir():
                    f.unlink()
                tmp.rmdir()

    @staticmethod
    def _explain(folder: Path) -> None:
        (folder / "README").write_text(_README, encoding="utf-8")
        (folder / ".gitignore").write_text("# created by eigengate\n*\n", encoding="utf-8")
        (folder / "CACHEDIR.TAG").write_text(_TAG, encoding="utf-8")
