"""The hash of the cache's own keys (the policy's digest, the report memo): the interpreter's
built-in BLAKE2, so that a check answered by the report memo loads no OpenSSL."""

from __future__ import annotations

__all__ = ["hasher"]


def hasher(size: int = 32):
    """A BLAKE2b hash object (``size`` bytes) for the cache's own keys: the interpreter's
    built-in one, so that a check answered by the report memo loads no OpenSSL."""
    try:
        from _blake2 import blake2b
    except ImportError:  # pragma: no cover - an interpreter built without it
        from hashlib import blake2b
    return blake2b(digest_size=size)
