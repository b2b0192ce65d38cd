"""Small JSON files that carry their own checksum (the report memo's, the remembered policy
table): a magic line, the checksum of the payload, the payload. One that is missing, too
large, damaged or of another kind reads as None and is written again, never trusted;
writing is atomic (a half-written file is never visible)."""

from __future__ import annotations

import json
import os

from .digests import hasher

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from typing import Any

__all__ = ["read_checked", "write_checked"]


def _checksum(payload: bytes) -> bytes:
    h = hasher(20)
    h.update(payload)
    return h.hexdigest().encode()


def read_checked(path: str | os.PathLike[str], magic: bytes, limit: int) -> Any:
    """The JSON value of the file at ``path`` when it starts with ``magic``, its checksum
    fits and it is at most ``limit`` bytes; None otherwise."""
    try:
        with open(path, "rb") as fh:
            if os.fstat(fh.fileno()).st_size > limit:
                return None
            raw = fh.read(limit + 1)
    except OSError:
        return None
    head, sep, payload = raw[len(magic):].partition(b"\n")
    if not raw.startswith(magic) or not sep or head != _checksum(payload):
        return None
    try:
        return json.loads(payload)
    except ValueError:
        return None


def write_checked(path: str | os.PathLike[str], magic: bytes, limit: int, value: Any) -> bool:
    """Write ``value`` so that :func:`read_checked` reads it back, atomically; False when it
    is larger than ``limit`` or cannot be written (what these files hold is optional)."""
    payload = json.dumps(value, separators=(",", ":")).encode()
    raw = magic + _checksum(payload) + b"\n" + payload
    if len(raw) > limit:
        return False
    import tempfile

    folder = os.path.dirname(os.fspath(path)) or "."
    try:
        os.makedirs(folder, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=".tmp-", dir=folder)
        try:
            with os.fdopen(fd, "wb") as fh:
                fh.write(raw)
            os.replace(tmp, path)
        except BaseException:
            try:
                os.unlink(tmp)
            except OSError:
                pass
            raise
    except OSError:
        return False
    return True
