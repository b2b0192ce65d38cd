"""A repository scan: discover model files, reuse cached results, analyse the rest in a process
pool, apply waivers, and report the policy's own expired or unused waivers.

The pool (:mod:`eigengate.scan.pool`) returns plain JSON-safe data and its blobs (float64
matrices and JSON texts as bytes), which are cheap to send back, rebuild lazily, and are what
the parent stores in the cache (written once, at the end of the scan).
"""

from __future__ import annotations

import contextlib
import functools
import gc
import os
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Sequence

from .cache_format import cache_name
from .config import Config
from .discovery import Walk, find_model_files
from .engine import (FileResult, analyse_file, analyse_files, file_result, policy_findings,
                     unselected_findings)
from ..rules.findings import Finding

__all__ = ["Scan", "scan", "default_jobs", "cache_name"]

#: Below this many files to analyse, a pool costs more than it saves.
POOL_THRESHOLD = 16
#: Files analysed here at a time, stage by stage (see :func:`~eigengate.scan.engine.analyse_files`).
BATCH = 32
#: Bytes of model files read for their cache keys that are kept to be analysed (not read
#: again); beyond it, a file is read again when analysed.
READ_BUDGET = 64 << 20


@dataclass(frozen=True, eq=False)
class Scan:
    """Results of a scan, in file order, plus the policy's own findings."""

    files: tuple[FileResult, ...]
    policy: tuple[Finding, ...]
    cache_hits: int
    analysed: int

    @property
    def findings(self) -> list[Finding]:
        return [f for fr in self.files for f in fr.findings] + list(self.policy)

    @property
    def failed(self) -> bool:
        return any(f.severity == "error" for f in self.findings)


def default_jobs() -> int:
    """The number of cores this process may use: the default number of analysing
    processes (this one and its workers)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


# ------------------------------------------------------------------ parent side

def scan(paths: Sequence[str | Path], config: Config, *, jobs: int | None = None,
         use_cache: bool = True, progress: Callable[[int, int], None] | None = None,
         on=None, filter_named: bool = False, complete: bool | None = None,
         cluster: str | None = None, memo=None) -> Scan:
    """Check every model file below ``paths`` under ``config``. ``complete`` says the run
    covers the whole repository (policy waivers are judged unused only within what was
    checked); None: when one of ``paths`` is the configuration root. ``cluster``: the
    address of a Dask scheduler whose workers analyse the files the cache cannot serve
    (:mod:`eigengate.scan.cluster`) instead of ``jobs`` local processes. ``memo``: a
    :class:`~eigengate.scan.report_memo.ReportMemo` shown what the scan saw."""
    from ..rules.waivers import today

    if complete is None:
        root = os.path.realpath(config.root)
        complete = any(os.path.realpath(p) == root for p in paths)
    with _gc_paused():
        return _scan(paths, config, jobs=jobs, use_cache=use_cache, progress=progress,
                     on=on or today(), filter_named=filter_named, complete=complete,
                     cluster=cluster, memo=memo)


@contextlib.contextmanager
def _gc_paused():
    """Pause the cyclic garbage collector while a scan builds many small objects that form
    no cycles: with a large cache pack decoded, its collections otherwise cost more than the
    work itself (measured: 2× on 2,000 files)."""
    was = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was:
            # The objects made meanwhile would all be scanned by the first collection after
            # enabling; freezing and unfreezing moves them to the oldest generation instead.
            gc.freeze()
            gc.enable()
            gc.unfreeze()


def _scan(paths, config: Config, *, jobs, use_cache, progress, on, filter_named,
          complete, cluster=None, memo=None) -> Scan:
    from .serial import results_to_data
    from .cache import RawBlobs, ResultCache
    from .summary import DAMAGE, results_from_summary, summary_of

    cache = ResultCache(config.root, config.digest) if use_cache else None
    unselected: list[str] = []
    known: dict[str, str] = {}  # files whose status the cache knows: their keys

    def knows(rel: str, st) -> bool:
        key = cache.known_key(cache_name(config, rel), st)  # type: ignore[union-attr]
        if key is not None:
            known[rel] = key
        return key is not None

    walk = Walk() if memo is not None and cache is not None else None
    files = find_model_files(
        list(paths), config, filter_named=filter_named, unselected=unselected, sniffs=cache,
        known=None if cache is None else knows, walk=walk)
    found = [f.path for f in files] if walk is not None else []  # for the memo
    slots: list[tuple | None] = [None] * len(files)
    todo: list[tuple[int, str, str | None]] = []
    names = [f.rel for f in files]  # what a file that no cluster worker analysed is called
    hits = 0
    keys: list[str | None] = [None] * len(files)
    # the bytes read for a file's key, analysed here from the same bytes (up to a budget)
    read: dict[int, bytes] = {}
    budget = READ_BUDGET
    for i, f in enumerate(files):
        files[i] = None  # type: ignore[call-overload]  # its bytes are not kept past here
        key = None
        if cache is not None:
            key = known.get(f.rel) if f.content is None else None
            if key is None:
                key, raw = cache.file_key_read(cache_name(config, f.rel), f.stat, f.path,
                                               f.content)
                if raw is not None and len(raw) <= budget:
                    read[i] = raw
                    budget -= len(raw)
            keys[i] = key
            if key is not None:
                hit = cache.get(key)
                if hit is not None:
                    try:
                        slots[i] = results_from_summary(*hit, _reload(f.path, key, config,
                                                                       cache))
                        hits += 1
                        read.pop(i, None)  # not analysed
                        continue
                    except DAMAGE:
                        pass  # a corrupt entry: analyse again and overwrite it
        todo.append((i, f.path, key))
    done = hits
    total = len(slots)
    if progress:
        progress(done, total)
    jobs = default_jobs() if jobs is None else max(1, jobs)
    def local(items: Sequence[tuple[int, str, str | None]]) -> None:
        # stage by stage over the items (analyse_files), the cache's records as a third
        done = analyse_files([(path, names[i], read.pop(i, None)) for i, path, _ in items],
                             config.root, config)
        for (i, _, key), (source, results, error, refs) in zip(items, done):
            if cache is not None and key is not None and error is None:
                data, blobs = results_to_data(source, results, error)
                cache.put(key, data, blobs.items, refs)
            slots[i] = (source, results, error)

    def remote(items, outcome) -> None:
        for (i, path, key), (data, blobs, refs, ok) in zip(items, outcome):
            if cache is not None and key is not None and ok:
                cache.put(key, data, blobs, refs)
            # read as a cache entry is: the summary now, the rest when a report reads it
            # (this process is one of the pool's: what it spends here it does not analyse)
            slots[i] = results_from_summary(summary_of(data), RawBlobs(blobs),
                                            functools.partial(dict, data),
                                            functools.partial(_analysed, path, config))

    def step(n: int) -> None:
        nonlocal done
        done += n
        if progress:
            progress(done, total)

    if cluster is not None and todo:
        from .cluster import cluster_run

        cluster_run(todo, names, config, cluster, remote, step, local)
    elif jobs > 1 and len(todo) >= POOL_THRESHOLD:
        from .pool import pool_run

        pool_run(todo, config, jobs, local, remote, step)
    else:
        for k in range(0, len(todo), BATCH):
            local(todo[k:k + BATCH])
            step(len(todo[k:k + BATCH]))
    if cache is not None:
        if memo is not None:
            memo.observe(names, keys, unselected, cache, walk, found)
        cache.save()
    out = tuple(file_result(s, r, e, config, on) for s, r, e in slots)  # type: ignore[misc]
    policy = (unselected_findings(config, sorted(unselected))
              + policy_findings(config, out, on, complete=complete))
    return Scan(files=out, policy=tuple(policy), cache_hits=hits, analysed=len(todo))


def _analysed(path: str, config: Config) -> tuple:
    """A file's pre-waiver results analysed here (for a worker's data that fails its checks
    when it is read)."""
    return analyse_file(path, config.root, config)[1]


def _reload(path: str, key: str, config: Config, cache) -> Callable[[], tuple]:
    """What a cached result whose data fails its checks when it is read does: analyse its
    file again and keep the fresh results in the cache in place of the damaged ones (the
    pack written once more when this process ends, whatever number were damaged)."""
    def again() -> tuple:
        from .serial import results_to_data

        source, results, error, refs = analyse_file(path, config.root, config)
        if error is None:
            data, blobs = results_to_data(source, results, error)
            cache.put(key, data, blobs.items, refs)
            cache.save_at_exit()
        return results

    return again


def terminal_progress(stream=None) -> Callable[[int, int], None] | None:
    """A progress printer for stderr when it is a terminal (None otherwise)."""
    stream = stream or sys.stderr
    if not getattr(stream, "isatty", lambda: False)():
        return None

    def show(done: int, total: int) -> None:
        if total < 50:
            return
        end = "\n" if done == total else ""
        stream.write(f"\r\x1b[Kchecked {done}/{total} model files{end}")
        stream.flush()

    return show
