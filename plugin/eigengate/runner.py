"""A repository scan: discover model files, reuse cached results, analyse the rest in a process
pool, apply waivers, and report the policy's own expired or unused waivers.

The pool is the standard library's (``concurrent.futures``) on the ``forkserver`` start
method where available (no fork of a process whose BLAS threads are running); workers analyse
and return plain JSON-safe data, which is cheap to send back, rebuilds lazily, and is what the
parent stores in the cache (written once, at the end of the scan).
"""

from __future__ import annotations

import os
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Sequence

from .config import Config
from .engine import FileResult, analyse_file, discover_model_files, file_result, policy_findings
from .findings import Finding

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
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


# ------------------------------------------------------------------ worker side

_WORKER: dict = {}


def _init_worker(config: Config) -> None:
    _WORKER["config"] = config


def _work(path: str) -> tuple[dict, list[str], bool]:
    """Analyse one file in a worker: (JSON-safe data, referenced files, whether it loaded)."""
    from ._serial import results_to_data

    source, results, error, refs = analyse_file(path, _WORKER["config"].root, _WORKER["config"])
    return results_to_data(source, results, error), refs, error is None


# ------------------------------------------------------------------ parent side

def _source_of(path: Path, root: str) -> str:
    rel = os.path.relpath(os.path.realpath(path), root)
    return path.as_posix() if rel.startswith("..") else rel.replace(os.sep, "/")


def scan(paths: Sequence[str | Path], config: Config, *, jobs: int | None = None,
         use_cache: bool = True, progress: Callable[[int, int], None] | None = None,
         on=None, filter_named: bool = False) -> Scan:
    """Check every model file below ``paths`` under ``config``."""
    from ._serial import results_from_data
    from .cache import ResultCache
    from .waivers import today

    on = on or today()
    files = discover_model_files(list(paths), config, filter_named=filter_named)
    cache = ResultCache(config.root, config.digest) if use_cache else None
    slots: list[tuple | None] = [None] * len(files)
    todo: list[tuple[int, str, str | None]] = []
    hits = 0
    real_root = os.path.realpath(config.root)
    for i, f in enumerate(files):
        key = None
        if cache is not None:
            try:
                content = f.read_bytes()
            except OSError:
                content = None
            if content is not None:
                key = cache.key(_source_of(f, real_root), content)
                data = cache.get(key)
                if data is not None:
                    try:
                        slots[i] = results_from_data(data)
                        hits += 1
                        continue
                    except (KeyError, TypeError, ValueError, IndexError):
                        pass  # a corrupt entry: analyse again and overwrite it
        todo.append((i, str(f), key))
    done = hits
    total = len(files)
    if progress:
        progress(done, total)
    jobs = default_jobs() if jobs is None else max(1, jobs)
    if jobs > 1 and len(todo) >= POOL_THRESHOLD:
        for (i, _, key), (data, refs, ok) in zip(todo, _pool_map(todo, config, jobs)):
            if cache is not None and key is not None and ok:
                cache.put(key, data, refs)
            slots[i] = results_from_data(data)
            done += 1
            if progress:
                progress(done, total)
    else:
        for i, path, key in todo:
            source, results, error, refs = analyse_file(path, config.root, config)
            if cache is not None and key is not None and error is None:
                from ._serial import results_to_data

                cache.put(key, results_to_data(source, results, error), refs)
            slots[i] = (source, results, error)
            done += 1
            if progress:
                progress(done, total)
    if cache is not None:
        cache.save()
    out = tuple(file_result(s, r, e, config, on) for s, r, e in slots)  # type: ignore[misc]
    return Scan(files=out, policy=tuple(policy_findings(config, out, on)), cache_hits=hits,
                analysed=len(todo))


def _pool_map(todo, config: Config, jobs: int):
    import multiprocessing as mp
    from concurrent.futures import ProcessPoolExecutor

    methods = mp.get_all_start_methods()
    ctx = mp.get_context("forkserver" if "forkserver" in methods else "spawn")
    if ctx.get_start_method() == "forkserver":
        # Import the heavy modules once in the server; every worker forks from it ready.
        ctx.set_forkserver_preload(["eigengate.engine", "eigengate.modes", "eigengate.loader",
                                    "numpy", "scipy.linalg", "yaml"])
    chunk = max(1, len(todo) // (jobs * 8))
    with ProcessPoolExecutor(max_workers=jobs, mp_context=ctx, initializer=_init_worker,
                             initargs=(config,)) as pool:
        yield from pool.map(_work, [p for _, p, _ in todo], chunksize=chunk)


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
