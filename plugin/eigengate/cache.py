"""Content-addressed cache of check results, so re-checking an unchanged repository is fast.

An entry's key hashes the tool version, the cache format, the effective configuration, the
model file's repository path and bytes. The entry records the hash of every matrix file the
model referenced; a changed reference is a miss. Entries are JSON (never pickles), written
atomically; an entry that cannot be read, parsed or checked is ignored and rebuilt, never
trusted. The folder explains itself (README, .gitignore, CACHEDIR.TAG).
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
from pathlib import Path
from typing import Any

__all__ = ["ResultCache", "CACHE_DIR"]

CACHE_DIR = ".eigengate-cache"
_README = """\
This folder is eigengate's result cache. It is safe to delete at any time; eigengate
rebuilds it. Each entry is keyed by the hash of a model file's bytes, the files it references,
the effective configuration and the eigengate version. Use --no-cache to bypass it.
"""
_TAG = ("Signature: 8a477f597d28d172789f06886806bc55\n"
        "# This file is a cache directory tag created by eigengate.\n"
        "# For information about cache directory tags see https://bford.info/cachedir/\n")


def _sha(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


class ResultCache:
    """Read and write cache entries below ``root / CACHE_DIR``."""

    def __init__(self, root: Path, config_digest: str, *, folder: Path | None = None) -> None:
        from . import __version__
        from ._serial import FORMAT

        self.root = Path(root)
        self.folder = Path(folder) if folder is not None else self.root / CACHE_DIR
        self._salt = f"eigengate {__version__}\0cache {FORMAT}\0config {config_digest}\0"

    def key(self, source: str, content: bytes) -> str:
        return _sha(self._salt.encode() + source.encode() + b"\0" + content)

    def _entry(self, key: str) -> Path:
        return self.folder / "v1" / key[:2] / f"{key}.json"

    def _ref_hashes(self, refs: list[str]) -> dict[str, str] | None:
        out = {}
        for rel in refs:
            try:
                out[rel] = _sha((self.root / rel).read_bytes())
            except OSError:
                return None
        return out

    def get(self, key: str) -> dict[str, Any] | None:
        """The stored data for ``key``, or None (missing, corrupt, or a reference changed)."""
        try:
            entry = json.loads(self._entry(key).read_text(encoding="utf-8"))
            if entry.get("key") != key or not isinstance(entry.get("data"), dict):
                return None
            refs = entry.get("refs", {})
            if not isinstance(refs, dict):
                return None
            if refs and self._ref_hashes(sorted(refs)) != refs:
                return None
            return entry["data"]
        except (OSError, ValueError, TypeError, AttributeError):
            return None

    def put(self, key: str, data: dict[str, Any], refs: list[str]) -> None:
        """Store ``data`` atomically; failures to write are ignored (the cache is optional)."""
        hashes = self._ref_hashes(refs)
        if hashes is None:
            return
        text = json.dumps({"key": key, "refs": hashes, "data": data}, sort_keys=True)
        try:
            self._ensure_folder()
            target = self._entry(key)
            target.parent.mkdir(parents=True, exist_ok=True)
            fd, tmp = tempfile.mkstemp(prefix=".tmp-", dir=target.parent)
            with os.fdopen(fd, "w", encoding="utf-8") as fh:
                fh.write(text)
            os.replace(tmp, target)
        except OSError:
            return

    def _ensure_folder(self) -> None:
        if (self.folder / "CACHEDIR.TAG").is_file():
            return
        if self.folder.is_dir():  # made by hand, or its tag was deleted: restore the files
            self._explain(self.folder)
            return
        self.folder.parent.mkdir(parents=True, exist_ok=True)
        # Build the explanatory files in a temporary folder, then move it into place, so a
        # half-made cache folder is never seen; a concurrent creator simply wins.
        tmp = Path(tempfile.mkdtemp(prefix=".eigengate-cache-", dir=self.folder.parent))
        try:
            self._explain(tmp)
            try:
                os.rename(tmp, self.folder)
            except OSError:
                pass
        finally:
            if tmp.exists():
                for f in tmp.iterdir():
                    f.unlink()
                tmp.rmdir()

    @staticmethod
    def _explain(folder: Path) -> None:
        (folder / "README").write_text(_README, encoding="utf-8")
        (folder / ".gitignore").write_text("# created by eigengate\n*\n", encoding="utf-8")
        (folder / "CACHEDIR.TAG").write_text(_TAG, encoding="utf-8")
