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
    from typing import Any, Callable

__all__ = ["read_checked", "write_checked", "make_new", "replace_atomically"]


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
    folder = os.path.dirname(os.fspath(path)) or "."
    try:
        os.makedirs(folder, exist_ok=True)
        replace_atomically(path, (raw,))
    except OSError:
        return False
    return True


#: Flags of a new temporary file: created here and now (never an existing file or a link).
_NEW = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0) | \
    getattr(os, "O_BINARY", 0)


def make_new(folder: str, prefix: str, make: Callable[[str], Any]) -> tuple[Any, str]:
    """``(make(name), name)`` for a new name in ``folder``: ``prefix``, this process's id and
    random bytes (another name when one is taken already, say by a killed run's leftover);
    ``make`` creates it exclusively (``os.open`` with O_EXCL, ``os.mkdir``)."""
    for _ in range(16):
        name = os.path.join(folder, f"{prefix}{os.getpid()}-{os.urandom(6).hex()}")
        try:
            return make(name), name
        except FileExistsError:
            continue
    raise FileExistsError(f"no free temporary name in {folder}")  # pragma: no cover


def replace_atomically(path: str | os.PathLike[str], pieces) -> None:
    """Write the bytes ``pieces`` to a new file beside ``path`` (owner-only, a name no other
    process picks: this process's id and random bytes) and move it onto ``path`` in one
    step; the new file is removed when anything fails (OSError is raised on). As
    ``tempfile.mkstemp`` makes its files, without importing tempfile (and its imports) on
    the way of a check."""
    fd, tmp = make_new(os.path.dirname(os.fspath(path)) or ".", ".tmp-",
                       lambda name: os.open(name, _NEW, 0o600))
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.writelines(pieces)
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
