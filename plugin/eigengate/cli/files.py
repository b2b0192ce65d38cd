"""Report files the command line writes: atomically, and folders only inside the repository."""

from __future__ import annotations

import contextlib
import os
from pathlib import Path

from .status import OutputError

def _write_pole_maps(folder: Path, files: list, baseline_poles, root: Path | None = None
                     ) -> int:
    """PNG and SVG pole maps of every model with findings, named after file and model."""
    from ..reports.pictures import pole_map_files

    return _write_files(folder, pole_map_files(files, baseline_poles), root, "pole maps")


def _write_files(folder: Path, items, root: Path | None, what: str) -> int:
    """Write ``(file name, bytes)`` items into ``folder`` (made inside the repository only);
    the names are plain (no folders), and a link in their place is not followed."""
    where = f"{what} to {os.fspath(folder)!r}"
    try:
        _make_folder(folder, root, where)
        count = 0
        for name, data in items:
            path = folder / name
            if path.is_symlink():
                raise OutputError(f"cannot write {where}: {name} is a link")
            path.write_bytes(data)
            count += 1
    except OSError as exc:
        raise OutputError(f"cannot write {where}: {exc.strerror or exc}") from None
    return count


def _make_folder(folder: Path, root: Path | None, what: str) -> None:
    """Create ``folder`` for an output, refusing to create folders outside the repository."""
    if folder.is_dir():
        return
    if root is not None:
        # The folders that would be made, each resolved as far as it exists.
        new = Path(os.path.realpath(folder.absolute()))
        if not new.is_relative_to(os.path.realpath(root)):
            raise OutputError(f"cannot write {what}: folder {os.fspath(folder)!r} does not "
                              "exist, and eigengate creates folders only inside the "
                              "repository")
    folder.mkdir(parents=True, exist_ok=True)


def _write_atomic(path: Path, text: str, root: Path | None = None, what: str = "") -> None:
    import tempfile

    what = what or f"to {os.fspath(path)!r}"
    try:
        _make_folder(path.parent, root, what)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
        try:
            with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
                fh.write(text)
            umask = os.umask(0)
            os.umask(umask)
            os.chmod(tmp, 0o666 & ~umask)  # a report is an ordinary file, not mkstemp's
            os.replace(tmp, path)
        except BaseException:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
            raise
    except OSError as exc:
        raise OutputError(f"cannot write {what}: {exc.strerror or exc}") from None
