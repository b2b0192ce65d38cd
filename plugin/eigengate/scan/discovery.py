"""Finding the model files of a repository.

Below a folder, a file is a model file when its suffix is one of ``MODEL_SUFFIXES``, no part
of its path is hidden, the configuration (include/exclude globs, relative to its root)
selects it, and, when no include globs are configured, its text has a ``model_format`` key
(so other YAML and JSON files of the repository are left alone). Links are resolved once per
folder, and a file read to tell whether it is a model file is kept for the cache key.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path
from ..model.filenames import printable_name

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from typing import Callable, Protocol, Sequence

    from .config import Config

    class Sniffs(Protocol):
        def sniffed(self, rel: str, st: os.stat_result) -> bool | None: ...

        def note_sniff(self, rel: str, st: os.stat_result | None, is_model: bool) -> None: ...

__all__ = ["FoundFile", "Walk", "find_model_files", "listed_names", "MODEL_SUFFIXES"]

MODEL_SUFFIXES = (".yaml", ".yml", ".toml", ".json")

#: Bytes of a file read to tell whether it is a model file; a model file read whole while
#: discovering it is kept (for the cache key) up to this many bytes.
_SNIFF_BYTES = 65536
_KEEP_BYTES = 1 << 18


class Walk:
    """What a discovery looked at: every folder it listed, with its path relative to the
    root (links resolved) and the names it listed there (hidden ones left out, as discovery
    leaves them), and every entry with a model suffix with its status taken before it was
    read, as ``(path, rel, names)`` and ``(folder's index, name, rel, status)``; ``whole``
    is false when it also met what names and statuses cannot vouch for (a named file, a
    link, an entry it could not look at). The report memo keeps it to tell that discovering
    again would find the same: the same names in every folder, and every candidate with its
    status (a file's status changes when it is written)."""

    __slots__ = ("folders", "files", "whole")

    def __init__(self) -> None:
        self.folders: list[tuple[str, str, list[str]]] = []
        self.files: list[tuple[int, str, str, os.stat_result | None]] = []
        self.whole = True


def walked_rel(folder_rel: str, name: str) -> str:
    """The path relative to the root of entry ``name`` of a folder whose path relative to
    the root is ``folder_rel``, as discovery names a file that is no link."""
    return printable_name(name if folder_rel == "." else f"{folder_rel}/{name}")


def listed_names(names) -> list[str]:
    """The names of a folder's listing that discovery looks at (hidden ones left out), in
    order."""
    return sorted(n for n in names if not n.startswith("."))


class FoundFile:
    """A discovered model file: its path (as found), its path relative to the configuration's
    root after resolving links (what include and exclude globs match, and a stable identity
    for the cache), its bytes when discovery read them whole, and its status (``os.stat``,
    taken before any read) when the caller asked for it."""

    __slots__ = ("path", "rel", "content", "stat")

    def __init__(self, path: str, rel: str, content: bytes | None = None,
                 stat: os.stat_result | None = None) -> None:
        self.path, self.rel, self.content, self.stat = path, rel, content, stat

    def __repr__(self) -> str:
        return f"FoundFile(path={self.path!r}, rel={self.rel!r})"


def _sniff(path: str) -> tuple[bool | None, bytes | None]:
    """Whether a file looks like a model file (has a ``model_format`` key near its start),
    and its bytes when it does and is small enough to keep. A FIFO or device file is not
    opened (it could block for ever): it is passed on with no bytes for the loader to refuse."""
    if _not_regular(path):
        return True, b""
    try:
        with open(path, "rb") as fh:
            head = fh.read(_SNIFF_BYTES)
            if b"model_format" not in head:
                return False, None
            if len(head) < _SNIFF_BYTES:
                return True, head
            rest = fh.read(_KEEP_BYTES)
            return True, (head + rest if len(rest) < _KEEP_BYTES else None)
    except OSError:
        return None, None  # cannot tell: as a selected file, the loader reports why


def find_model_files(paths: Sequence[str | Path], config: "Config | None" = None, *,
                     filter_named: bool = False,
                     known: Callable[[str, os.stat_result], bool] | None = None,
                     unselected: list[str] | None = None, sniffs: "Sniffs | None" = None,
                     walk: Walk | None = None) -> list[FoundFile]:
    """The model files below ``paths`` (folders are expanded, sorted; named files pass
    through, or are tested too with ``filter_named``: a pre-commit hook is handed every
    changed file).

    With ``known``, every candidate's status is taken (before any read), and a file for which
    ``known(rel, stat)`` is true is taken as a model file without reading it (the result
    cache knows it, unchanged since it last read it).

    With ``unselected`` (a list), the model files that the include globs miss (neither
    included nor excluded, told by content) are appended to it as relative paths; ``sniffs``
    (the result cache) remembers, by file status, what a file's content said, so an
    unchanged file is not read again to tell. ``walk`` (a :class:`Walk`) is told what was
    looked at.
    """
    look = _Look(known, unselected, sniffs)
    root = os.path.realpath(config.root) if config is not None else os.path.realpath(".")
    out: list[FoundFile] = []
    for p in paths:
        p = Path(p)
        if not p.is_dir():
            full = os.fspath(p)
            if walk is not None:
                walk.whole = False
            rel, content = _named(full, root)
            if filter_named:
                found = _select(full, os.path.basename(full), rel, config, look, None,
                                content)
                if found is not None:
                    out.append(found)
            else:
                out.append(FoundFile(full, rel, content,
                                     stat=_stat(full) if known is not None else None))
            continue
        below: list[FoundFile] = []
        stack = [os.fspath(p)]
        while stack:  # like os.walk: hidden entries skipped, linked folders not followed
            folder = stack.pop()
            real_folder = _rel(os.path.realpath(folder), root)
            try:
                entries = list(os.scandir(folder))
            except OSError:
                if walk is not None:
                    walk.whole = False
                continue
            if walk is not None:
                walk.folders.append((folder, real_folder, listed_names(e.name for e in entries)))
            for e in entries:
                if e.name.startswith("."):
                    continue
                try:
                    if e.is_dir(follow_symlinks=False):
                        stack.append(e.path)
                        continue
                    content = None
                    if e.is_symlink():
                        if walk is not None:
                            walk.whole = False
                        if os.path.isdir(e.path):
                            continue
                        rel, content = _named(e.path, root)
                    else:
                        rel = walked_rel(real_folder, e.name)
                except OSError:
                    if walk is not None:
                        walk.whole = False
                    continue
                if walk is not None and os.path.splitext(e.name)[1] in MODEL_SUFFIXES:
                    walk.files.append((len(walk.folders) - 1, e.name, rel,
                                       _stat(e.path, e)))  # before any read
                found = _select(e.path, e.name, rel, config, look, e, content)
                if found is not None:
                    below.append(found)
        below.sort(key=lambda f: f.path)
        out.extend(below)
    return out


def _rel(real: str, root: str) -> str:
    return printable_name(os.path.relpath(real, root).replace(os.sep, "/"))


def _not_regular(path: str) -> bool:
    try:
        return not stat.S_ISREG(os.stat(path).st_mode)
    except OSError:
        return False  # missing, a link loop, unreadable: the loader says which


def _named(full: str, root: str) -> tuple[str, bytes | None]:
    """The identity of a file named or found as a link: its resolved path relative to the
    root, or, for a link out of the repository, the link's own path, with no bytes (nothing
    outside is read; the loader refuses it). A FIFO or device file gets no bytes either."""
    real = os.path.realpath(full)
    rel = _rel(real, root)
    if rel == ".." or rel.startswith("../") or os.path.isabs(rel):
        here = os.path.join(os.path.realpath(os.path.dirname(os.path.abspath(full))),
                            os.path.basename(full))
        return _rel(here, root), b""
    return rel, (b"" if _not_regular(full) else None)


def _stat(path: str, entry: os.DirEntry | None = None) -> os.stat_result | None:
    try:
        return entry.stat() if entry is not None else os.stat(path)
    except OSError:
        return None


class _Look:
    """What a discovery was asked to do besides finding (see :func:`find_model_files`)."""

    __slots__ = ("known", "unselected", "sniffs")

    def __init__(self, known: "Callable[[str, os.stat_result], bool] | None",
                 unselected: list[str] | None, sniffs: "Sniffs | None") -> None:
        self.known, self.unselected, self.sniffs = known, unselected, sniffs


def _has_key(full: str, rel: str, st: os.stat_result | None, sniffs) -> bool:
    """Whether the file has a ``model_format`` key, from the status record when unchanged."""
    if _not_regular(full):  # a FIFO or device file is never opened
        return False
    said = sniffs.sniffed(rel, st) if sniffs is not None and st is not None else None
    if said is None:
        said = _sniff(full)[0]
        if said is None:  # unreadable: nothing to say about it
            return False
        if sniffs is not None:
            sniffs.note_sniff(rel, st, said)
    return said


def _select(full: str, name: str, rel: str, config: "Config | None", look: _Look, entry,
            content: bytes | None = None) -> FoundFile | None:
    if name == "pyproject.toml" or os.path.splitext(name)[1] not in MODEL_SUFFIXES:
        return None
    known = look.known
    if config is not None:
        config = config.policy_for(rel)  # the nearest policy selects the files of its folder
    if config is not None and not config.is_model_path(rel):
        # content given: a link out of the repository or not a regular file, never read
        if look.unselected is not None and content is None and config.include \
                and not config.is_excluded(rel):
            if _has_key(full, rel, _stat(full, entry) if look.sniffs else None, look.sniffs):
                look.unselected.append(rel)
        return None
    if content is not None:  # a link out of the repository, or not a regular file: not read
        return FoundFile(full, rel, content)
    st = _stat(full, entry) if known is not None else None  # before any read of the file
    if st is not None and known is not None and known(rel, st):
        return FoundFile(full, rel, stat=st)
    if config is not None and config.include:  # selected by name: no need to look inside
        return FoundFile(full, rel, stat=st)
    if look.sniffs is not None and st is not None and look.sniffs.sniffed(rel, st) is False:
        return None  # unchanged since its content said it is no model file
    is_model, content = _sniff(full)
    if is_model is False and look.sniffs is not None:
        look.sniffs.note_sniff(rel, st, False)
    return None if is_model is False else FoundFile(full, rel, content, st)
