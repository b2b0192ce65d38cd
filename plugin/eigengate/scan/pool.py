"""The process pool of a local scan: ``--jobs N`` is this process and N−1 workers.

Workers are started once, at the start of the scan, each with a duplex pipe; they are fed
chunks of file paths and send back, per chunk, compact records: each file's JSON-safe data,
its blobs as one segment of bytes and its index (what the cache pack stores;
:class:`~eigengate.scan.cache.RawBlobs` reads them), its referenced files and whether it
loaded. Nothing is pickled but plain data.

Workers take chunks from the front of the list, this process 16 files at a time from the
back, between collecting what the workers send, so it analyses while the workers start (their
imports), and there are never more busy processes than jobs. Each worker has two chunks in
hand, so it never waits for this process; chunks shrink as the two ends meet, so everyone
finishes at about the same time.

Start method: ``fork`` on Linux while this process runs one thread: numpy and the analysis
modules are imported before the fork with the BLAS libraries at one thread per process (unless
the user set their thread counts), so the workers start analysing at once and no BLAS thread
is forked; where numpy was loaded before with threads of its own, ``forkserver`` (numpy and
eigengate preloaded in the server), else ``spawn``. When the pool closes every worker has
exited and been joined, and a forkserver or resource tracker that the pool started is
stopped: nothing of the pool outlives the scan.
"""

from __future__ import annotations

import gc
import sys
from collections import deque
from typing import TYPE_CHECKING, Any, Callable

if TYPE_CHECKING:
    from .pack import Segment

__all__ = ["encoded", "pool_run"]

#: Files per chunk sent to a worker: at most this many ...
CHUNK_MAX = 64
#: ... and at least this many (also what this process takes at a time).
CHUNK_MIN = 4
#: Files this process analyses at a time, stage by stage, between collecting what the
#: workers send (each worker holds two chunks meanwhile: none waits).
OWN_BATCH = 16
#: Chunks a worker holds: the one it analyses and the next.
AHEAD = 2


def encoded(paths: list[str], config: Any) -> list[tuple[dict, Segment, list[str], bool]]:
    """Analyse files in a worker (of the pool or of a cluster), stage by stage
    (:func:`~eigengate.scan.engine.analyse_files`): per file (JSON-safe data, its blobs as
    a segment and its index, referenced files, whether it loaded). ``config`` is a
    :class:`~eigengate.scan.config.Config`."""
    from .engine import analyse_files
    from .serial import results_to_data

    out = []
    for source, results, error, refs in analyse_files([(p, None) for p in paths],
                                                      config.root, config):
        data, blobs = results_to_data(source, results, error)
        out.append((data, blobs.items, refs, error is None))
    return out


def _serve(conn, config) -> None:
    """A worker: analyse each chunk of paths received, send back its records; stop at None
    or when the pipe closes. A chunk that raises is sent back as None: this process then
    analyses it itself, so an eigengate bug surfaces there, as in a run without a pool."""
    # As in the parent's scan, the cyclic collector stays off while the worker analyses;
    # what it imported is moved out of the collector's sight for good.
    gc.freeze()
    gc.disable()
    try:
        while True:
            try:
                paths = conn.recv()
            except EOFError:
                return
            if paths is None:
                return
            try:
                out: list | None = encoded(paths, config)
            except Exception:  # noqa: BLE001 - reported by the parent's own run of the chunk
                out = None
            conn.send(out)
    finally:
        conn.close()


#: What a forked worker needs to analyse at once, imported here before the fork: this
#: process imports it for its own share of the files anyway, and each worker then starts on
#: its first chunk instead of importing numpy and the analysis itself (measured on 2,000
#: small files: a worker's first chunk took 104 ms against 27 ms for the next ones, and
#: numpy's import in two processes at once took 85 to 110 ms in each against 65 ms alone).
_FORK_PRELOAD = ("numpy", "eigengate.load.loader", "eigengate.load.blocks",
                 "eigengate.model.interconnect", "eigengate.analysis.modes",
                 "eigengate.analysis.small_modes", "eigengate.analysis.equilibrium",
                 "eigengate.rules.requirements", "eigengate.rules.origin_requirements",
                 "eigengate.rules.pictures", "eigengate.scan.serial")

#: The thread counts of the BLAS libraries numpy and scipy load: one per process when the
#: pool's processes are the parallelism (unless the user set them), so that loading them
#: starts no threads and the process can be forked safely (and N processes do not run N
#: BLAS thread pools on N cores).
_ONE_THREAD = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def _threads() -> int:
    """The threads this process runs, native ones included (a BLAS library's): the entries
    of ``/proc/self/task`` on Linux; a large number where that cannot be read."""
    import os

    try:
        return len(os.listdir("/proc/self/task"))
    except OSError:  # pragma: no cover - not Linux
        return 1 << 30


def _forkable() -> bool:
    """Whether this process may be forked: Linux, one Python thread and, when numpy is
    loaded, no other native thread either."""
    import multiprocessing as mp
    import threading

    if not (sys.platform.startswith("linux") and "fork" in mp.get_all_start_methods()
            and threading.active_count() == 1):
        return False
    return "numpy" not in sys.modules or _threads() == 1


def _context():
    import importlib
    import multiprocessing as mp

    methods = mp.get_all_start_methods()
    if _forkable():
        if "numpy" not in sys.modules:
            import os

            for name in _ONE_THREAD:
                os.environ.setdefault(name, "1")
        for name in _FORK_PRELOAD:
            importlib.import_module(name)
        from ..analysis.small_lapack import flapack

        flapack()  # scipy's LAPACK extension and its BLAS, loaded once for every process
        if _forkable():  # the BLAS libraries started no thread (a user's own count, say)
            return mp.get_context("fork")
    if "forkserver" in methods:
        ctx = mp.get_context("forkserver")
        # Import the heavy modules once in the server; every worker forks from it ready.
        # (scipy.linalg is left out: small models never import it, large ones do on demand)
        ctx.set_forkserver_preload(["eigengate.scan.engine", "eigengate.analysis.modes",
                                    "eigengate.load.loader", "numpy", "yaml"])
        return ctx
    return mp.get_context("spawn")  # pragma: no cover - not on Linux


def _helpers() -> tuple[Any, Any]:
    """multiprocessing's forkserver and resource tracker objects (None for one whose module
    was never imported: it cannot be running, and a forked pool imports neither)."""
    forkserver = sys.modules.get("multiprocessing.forkserver")
    tracker = sys.modules.get("multiprocessing.resource_tracker")
    return getattr(forkserver, "_forkserver", None), getattr(tracker, "_resource_tracker", None)


def _helpers_running() -> tuple[bool, bool]:
    """Whether multiprocessing's forkserver and resource tracker processes are running."""
    server, tracker = _helpers()
    return (getattr(server, "_forkserver_pid", None) is not None,
            getattr(tracker, "_pid", None) is not None)


def _stop_helpers(before: tuple[bool, bool]) -> None:
    """Stop the forkserver and resource tracker when this pool started them (their ``_stop``
    is what the standard library's own tests use; absent, they exit with this process)."""
    for was, running, helper in zip(before, _helpers_running(), _helpers()):
        stop = getattr(helper, "_stop", None)
        if running and not was and stop is not None:
            try:
                stop()
            except (OSError, ChildProcessError):  # pragma: no cover - already gone
                pass


def pool_run(todo: list, config: Any, jobs: int, local: Callable, remote: Callable,
             step: Callable[[int], None]) -> None:
    """Analyse ``todo`` (``(slot, path, key)`` items) in ``jobs`` processes: ``local(items)``
    here, ``remote(items, records)`` for what a worker sent; ``step(n)`` after each n files."""
    ctx = _context()
    before = _helpers_running()
    front, back = 0, len(todo)

    def take() -> int:  # a quarter of each process's share of what is left, within limits
        return min(back - front, max(CHUNK_MIN, min(CHUNK_MAX, (back - front) // (4 * jobs))))

    sys.stdout.flush()  # a forked worker must not inherit unwritten output
    sys.stderr.flush()
    workers = []
    held: dict[Any, deque] = {}  # pipe → the chunks its worker holds, oldest first
    try:
        for _ in range(jobs - 1):
            mine, theirs = ctx.Pipe(duplex=True)
            proc = ctx.Process(target=_serve, args=(theirs, config), daemon=True)
            proc.start()
            theirs.close()
            workers.append(proc)
            held[mine] = deque()

        def feed(conn) -> None:
            nonlocal front
            while front < back and len(held[conn]) < AHEAD:
                n = take()
                items = todo[front:front + n]
                front += n
                try:
                    conn.send([p for _, p, _ in items])
                except OSError:  # the worker is gone (its pipe says so at the next read)
                    local(items)
                    step(n)
                    continue
                held[conn].append(items)

        for conn in held:
            feed(conn)
        from multiprocessing.connection import wait

        while front < back or any(held.values()):
            busy = [c for c, chunks in held.items() if chunks]
            for conn in wait(busy, timeout=0 if front < back else None) if busy else ():
                items = held[conn].popleft()
                try:
                    records = conn.recv()  # type: ignore[union-attr,call-arg]
                except (EOFError, OSError):  # the worker died: its chunks are done here
                    records = None
                    for rest in (items, *held.pop(conn)):
                        local(rest)
                        step(len(rest))
                    continue
                if records is None:
                    local(items)
                else:
                    remote(items, records)
                step(len(items))
                feed(conn)
            if front < back:  # a few files at a time, to be back soon to collect
                n = min(OWN_BATCH, back - front)
                back -= n
                local(todo[back:back + n])
                step(n)
    finally:
        for conn in list(held):
            try:
                conn.send(None)
            except OSError:
                pass
        for proc in workers:
            proc.join(timeout=10)
            if proc.is_alive():  # pragma: no cover - a worker stuck in a file
                proc.terminate()
                proc.join()
        for conn in held:
            conn.close()
        _stop_helpers(before)
