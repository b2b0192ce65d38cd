"""A repository scan: discover model files, reuse cached results, analyse the rest in a process
pool, apply waivers, and report the policy's own expired or unused waivers.

The pool is the standard library's (``concurrent.futures``) on the ``forkserver`` start
method where available (no fork of a process whose BLAS threads are running); workers analyse
and return plain JSON-safe data and its blobs (float64 arrays, JSON texts), which are cheap to
send back, rebuild lazily, and are what the parent stores in the cache (written once, at the
end of the scan).
"""

from __future__ import annotations

import contextlib
import gc
import os
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Sequence

from .config import Config
from .discovery import find_model_files
from .engine import (FileResult, analyse_file, file_result, policy_findings,
                     unselected_findings)
from ..rules.findings import Finding

__all__ = ["Scan", "scan", "default_jobs"]

#: Below this many files to analyse, a pool costs more than it saves.
POOL_THRESHOLD = 16


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


# ------------------------------------------------------------------ worker side

_WORKER: dict = {}


def _init_worker(config: Config) -> None:
    _WORKER["config"] = config
    # As in the parent's scan (see _gc_paused), the cyclic collector stays off while the
    # worker analyses; what it imported is moved out of the collector's sight for good.
    gc.freeze()
    gc.disable()


def _work(path: str) -> tuple[dict, list, list[str], bool]:
    from .serial import encoded  # numpy comes with it: worker side only

    return encoded(path, _WORKER["config"])


# ------------------------------------------------------------------ parent side

def scan(paths: Sequence[str | Path], config: Config, *, jobs: int | None = None,
         use_cache: bool = True, progress: Callable[[int, int], None] | None = None,
         on=None, filter_named: bool = False, complete: bool | None = None,
         cluster: str | None = None) -> Scan:
    """Check every model file below ``paths`` under ``config``. ``complete`` says the run
    covers the whole repository (policy waivers are judged unused only within what was
    checked); None: when one of ``paths`` is the configuration root. ``cluster``: the
    address of a Dask scheduler whose workers analyse the files the cache cannot serve
    (:mod:`eigengate.scan.cluster`) instead of ``jobs`` local processes."""
    from ..rules.waivers import today

    if complete is None:
        root = os.path.realpath(config.root)
        complete = any(os.path.realpath(p) == root for p in paths)
    with _gc_paused():
        return _scan(paths, config, jobs=jobs, use_cache=use_cache, progress=progress,
                     on=on or today(), filter_named=filter_named, complete=complete,
                     cluster=cluster)


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
          complete, cluster=None) -> Scan:
    from .serial import Blobs, results_from_data, results_to_data
    from .cache import ResultCache

    cache = ResultCache(config.root, config.digest) if use_cache else None
    unselected: list[str] = []
    files = find_model_files(
        list(paths), config, filter_named=filter_named, unselected=unselected, sniffs=cache,
        known=None if cache is None else
        lambda rel, st: cache.known_key(_cache_name(config, rel), st) is not None)
    slots: list[tuple | None] = [None] * len(files)
    todo: list[tuple[int, str, str | None]] = []
    names = [f.rel for f in files]  # what a file that no cluster worker analysed is called
    hits = 0
    for i, f in enumerate(files):
        files[i] = None  # type: ignore[call-overload]  # its bytes are not kept past here
        key = None
        if cache is not None:
            name = _cache_name(config, f.rel)
            key = None if f.stat is None else cache.known_key(name, f.stat)
            if key is None:
                content = f.content
                if content is None:
                    try:
                        with open(f.path, "rb") as fh:
                            content = fh.read()
                    except OSError:
                        content = None
                if content is not None:
                    key = cache.key(name, content)
                    cache.note_key(name, f.stat, key)
            if key is not None:
                hit = cache.get(key)
                if hit is not None:
                    try:
                        slots[i] = results_from_data(*hit)
                        hits += 1
                        continue
                    except (KeyError, TypeError, ValueError, IndexError):
                        pass  # a corrupt entry: analyse again and overwrite it
        todo.append((i, f.path, key))
    done = hits
    total = len(slots)
    if progress:
        progress(done, total)
    jobs = default_jobs() if jobs is None else max(1, jobs)
    def local(item: tuple[int, str, str | None]) -> None:
        i, path, key = item
        source, results, error, refs = analyse_file(path, config.root, config)
        if cache is not None and key is not None and error is None:
            data, blobs = results_to_data(source, results, error)
            cache.put(key, data, blobs.items, refs)
        slots[i] = (source, results, error)

    def remote(items, outcome) -> None:
        for (i, _, key), (data, blobs, refs, ok) in zip(items, outcome):
            if cache is not None and key is not None and ok:
                cache.put(key, data, blobs, refs)
            slots[i] = results_from_data(data, Blobs(blobs))

    def step(n: int) -> None:
        nonlocal done
        done += n
        if progress:
            progress(done, total)

    if cluster is not None and todo:
        from .cluster import cluster_run

        cluster_run(todo, names, config, cluster, remote, step, local)
    elif jobs > 1 and len(todo) >= POOL_THRESHOLD:
        _pool_run(todo, config, jobs, local, remote, step)
    else:
        for item in todo:
            local(item)
            step(1)
    if cache is not None:
        cache.save()
    out = tuple(file_result(s, r, e, config, on) for s, r, e in slots)  # type: ignore[misc]
    policy = (unselected_findings(config, sorted(unselected))
              + policy_findings(config, out, on, complete=complete))
    return Scan(files=out, policy=tuple(policy), cache_hits=hits, analysed=len(todo))


def _cache_name(config: Config, rel: str) -> str:
    """A model file's name in the cache: its path, qualified by the digest of the nested
    policy that judges it (so adding, changing or removing one is never served stale)."""
    policy = config.policy_for(rel)
    return rel if policy is config else f"{rel}\0{policy.digest}"


def _chunk_work(paths: list[str]) -> list[tuple[dict, list, list[str], bool]]:
    return [_work(p) for p in paths]


def _pool_run(todo, config: Config, jobs: int, local, remote, step) -> None:
    """Analyse ``todo`` in ``jobs`` processes: ``jobs - 1`` workers and this one.

    Workers take chunks from the front of the list, this process from the back, between
    collecting what the workers send; so it analyses while the workers start (their
    imports), and there are never more busy processes than jobs. Chunks get smaller as the
    two ends meet, so everyone finishes at about the same time.
    """
    import multiprocessing as mp
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

    methods = mp.get_all_start_methods()
    ctx = mp.get_context("forkserver" if "forkserver" in methods else "spawn")
    if ctx.get_start_method() == "forkserver":
        # Import the heavy modules once in the server; every worker forks from it ready.
        ctx.set_forkserver_preload(["eigengate.scan.engine", "eigengate.analysis.modes", "eigengate.load.loader",
                                    "numpy", "scipy.linalg", "yaml"])
    workers = jobs - 1
    front, back = 0, len(todo)

    def take() -> int:  # a quarter of each process's share of what is left, 4 to 32 files
        return min(back - front, max(4, min(32, (back - front) // (4 * jobs))))

    with ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=_init_worker,
                             initargs=(config,)) as pool:
        running: dict = {}
        while front < back or running:
            while front < back and len(running) < 3 * workers:
                n = take()
                items = todo[front:front + n]
                front += n
                running[pool.submit(_chunk_work, [p for _, p, _ in items])] = items
            finished = [f for f in running if f.done()]
            for future in finished:
                items = running.pop(future)
                remote(items, future.result())
                step(len(items))
            if front < back:  # a few files at a time, to be back soon to keep the workers fed
                n = min(4, back - front)
                back -= n
                for item in todo[back:back + n]:
                    local(item)
                step(n)
            elif running and not finished:
                wait(list(running), return_when=FIRST_COMPLETED)


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
