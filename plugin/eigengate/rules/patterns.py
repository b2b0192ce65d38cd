"""Repository-relative path globs: ``*`` and ``?`` within one path segment, ``**`` across any
number of segments (zero included), ``[...]`` character classes. Paths use ``/``."""

from __future__ import annotations

import functools
import re

__all__ = ["glob_match", "glob_any", "compile_glob"]


@functools.lru_cache(maxsize=512)
def compile_glob(pattern: str) -> "re.Pattern[str]":
    out = []
    i = 0
    pattern = pattern.strip("/")
    while i < len(pattern):
        c = pattern[i]
        if pattern.startswith("**/", i):
            out.append("(?:[^/]+/)*")
            i += 3
        elif pattern.startswith("**", i):
            out.append(".*")
            i += 2
        elif c == "*":
            out.append("[^/]*")
            i += 1
        elif c == "?":
            out.append("[^/]")
            i += 1
        elif c == "[":
            j = pattern.find("]", i + 1)
            if j == -1:
                out.append(re.escape(c))
                i += 1
            else:
                body = pattern[i + 1:j]
                if body.startswith("!"):
                    body = "^" + body[1:]
                out.append(f"[{body}]")
                i = j + 1
        else:
            out.append(re.escape(c))
            i += 1
    return re.compile("".join(out) + r"\Z")


def glob_match(path: str, pattern: str) -> bool:
    """True when repository-relative ``path`` matches ``pattern``.

    A pattern without ``/`` matches the file name in any folder (``*.yaml``), like the
    patterns of a ``.gitignore``; a pattern ending in ``/`` or naming a folder matches
    everything below it.
    """
    return glob_any(path, (pattern,))


def glob_any(path: str, patterns: tuple[str, ...]) -> bool:
    """True when ``path`` matches one of ``patterns`` (each as in :func:`glob_match`), by
    one regular expression per set of patterns."""
    return bool(patterns) and _any(tuple(patterns))(path.strip("/")) is not None


@functools.lru_cache(maxsize=512)
def _any(patterns: tuple[str, ...]):
    forms = []
    for pattern in patterns:
        if "/" not in pattern.strip("/"):
            pattern = "**/" + pattern.strip("/")
        # the pattern itself, and as a folder: what is inside it
        forms += [compile_glob(pattern).pattern, compile_glob(pattern.rstrip("/") + "/**").pattern]
    return re.compile("|".join(f"(?:{f})" for f in forms)).match
