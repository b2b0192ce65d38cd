"""The result cache as the pytest collector uses it: the command line's cache, shared.

A collected model file whose status (or bytes) matches a cache entry of the policy becomes its
items straight from the cached, pre-waiver results (:mod:`eigengate.scan.serial`): nothing is
loaded or analysed, and numpy is not imported for it. A file that misses is loaded and each of
its items analysed when it runs, as without a cache; once every model of the file has been
analysed without an error, the file's results go into the cache, written once at the end of
the session. Entries are the ones ``eigengate check`` reads and writes (same keys: policy
digest, version, path and bytes), so either fills the cache for the other.

A file whose models came from a vector field is written only when its policy allows Python
(``allow_python``): pytest loads those always, the command line only when allowed, and the
command line must never be served a result it would have refused to compute.
"""

from __future__ import annotations

import functools
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any, Sequence

if TYPE_CHECKING:  # pragma: no cover
    from ..scan.cache import ResultCache
    from ..scan.config import Config
    from ..scan.engine import ModelResult

__all__ = ["CollectCache", "real_relative"]


@functools.lru_cache(maxsize=1 << 16)
def _real(path: str) -> str:
    """``os.path.realpath(path)``, with the folder's resolution kept (one per folder and
    process): only the file itself is looked at again, which is a link or not. The
    collector asks this twice of every file (selection of all, then the cache of each), so
    the answers are kept for as many files as a large repository holds."""
    from ..load.loader import real_folder

    if not os.path.isabs(path):
        path = os.path.join(os.getcwd(), path)
    folder, name = os.path.split(path)
    if name in ("", ".", "..") or f"{os.sep}.." in folder:  # a ".." after a link: resolved
        return os.path.realpath(path)                       # in order, as realpath does
    full = os.path.join(real_folder(folder), name)
    return os.path.realpath(full) if os.path.islink(full) else full


def real_relative(path: "Path | str", root: "Path | str") -> str | None:
    """``path`` relative to ``root`` with links resolved (``/``-separated), None when it lies
    outside; the root's resolution is kept (one per process)."""
    from ..load.loader import real_folder

    base = real_folder(os.fspath(root))
    real = _real(os.fspath(path))
    if real == base:
        return "."
    if not real.startswith(base.rstrip(os.sep) + os.sep):
        return None
    return real[len(base.rstrip(os.sep)) + 1:].replace(os.sep, "/")


class CollectCache:
    """One per pytest process: lookups at collection, new entries at run time, one save."""

    def __init__(self, policy: "Config") -> None:
        self.policy = policy
        self._cache: "ResultCache | None" = None

    def _open(self) -> "ResultCache":
        if self._cache is None:
            from ..scan.cache import ResultCache

            self._cache = ResultCache(self.policy.root, self.policy.digest)
        return self._cache

    def _name(self, path: Path) -> str | None:
        from ..scan.runner import cache_name

        rel = real_relative(path, self.policy.root)
        if rel is None or rel == ".":
            return None  # outside the repository: not cached
        return cache_name(self.policy, rel)

    def lookup(self, path: Path) -> tuple[str | None, "tuple[ModelResult, ...] | None"]:
        """``(key, results)``: the file's cache key and, on a hit, its cached pre-waiver
        results (None on a miss, or when the entry is damaged: then analysed again)."""
        from ..scan.summary import DAMAGE, results_from_summary

        name = self._name(path)
        if name is None:
            return None, None
        try:
            st = os.stat(path)
        except OSError:
            return None, None
        cache = self._open()
        key = cache.file_key(name, st, str(path))
        hit = None if key is None else cache.get(key)
        if hit is not None:
            try:
                _, results, error = results_from_summary(*hit, functools.partial(
                    _analyse_again, path, self.policy))
                if error is None and results:
                    return key, results
            except DAMAGE:
                pass
        return key, None

    def put(self, key: str, path: Path, results: Sequence["ModelResult"],
            refs: list[str]) -> None:
        """Keep a file's analysed pre-waiver results (every model of it) for the save."""
        from ..scan.serial import results_to_data

        rel = self._name(path)
        if rel is None or not results:
            return
        if any(r.model.nonlinear is not None for r in results) and \
                not self.policy.policy_for(rel.split("\0")[0]).allow_python:
            return
        data, blobs = results_to_data(results[0].model.source, results, None)
        self._open().put(key, data, blobs.items, refs)

    def save(self) -> None:
        if self._cache is not None:
            self._cache.save()


def _analyse_again(path: Path, policy: "Config") -> tuple:
    """A cached file's pre-waiver results computed again, as the collector computes them
    (for a cache entry whose data fails its checks when an item reads it)."""
    from ..load.loader import load_models_with_refs
    from ..scan.engine import analyse_model

    models, _ = load_models_with_refs(path, root=policy.root, allow_python=True)
    return tuple(analyse_model(m, policy) for m in models)
