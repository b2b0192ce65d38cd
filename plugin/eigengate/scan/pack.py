"""The result pack's file format: a short header (magic, the sizes of head, index and body,
and a CRC-32 of all three), a JSON *head*, an int64 index of the blobs, and a *body* of raw
bytes (float64 matrices, JSON texts). Read whole and checked on reading (sizes, checksum,
every blob inside the body with a size that fits its shape); the blobs are read only when
something uses them. Never pickles, never code. :mod:`eigengate.scan.cache` decides what
goes in."""

from __future__ import annotations

import array
import json
import operator
import struct
import sys
import zlib
from typing import Any

__all__ = ["Pack", "PackBlobs", "RawBlobs", "BlobReader", "Segment", "pack_chunks", "read_pack",
           "write_pack"]

#: An entry's blobs as one segment of bytes and its flat index (offset in the segment, size,
#: rows, columns per blob): what :func:`write_pack` takes and a pool worker sends.
Segment = tuple[bytes, list[int]]


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

    def items(self, first: Any, count: Any) -> Segment:
        """An entry's blobs as one segment and its index (offsets in the segment), as
        :func:`write_pack` takes them; ValueError when its span is not within the index."""
        self.blobs(first, count)
        index = self._index[_INDEX_COLUMNS * first:_INDEX_COLUMNS * (first + count)]
        if not index:
            return b"", []
        offsets = index[0::_INDEX_COLUMNS]
        start = min(offsets) & ~7  # blobs are 8-byte aligned: so they stay in the segment
        end = max(map(operator.add, offsets, index[1::_INDEX_COLUMNS]))
        index[0::_INDEX_COLUMNS] = [off - start for off in offsets]
        return bytes(self._body[start:end]), index


class BlobReader:
    """Reading methods over raw blobs (:class:`eigengate.scan.encode.Blobs`): each is its
    bytes (float64, little-endian, or UTF-8 text) with its shape (None for a text), served
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

    def text(self, i: Any) -> str:
        raw, _, cols = self._raw(i)
        if cols >= 0:
            raise ValueError(f"blob {i} is not a text")
        return str(raw, "utf-8")

    def json(self, i: Any):
        return json.loads(self.text(i))

    def ints(self, i: Any) -> list[int]:
        """A 1×k blob of int64 numbers (a line table's), as Python ints."""
        raw, rows, cols = self._raw(i)
        if rows != 1:
            raise ValueError(f"blob {i} is not a row of numbers")
        return _little("q", raw).tolist()


class PackBlobs(BlobReader):
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


class RawBlobs(BlobReader):
    """Blobs as a worker sends them (a segment and its index, what :func:`write_pack`
    takes: :class:`eigengate.scan.encode.Blobs`), checked on arrival: every blob inside
    the segment, its size fitting its shape."""

    __slots__ = ("_segment", "_index", "_count")

    def __init__(self, items) -> None:
        segment, index = items
        if type(segment) is not bytes or type(index) not in (list, tuple) or \
                not all(type(v) is int for v in index):
            raise ValueError("blobs are not a segment and its index")
        index = list(index)
        _check_index(index, len(segment))
        self._segment, self._index = memoryview(segment), index
        self._count = len(index) // _INDEX_COLUMNS

    def _raw(self, i: Any) -> tuple[Any, int, int]:
        if type(i) is not int or not 0 <= i < self._count:
            raise ValueError(f"blob {i!r} is not one of the entry's {self._count}")
        k = _INDEX_COLUMNS * i
        off, size, rows, cols = self._index[k:k + _INDEX_COLUMNS]
        return self._segment[off:off + size], rows, cols

    def shapes(self) -> list[tuple[int, int] | None]:
        f = self._index
        return [None if f[k + 3] < 0 else (f[k + 2], f[k + 3])
                for k in range(0, len(f), _INDEX_COLUMNS)]


def _check_index(flat: list, n_body: int) -> None:
    """ValueError unless every blob of ``flat`` (offset, size, rows, columns each) lies
    within a body of ``n_body`` bytes with a size that fits its shape."""
    c = _INDEX_COLUMNS
    if len(flat) % c:
        raise ValueError("pack index is not whole")
    for off, size, rows, cols in zip(flat[0::c], flat[1::c], flat[2::c], flat[3::c]):
        if off < 0 or size < 0 or off > n_body - size or (
                rows != -1 if cols < 0 else rows < 0 or size != 8 * rows * cols):
            raise ValueError("pack index does not fit its body")


def _little(code: str, raw) -> array.array:
    """Little-endian 8-byte numbers of ``raw`` as an array of this machine's order."""
    out = array.array(code)
    out.frombytes(raw)
    if sys.byteorder != "little":  # pragma: no cover - big-endian machines
        out.byteswap()
    return out


_dumps = json.JSONEncoder(separators=(",", ":"), check_circular=False).encode
_PAD = [b"\0" * k for k in range(8)]


def write_pack(head: dict, entry_blobs: dict[str, Segment]) -> bytes:
    """The bytes of a pack: ``head`` (whose entries get their ``blobs`` as ``[first, count]``
    in the index) and, for each entry key, its blobs as one segment of bytes and its flat
    index (offset in the segment, size, rows, columns per blob;
    :class:`eigengate.scan.encode.Blobs`). Segments are 8-byte aligned in the body, so
    blobs aligned in theirs stay aligned."""
    return b"".join(pack_chunks(head, entry_blobs))


def pack_chunks(head: dict, entry_blobs: dict[str, Segment]) -> list[bytes]:
    """:func:`write_pack`'s bytes as the pieces they are joined from, in order (a file is
    written from them as they are: the body, megabytes for thousands of files, is never
    copied whole; its checksum is taken piece by piece)."""
    chunks: list[bytes] = []
    index: list[int] = []
    bases: list[int] = []  # per blob, where its segment starts in the body
    entries = head["entries"]
    size = 0
    n = 0
    for key, (segment, local) in entry_blobs.items():
        count = len(local) // _INDEX_COLUMNS
        entries[key]["blobs"] = [n, count]
        n += count
        index += local
        bases += [size] * count
        chunks.append(segment)
        size += len(segment)
        pad = -size % 8
        if pad:
            chunks.append(_PAD[pad])
            size += pad
    index[0::_INDEX_COLUMNS] = map(operator.add, index[0::_INDEX_COLUMNS], bases)
    head_bytes = _dumps(head).encode("utf-8")
    flat = array.array("q", index)
    if sys.byteorder != "little":  # pragma: no cover - big-endian machines
        flat.byteswap()
    index_bytes = flat.tobytes()
    crc = zlib.crc32(index_bytes, zlib.crc32(head_bytes))
    for chunk in chunks:
        crc = zlib.crc32(chunk, crc)
    return [_MAGIC, _HEADER.pack(len(head_bytes), n, size, crc), head_bytes, index_bytes,
            *chunks]


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
    _check_index(flat, n_body)
    head = json.loads(bytes(head_bytes))
    if not isinstance(head, dict):
        raise ValueError("pack head is not an object")
    return Pack(head, flat, body)
