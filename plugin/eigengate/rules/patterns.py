"""Repository-relative path globs: ``*`` and ``?`` within one path segment, ``**`` across any
number of segments (zero included), ``[...]`` character classes. Paths use ``/``."""

from __future__ import annotations

import functools
import re

__all__ = ["glob_match", "compile_glob"]


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
    path = path.strip("/")
    if "/" not in pattern.strip("/"):
        pattern = "**/" + pattern.strip("/")
    rx = compile_glob(pattern)
    if rx.match(path):
        return True
    # a folder pattern covers what is inside it
    return compile_glob(pattern.rstrip("/") + "/**").match(path) is not None
