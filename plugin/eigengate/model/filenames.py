"""File names as they can be shown and stored (its own module: discovery needs it, and none of
the readers)."""

from __future__ import annotations

__all__ = ["printable_name"]


def printable_name(name: str) -> str:
    """A file name as it can be shown and stored: bytes that are not UTF-8 (kept by the file
    system's surrogateescape decoding) become ``\\xff`` escapes."""
    try:
        name.encode("utf-8")
        return name
    except UnicodeEncodeError:
        return name.encode("utf-8", "surrogateescape").decode("utf-8", "backslashreplace")
