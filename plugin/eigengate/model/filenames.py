"""File names as they can be shown and stored (its own module: discovery needs it, and none of
the readers)."""

from __future__ import annotations

import os

__all__ = ["printable_name", "plain_name", "name_parts"]


def printable_name(name: str) -> str:
    """A file name as it can be shown and stored: bytes that are not UTF-8 (kept by the file
    system's surrogateescape decoding) become ``\\xff`` escapes."""
    try:
        name.encode("utf-8")
        return name
    except UnicodeEncodeError:
        return name.encode("utf-8", "surrogateescape").decode("utf-8", "backslashreplace")


def plain_name(name: str) -> bool:
    """Whether ``name`` is an absolute POSIX path that ``pathlib.Path`` keeps as it is and
    whose real path is its folder's real path and its last part: no empty, ``.`` or ``..``
    part and no final separator (``"/."`` also refuses a part starting with a dot, which is
    only cautious). Such a name is used as it is, without making a Path of it."""
    return os.sep == "/" and name.startswith("/") and "//" not in name \
        and "/." not in name and not name.endswith("/")


def name_parts(name: str) -> tuple[str, str]:
    """``(Path(name).stem, Path(name).suffix)`` of a name whose last part is what follows
    its last separator (a :func:`plain_name`, or the string of a Path)."""
    last = name.rpartition(os.sep)[2]
    dot = last.rfind(".")
    if 0 < dot < len(last) - 1:
        return last[:dot], last[dot:]
    return last, ""
