"""The distributed executor: the analysis of model files on a running Dask cluster.

``eigengate check --cluster tcp://HOST:PORT`` (or ``cluster = "..."`` under
``[tool.eigengate]``) hands the files that the cache cannot serve to the workers of a Dask
distributed scheduler, in chunks submitted as futures (``Client.submit``, collected with
``as_completed``). This process stays the client: it discovers the files, reads and writes
the cache, rebuilds the results and writes every report and the baseline; the workers only
analyse. What a worker sends back is the data of :mod:`eigengate.scan.serial` (JSON-safe
values, float64 arrays and JSON texts), exactly what the process pool sends and what the
cache stores, so a result computed on a worker renders to the same bytes as one computed
here.

The workers read the repository themselves, at the same path: the model files, the matrix
files they reference and the vector-field modules they import (a shared file system, or the
same checkout at the same path, as on a ``LocalCluster``). Each chunk carries the
repository root, the policy file's name, the policy's digest and eigengate's version; a
worker rebuilds the policy from its own copy of the file and refuses (a :class:`ClusterError`)
when the folder is missing or the digest or version differs, so a worker that sees another
checkout never produces results. Modules a chunk imported from the repository are forgotten
when it ends, so a long-lived worker never serves an edited module's old code.

Failures: Dask reruns the tasks of a worker that died (up to its ``allowed-failures``) and
retries a task that raised (``retries=``). A chunk that still fails because its workers died
(``KilledWorker``, a closed connection, a cancelled task) is split into single files and
submitted again; a single file lost again is analysed once more at the end, alone on the
cluster, and a loss then is its own: the file becomes its own EG001 finding. An exception raised by the analysis itself is an eigengate bug, as in a local run. Every file's slot is filled exactly once, and the
results are assembled in file order, as in a local run. A scheduler that cannot be reached, or
that has no workers, is a :class:`ClusterError` after at most :func:`connect_timeout` seconds.

Dask is an optional dependency (``pip install "eigengate[cluster]"``), imported only inside
:func:`cluster_run`; the scheduler address is a trust boundary (anyone who can submit to it
runs code as the workers, and the client unpickles what the workers send).
"""

from __future__ import annotations

import os
import sys
from typing import TYPE_CHECKING, Any, Callable, Sequence

from ..errors import EigengateError, ModelError
from .config import Config

if TYPE_CHECKING:
    from .pack import Segment

__all__ = ["ClusterError", "cluster_run", "connect_timeout", "CHUNK_MAX"]

#: The most files one task analyses (fewer when there are few files per worker thread).
CHUNK_MAX = 32
#: Seconds to reach the scheduler and to wait for its first worker (EIGENGATE_CLUSTER_TIMEOUT).
DEFAULT_TIMEOUT = 10.0
#: Task reruns after an exception raised on a worker (a worker that died is Dask's own count).
RETRIES = 2

Outcome = tuple[dict, "Segment", list[str], bool]  # data, blobs, referenced files, loaded


class ClusterError(EigengateError):
    """The cluster cannot do the run: not installed, not reachable, no workers, a worker
    that sees another repository, the connection lost. One line, exit status 2."""


def connect_timeout() -> float:
    """Seconds allowed to reach the scheduler and to get a worker."""
    raw = os.environ.get("EIGENGATE_CLUSTER_TIMEOUT", "")
    try:
        value = float(raw) if raw else DEFAULT_TIMEOUT
    except ValueError:
        raise ClusterError(f"EIGENGATE_CLUSTER_TIMEOUT must be a number of seconds, got "
                           f"{raw!r}") from None
    if not value > 0:
        raise ClusterError(f"EIGENGATE_CLUSTER_TIMEOUT must be positive, got {raw!r}")
    return value


# ------------------------------------------------------------------ worker side

_CONFIGS: dict[tuple, Config] = {}


def _worker_config(spec: tuple[str, str | None, str, str]) -> Config:
    """The policy of ``spec`` (root, policy file name, digest, version) as this worker reads
    it from its own copy of the repository; refused when it is not the client's."""
    got = _CONFIGS.get(spec)
    if got is not None:
        return got
    from pathlib import Path

    from ..version import __version__
    from .config import ConfigError, load_config, parse_config

    root, source, digest, version = spec
    import socket

    here = socket.gethostname()
    if version != __version__:
        raise ClusterError(f"worker on {here} runs eigengate {__version__}, the client "
                           f"{version}: install the same version on every worker")
    if not os.path.isdir(root):
        raise ClusterError(f"worker on {here} does not see the repository folder {root}: "
                           "--cluster needs the repository at the same path on every worker "
                           "(a shared file system or the same checkout)")
    try:
        config = (parse_config({}, root=Path(root), source=None) if source is None
                  else load_config(Path(root) / source))
    except ConfigError as exc:
        raise ClusterError(f"worker on {here} cannot read the policy: {exc}") from None
    if config.digest != digest or os.fspath(config.root) != root:
        raise ClusterError(f"worker on {here} reads another policy at {root}/"
                           f"{source or '(defaults)'}: the workers must see the same checkout "
                           "as the client")
    _CONFIGS.clear()  # one repository at a time
    _CONFIGS[spec] = config
    return config


def _analyse_chunk(spec: tuple[str, str | None, str, str], paths: list[str]) -> list[Outcome]:
    """Analyse ``paths`` on a worker: for each, the data the pool sends
    (:func:`eigengate.scan.pool.encoded`)."""
    from .pool import encoded

    import gc

    config = _worker_config(spec)
    before = set(sys.modules)
    # As in the pool's workers, the cyclic collector waits while a chunk builds its many
    # small objects (which form no cycles); the worker's own state is left as it was.
    was = gc.isenabled()
    gc.disable()
    try:
        return encoded(paths, config)
    finally:
        if was:
            gc.enable()
        _forget_modules(before, os.path.realpath(config.root))


def _forget_modules(before: set[str], root: str) -> None:
    """Drop the modules imported from the repository since ``before`` (vector fields), so the
    next chunk imports the files as they are then.

    Kept whatever their file: eigengate's own modules (a checkout of eigengate checked with
    itself lies in the repository; a second copy of a module would be a second copy of its
    classes) and the installed packages of the worker's interpreter (a virtual environment
    inside the repository, where numpy's extension modules cannot be imported twice)."""
    installed = _installed_folders()
    for name in set(sys.modules) - before:
        if name == "eigengate" or name.startswith("eigengate."):
            continue
        file = getattr(sys.modules.get(name), "__file__", None)
        if not file:
            continue
        real = os.path.realpath(file)
        if real.startswith(root + os.sep) and not any(real.startswith(folder + os.sep)
                                                      for folder in installed):
            del sys.modules[name]


def _installed_folders() -> list[str]:
    """The folders the interpreter's own and installed modules come from (real paths)."""
    import site
    import sysconfig

    folders = {sys.prefix, sys.base_prefix, sys.exec_prefix}
    folders.update(sysconfig.get_paths().get(k, "") for k in ("purelib", "platlib", "stdlib"))
    try:
        folders.update(site.getsitepackages())
    except AttributeError:  # pragma: no cover - some embedded interpreters lack it
        pass
    return sorted(os.path.realpath(f) for f in folders if f)


# ------------------------------------------------------------------ client side

def _reachable(address: str, timeout: float) -> None:
    """Fail at once, with the reason, when nothing listens at a tcp:// or tls:// address
    (Dask itself would retry until its timeout)."""
    import socket
    from urllib.parse import urlsplit

    parts = urlsplit(address)
    if parts.scheme not in ("tcp", "tls"):
        return
    try:
        host, port = parts.hostname, parts.port or 8786
    except ValueError as exc:
        raise ClusterError(f"cannot use the cluster address {address!r}: {exc}") from None
    try:
        socket.create_connection((host, port), timeout=timeout).close()
    except OSError as exc:
        why = exc.strerror or type(exc).__name__
        raise ClusterError(f"cannot reach the Dask scheduler at {address}: {why} (is it "
                           "running, and is the address right?)") from None


def _connect(address: str):
    try:
        from distributed import Client
    except ImportError:
        raise ClusterError('--cluster needs dask and distributed, which are not installed: '
                           'pip install "eigengate[cluster]"') from None
    timeout = connect_timeout()
    _reachable(address, timeout)
    # Dask's own timeout covers the connection, not a peer that accepts and never answers:
    # the client is made in a thread (a daemon: one that hangs does not hold the exit).
    import threading

    made: list = []

    def make() -> None:
        try:
            made.append(Client(address, timeout=timeout, set_as_default=False))
        except BaseException as exc:  # handed to the caller
            made.append(exc)

    maker = threading.Thread(target=make, name="eigengate-cluster-connect", daemon=True)
    maker.start()
    maker.join(timeout + 1)
    client = made[0] if made else TimeoutError("no answer")
    if isinstance(client, BaseException):
        raise ClusterError(f"cannot connect to the Dask scheduler at {address} within "
                           f"{timeout:g} s: {client}") from None
    try:
        client.wait_for_workers(1, timeout=timeout)
    except (OSError, TimeoutError):
        client.close()
        raise ClusterError(f"the Dask scheduler at {address} has no workers (waited "
                           f"{timeout:g} s)") from None
    return client


def _lost_worker_errors() -> tuple[type[BaseException], ...]:
    from concurrent.futures import CancelledError

    from distributed import KilledWorker
    from distributed.comm import CommClosedError

    return (KilledWorker, CommClosedError, CancelledError)


def _unanalysed(rel: str, why: str) -> Outcome:
    """A file no worker could analyse, as the data of its own EG001 finding."""
    from .serial import results_to_data

    error = ModelError(rel, "", f"could not be analysed on the cluster: {why}",
                       hint="run it locally (eigengate check FILE) to see what its analysis "
                            "does; a worker that runs out of memory or crashes is stopped")
    data, blobs = results_to_data(rel, (), error)
    return data, blobs.items, [], False


def chunk_sizes(files: int, threads: int) -> list[int]:
    """Files per task, in order: a quarter of each worker thread's share of what is left,
    1 to :data:`CHUNK_MAX` files, so the chunks shrink towards the end and the workers
    finish together (as the pool's do)."""
    sizes = []
    left = files
    while left > 0:
        sizes.append(max(1, min(CHUNK_MAX, left // (4 * max(1, threads)))))
        left -= sizes[-1]
    return sizes


def cluster_run(todo: Sequence[tuple[int, str, Any]], names: Sequence[str], config: Config,
                address: str, remote: Callable[[list, list[Outcome]], None],
                step: Callable[[int], None], local: Callable[[list], None]) -> None:
    """Analyse ``todo`` ((slot, path, cache key) items; ``names[slot]`` is the file's
    repository-relative name) on the cluster at ``address``; hand each finished chunk to
    ``remote`` (items, outcomes) and count it with ``step``. A file named outside the
    repository (which the workers are not known to see, and whose name is the path given
    here) is analysed here, with ``local``."""
    from ..version import __version__

    root = os.path.realpath(config.root) + os.sep
    inside = []
    for item in todo:
        full = os.path.realpath(item[1])
        if full.startswith(root):
            inside.append((item[0], full, item[2]))
        else:
            local([item])
            step(1)
    if inside:
        _run(inside, names, config, address, remote, step, __version__)


def _run(todo: list, names: Sequence[str], config: Config, address: str, remote, step,
         version: str) -> None:
    """Submit ``todo`` in chunks and settle each as it finishes; then analyse, one at a time
    with nothing else running, the files whose single-file task was lost with its worker
    (a task queued on a worker dies with the one that kills it), so that a loss there is
    the file's own."""
    client = _connect(address)
    try:
        from distributed import as_completed

        lost = _lost_worker_errors()
        spec = (os.fspath(config.root), config.source, config.digest, version)
        threads = sum(client.nthreads().values()) or 1
        pending: dict[Any, list] = {}
        filled: set[int] = set()
        suspects: list = []

        def submit(items: list, into) -> None:
            future = client.submit(_analyse_chunk, spec, [p for _, p, _ in items],
                                   pure=False, retries=RETRIES)
            pending[future] = items
            into.add(future)

        def settle(future, value, into) -> None:
            items = pending.pop(future)
            if future.status == "finished":
                outcome = value
            else:
                exc = value[1] if isinstance(value, tuple) else value
                if isinstance(exc, ClusterError):
                    raise ClusterError(str(exc)) from None
                if not isinstance(exc, lost):
                    raise exc  # an eigengate bug, as in a local run: an internal error
                if client.status not in ("running", "connecting"):
                    raise ClusterError(f"lost the connection to the Dask scheduler at "
                                       f"{address}") from None
                if into is not None:  # one by one: find the file that stops its workers
                    if len(items) > 1:
                        for item in items:
                            submit([item], into)
                    else:
                        suspects.append(items[0])
                    return
                why = f"{type(exc).__name__}: {exc}".splitlines()[0]
                outcome = [_unanalysed(names[items[0][0]], why)]
            slots = [i for i, _, _ in items]
            if filled.intersection(slots) or len(outcome) != len(items):
                raise ClusterError("the cluster sent a result twice or lost one")  # never
            filled.update(slots)
            remote(items, outcome)  # (the paths in items are resolved; remote reads slot, key)
            step(len(items))

        def collect():
            return as_completed([], loop=client.loop, with_results=True, raise_errors=False)

        queue = collect()
        first = 0
        for size in chunk_sizes(len(todo), threads):
            submit(list(todo[first:first + size]), queue)
            first += size
        for future, value in queue:
            settle(future, value, queue)
        for item in suspects:
            alone = collect()
            submit([item], alone)
            for future, value in alone:
                settle(future, value, None)
        if len(filled) != len(todo):  # pragma: no cover - as_completed ends with pending
            raise ClusterError(f"the cluster returned {len(filled)} of {len(todo)} files")
    finally:
        client.close(timeout=connect_timeout())
