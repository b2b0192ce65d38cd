"""Content-addressed cache of check results, so re-checking an unchanged repository is fast.

An entry's key hashes the tool version, the cache format, the effective configuration, the
model file's repository path and bytes. The entry records the hash of every matrix file the
model referenced; a changed reference is a miss. Entries are JSON (never pickles), kept in one
pack file per configuration that is read once and written once per run, atomically; a pack or
entry that cannot be read, parsed or checked is ignored and rebuilt, never trusted. The folder
explains itself (README, .gitignore, CACHEDIR.TAG).
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
    """The cache of one configuration: one JSON pack of entries below ``root / CACHE_DIR``.

    ``get`` serves entries from the pack read at the first lookup; ``put`` collects new ones;
    ``save`` writes the pack once, atomically, keeping the entries used or made in this run
    and, up to a limit, older ones (so scans of parts of a repository do not evict each
    other). One pack per configuration digest, so two configurations never mix.
    """

    MAX_ENTRIES = 100_000

    def __init__(self, root: Path, config_digest: str, *, folder: Path | None = None) -> None:
        from . import __version__
        from ._serial import FORMAT

        self.root = Path(root)
        self.folder = Path(folder) if folder is not None else self.root / CACHE_DIR
        self._salt = f"eigengate {__version__}\0cache {FORMAT}\0config {config_digest}\0"
        self._pack = self.folder / f"v{FORMAT}" / f"{_sha(self._salt.encode())[:24]}.json"
        self._old: dict[str, Any] | None = None
        self._new: dict[str, Any] = {}
        self._used: set[str] = set()

    def key(self, source: str, content: bytes) -> str:
        return _sha(self._salt.encode() + source.encode() + b"\0" + content)

    def _ref_hashes(self, refs) -> dict[str, str] | None:
        out = {}
        for rel in refs:
            try:
                out[rel] = _sha((self.root / rel).read_bytes())
            except OSError:
                return None
        return out

    def _entries(self) -> dict[str, Any]:
        if self._old is None:
            try:
                pack = json.loads(self._pack.read_text(encoding="utf-8"))
                entries = pack.get("entries") if pack.get("salt") == self._salt else None
                self._old = entries if isinstance(entries, dict) else {}
            except (OSError, ValueError, AttributeError):
                self._old = {}  # missing or corrupt: start again, never trust it
        return self._old

    def get(self, key: str) -> dict[str, Any] | None:
        """The stored data for ``key``, or None (missing, corrupt, or a reference changed)."""
        entry = self._entries().get(key)
        try:
            refs = entry["refs"]
            if not isinstance(refs, dict) or not isinstance(entry["data"], dict):
                return None
            if refs and self._ref_hashes(sorted(refs)) != refs:
                return None
        except (KeyError, TypeError):
            return None
        self._used.add(key)
        return entry["data"]

    def put(self, key: str, data: dict[str, Any], refs: list[str]) -> None:
        """Remember ``data`` for ``key``; written by :meth:`save`."""
        hashes = self._ref_hashes(refs)
        if hashes is not None:
            self._new[key] = {"refs": hashes, "data": data}

    def save(self) -> None:
        """Write the pack atomically if anything new was made; failures are ignored (the
        cache is optional, and a half-written pack is never visible)."""
        if not self._new:
            return
        old = self._entries()
        keep = {k: old[k] for k in self._used if k in old}
        for k, v in old.items():
            if len(keep) + len(self._new) >= self.MAX_ENTRIES:
                break
            keep.setdefault(k, v)
        keep.update(self._new)
        text = json.dumps({"salt": self._salt, "entries": keep}, separators=(",", ":"))
        try:
            self._ensure_folder()
            self._pack.parent.mkdir(parents=True, exist_ok=True)
            fd, tmp = tempfile.mkstemp(prefix=".tmp-", dir=self._pack.parent)
            with os.fdopen(fd, "w", encoding="utf-8") as fh:
                fh.write(text)
            os.replace(tmp, self._pack)
        except OSError:
            return
        self._old, self._new = keep, {}

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
