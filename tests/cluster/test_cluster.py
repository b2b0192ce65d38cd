"""``eigengate check --cluster``: the analysis on the workers of a Dask ``LocalCluster`` on the
loopback interface, compared byte for byte with a local run of the same repository.

One cluster (two worker processes of one thread each) serves the module; it is started with
a bounded wait and always closed. Its scheduler gives a task up after the first death of a
worker running it (``allowed-failures`` 0), so eigengate's own resubmission is what the
killed-worker tests exercise, and a file that kills every worker costs three restarts.
"""

from __future__ import annotations

import concurrent.futures
import json
import os
import shutil
import signal
import socket
import sys
import threading
import time
from pathlib import Path

import pytest
from support import oscillator, run_cli, write

distributed = pytest.importorskip(
    "distributed", reason='the cluster tests need dask: pip install "eigengate[cluster]"')

REPO = Path(__file__).resolve().parents[2]
PLUGIN = REPO / "plugin"
#: The command line of the worktree under test (subprocesses and the cluster's workers).
ENV = {"PYTHONPATH": os.pathsep.join(filter(None, [str(PLUGIN), os.environ.get("PYTHONPATH")]))}


@pytest.fixture(scope="module")
def cluster():
    import dask
    from distributed import Client, LocalCluster

    old = os.environ.get("PYTHONPATH")
    os.environ["PYTHONPATH"] = ENV["PYTHONPATH"]  # the workers import this eigengate
    with dask.config.set({"distributed.scheduler.allowed-failures": 0}):
        with concurrent.futures.ThreadPoolExecutor(1) as starter:
            started = starter.submit(
                LocalCluster, n_workers=2, threads_per_worker=1, processes=True,
                # dashboard off; the scheduler still serves its HTTP routes, on a free port
                # (its default 8787 may be taken, a warning, which this suite makes an error)
                host="127.0.0.1", dashboard_address=":0", worker_dashboard_address=None)
            try:
                lc = started.result(timeout=90)  # bounded start-up
            except concurrent.futures.TimeoutError:  # pragma: no cover - a stuck machine
                pytest.fail("the LocalCluster did not start within 90 s")
        client = Client(lc.scheduler_address, set_as_default=False)
        try:
            yield lc, client
        finally:
            client.close()
            lc.close(timeout=30)
            if old is None:
                os.environ.pop("PYTHONPATH", None)
            else:
                os.environ["PYTHONPATH"] = old


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _repo(base: Path, extra: int = 24) -> Path:
    """example_repo plus generated files: passing, failing (EG103), invalid (EG001) and ones
    whose matrices live in a .npz file."""
    import numpy as np

    repo = base / "repo"
    shutil.copytree(REPO / "example_repo", repo,
                    ignore=shutil.ignore_patterns("__pycache__", ".eigengate-cache"))
    (repo / ".git").mkdir()
    gen = repo / "models" / "generated"
    for k in range(extra):
        kind = k % 4
        if kind == 0:  # ζ = 0.1 ≥ 0.05: passes (see support.oscillator)
            write(gen / f"good_{k:02d}.yaml", oscillator(f"good-{k}", min_damping=0.05))
        elif kind == 1:  # ζ = 0.1 < 0.3: EG103
            write(gen / f"failing_{k:02d}.yaml", oscillator(f"failing-{k}", min_damping=0.3))
        elif kind == 2:  # a 1×2 A: EG001
            write(gen / f"invalid_{k:02d}.yaml",
                  f"model_format: 1\nname: invalid-{k}\nplant:\n  A: [[1, 2]]\n")
        else:  # a matrix-file reference: s = -1 - k/10 and -2 (triangular, poles on the diagonal)
            np.savez(gen / f"plant_{k:02d}.npz", A=np.array([[-1.0 - k / 10, 1.0], [0.0, -2.0]]))
            write(gen / f"matrix_{k:02d}.yaml", f"""\
                model_format: 1
                name: matrix-{k}
                plant:
                  A: {{file: plant_{k:02d}.npz, key: A}}
                requirements: {{stable: true, min_damping: false}}
                """)
    return repo


@pytest.fixture(scope="module")
def repo(tmp_path_factory):
    return _repo(tmp_path_factory.mktemp("cluster"))


def _check(repo: Path, *args: str):
    """The command line on ``repo`` as a subprocess: (exit status, stdout, the JSON report's
    bytes)."""
    report = repo.parent / "report.json"
    report.unlink(missing_ok=True)
    out = run_cli("check", ".", "-q", "-o", f"json:{report}", *args, cwd=repo, env=ENV,
                  timeout=120)
    assert "Traceback" not in out.stderr, out.stderr
    return out.returncode, out.stdout, report.read_bytes() if report.exists() else None


def _main(repo: Path, *args: str):
    """The same in this process (eigengate.cli.main; no interpreter start-up to pay):
    (exit status, stdout, the JSON report's bytes, stderr)."""
    import contextlib
    import io

    from eigengate.cli import main

    report = repo.parent / "report.json"
    report.unlink(missing_ok=True)
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["check", str(repo), "-q", "-o", f"json:{report}", *args])
    assert "Traceback" not in err.getvalue(), err.getvalue()
    return code, out.getvalue(), report.read_bytes() if report.exists() else None, err.getvalue()


def _small_repo(base: Path, extra: int = 4) -> Path:
    """The irrigation boom of example_repo (a vector field in dynamics/boom.py) and a few
    generated files."""
    repo = _repo(base, extra=extra)
    for folder in (repo / "models").iterdir():
        if folder.name not in ("boom", "generated"):
            shutil.rmtree(folder)
    return repo


def test_same_report_as_a_local_run(cluster, repo):
    lc, _ = cluster
    local = _check(repo, "--no-cache", "--jobs", "2")
    remote = _check(repo, "--no-cache", "--cluster", lc.scheduler_address)
    assert local[2] is not None and remote == local  # exit status, text and JSON, byte for byte
    files = json.loads(remote[2])["files"]
    rules = {f["rule"] for fr in files for m in [fr, *fr["models"]] for f in m["findings"]}
    assert local[0] == 1 and {"EG001", "EG103"} <= rules  # the repository is varied
    assert sum(fr["source"].startswith("models/generated/matrix_") for fr in files) == 6


def test_cache_written_by_the_client_and_read_again(cluster, tmp_path):
    from eigengate.scan.config import load_config
    from eigengate.scan.runner import scan

    lc, client = cluster
    work = _repo(tmp_path, extra=8)
    first = _main(work, "--no-cache", "--cluster", lc.scheduler_address)
    assert not (work / ".eigengate-cache").exists()  # --no-cache: nobody wrote one
    second = _main(work, "--cluster", lc.scheduler_address)
    assert second == first and (work / ".eigengate-cache").is_dir()
    # the workers never loaded the cache's module, so they cannot have written to it
    assert set(client.run(lambda: "eigengate.scan.cache" in sys.modules).values()) == {False}
    assert set(client.run(lambda: "eigengate.scan.engine" in sys.modules).values()) == {True}
    config = load_config(start=work)
    result = scan([work], config, jobs=1)  # a local run reads what the client stored
    invalid = sum(fr.error is not None for fr in result.files)  # never cached, as locally
    assert invalid == 2 and result.analysed == invalid
    assert result.cache_hits == len(result.files) - invalid > 0
    # with nothing left to analyse no connection is needed (no scheduler at this address)
    for bad in (work / "models" / "generated").glob("invalid_*.yaml"):
        bad.unlink()
    dead = f"tcp://127.0.0.1:{_free_port()}"
    assert _main(work, "--cluster", dead) == _main(work, "--no-cluster")


def test_a_killed_worker_loses_and_duplicates_nothing(cluster, tmp_path):
    from eigengate.scan.config import load_config
    from eigengate.scan.runner import scan

    lc, _ = cluster
    work = _small_repo(tmp_path, extra=36)  # 4 files in the first tasks: a lost one is split
    pids = work / "pids.txt"
    # the first import of this module (on a worker) waits to be killed; later ones do not
    write(work / "dynamics" / "slow.py", f"""\
        import os, time
        FIRST = not os.path.exists({str(pids)!r})
        with open({str(pids)!r}, "a") as fh:
            fh.write(f"{{os.getpid()}}\\n")
        if FIRST:
            time.sleep(60)

        def field(x, u, damping=0.8):
            return [x[1], -2.0 * x[0] - damping * x[1]]
        """)
    write(work / "models" / "generated" / "aa_slow.yaml", """\
        model_format: 1
        name: slow-field
        vector_field:
          function: dynamics.slow:field
          states: [angle, rate]
          at: [{label: rest, x: [0.0, 0.0]}]
        requirements: {stable: true, min_damping: 0.2}
        """)

    def killer():
        for _ in range(600):
            if pids.exists() and pids.read_text().strip():
                os.kill(int(pids.read_text().split()[0]), signal.SIGKILL)
                return
            time.sleep(0.05)

    config = load_config(start=work)
    thread = threading.Thread(target=killer, daemon=True)
    thread.start()
    seen: list[tuple[int, int]] = []
    remote = scan([work], config, use_cache=False, cluster=lc.scheduler_address,
                  progress=lambda done, total: seen.append((done, total)))
    thread.join(5)
    assert len(pids.read_text().split()) >= 2  # killed once, analysed again elsewhere
    local = scan([work], config, use_cache=False, jobs=1)
    sources = [fr.source for fr in remote.files]
    assert sources == [fr.source for fr in local.files] and len(set(sources)) == len(sources)
    assert [fr.findings for fr in remote.files] == [fr.findings for fr in local.files]
    slow = next(fr for fr in remote.files if fr.source.endswith("aa_slow.yaml"))
    assert slow.error is None and slow.results  # analysed, not given up
    assert seen[-1] == (len(sources), len(sources))  # progress as for a local run
    assert [d for d, _ in seen] == sorted(d for d, _ in seen)


def test_a_file_that_kills_every_worker_is_its_own_eg001(cluster, tmp_path):
    from eigengate.scan.config import load_config
    from eigengate.scan.runner import scan

    lc, _ = cluster
    work = _small_repo(tmp_path)
    write(work / "dynamics" / "fatal.py", """\
        import os, signal
        os.kill(os.getpid(), signal.SIGKILL)
        """)
    write(work / "models" / "fatal.yaml", """\
        model_format: 1
        name: fatal-field
        vector_field:
          function: dynamics.fatal:field
          states: [x]
          at: [{label: rest, x: [0.0]}]
        """)
    result = scan([work], load_config(start=work), use_cache=False,
                  cluster=lc.scheduler_address)
    fatal = [fr for fr in result.files if fr.source == "models/fatal.yaml"]
    assert len(fatal) == 1 and fatal[0].error is not None
    assert [f.rule for f in fatal[0].findings] == ["EG001"]
    assert "could not be analysed on the cluster" in fatal[0].error.problem
    others = [fr for fr in result.files if fr.source != "models/fatal.yaml"]
    assert others and all("on the cluster" not in str(fr.error) for fr in others)


def test_an_edited_vector_field_is_imported_again(cluster, tmp_path):
    lc, _ = cluster
    work = _small_repo(tmp_path)
    boom = work / "dynamics" / "boom.py"
    before = _main(work, "--no-cache", "--cluster", lc.scheduler_address)
    # negative damping: the hanging boom becomes unstable (trace of the Jacobian 0.8 > 0)
    boom.write_text(boom.read_text().replace("- damping * rate", "+ damping * rate"))
    after = _main(work, "--no-cache", "--cluster", lc.scheduler_address)
    local = _main(work, "--no-cache", "--jobs", "1")
    assert after == local and after[2] != before[2]


def test_unreachable_scheduler_is_a_clear_error():
    dead = f"tcp://127.0.0.1:{_free_port()}"
    out = run_cli("check", "--no-cache", "--cluster", dead, cwd=REPO / "example_repo",
                  env=ENV, timeout=60)
    assert out.returncode == 2, out.stderr
    assert out.stderr.startswith(f"eigengate: error: cannot reach the Dask scheduler at {dead}")
    assert "Traceback" not in out.stderr and out.stdout == ""


def test_a_silent_address_times_out(tmp_path):
    """A listening socket that never answers: the client gives up after the timeout."""
    with socket.socket() as quiet:
        quiet.bind(("127.0.0.1", 0))
        quiet.listen(8)
        address = f"tcp://127.0.0.1:{quiet.getsockname()[1]}"
        out = run_cli("check", "--no-cache", "--cluster", address,
                      cwd=REPO / "example_repo",
                      env={**ENV, "EIGENGATE_CLUSTER_TIMEOUT": "1"}, timeout=60)
    assert out.returncode == 2, out.stderr
    assert out.stderr.startswith(f"eigengate: error: cannot connect to the Dask scheduler at "
                                 f"{address} within 1 s")
    assert "Traceback" not in out.stderr


def test_config_key_and_the_flag_that_wins(cluster, tmp_path):
    lc, _ = cluster
    work = _small_repo(tmp_path)
    local = _main(work, "--no-cache")
    py = work / "pyproject.toml"
    dead = f"tcp://127.0.0.1:{_free_port()}"
    py.write_text(py.read_text().replace("[tool.eigengate]\n",
                                         f'[tool.eigengate]\ncluster = "{dead}"\n'))
    code, _, _, err = _main(work, "--no-cache")
    # the configured cluster is used, and cannot be reached
    assert code == 2 and err.startswith(f"eigengate: error: cannot reach the Dask scheduler "
                                        f"at {dead}")
    assert _main(work, "--no-cache", "--no-cluster") == local
    assert _main(work, "--no-cache", "--cluster", lc.scheduler_address) == local
    py.write_text(py.read_text().replace(dead, lc.scheduler_address))
    assert _main(work, "--no-cache") == local
    code, _, _, err = _main(work, "--no-cache", "--jobs", "2")
    assert code == 2 and "--jobs is for a local run" in err
    # baseline accept on the cluster: the client writes the baseline file
    out = run_cli("baseline", "accept", cwd=work, env=ENV, timeout=120)
    assert out.returncode == 1, out.stderr  # the invalid file is not accepted
    assert (work / ".eigengate" / "baseline.json").is_file()
    assert _main(work, "--no-cache")[0] == 1


def test_cluster_key_does_not_change_the_cache_digest(tmp_path):
    from eigengate.scan.config import parse_config

    plain = parse_config({"include": ["*.yaml"]}, root=tmp_path)
    named = parse_config({"include": ["*.yaml"], "cluster": "tls://scheduler:8786"},
                         root=tmp_path)
    assert named.cluster == "tls://scheduler:8786" and plain.cluster is None
    assert named.digest == plain.digest


@pytest.mark.parametrize("value, problem", [
    (5, "must be a Dask scheduler address"),
    ("127.0.0.1:8786", "SCHEME://HOST:PORT"),
    ("http://scheduler:8786", "one of tcp, tls, ws, wss, ucx"),
])
def test_bad_cluster_values(tmp_path, value, problem):
    from eigengate.scan.config import ConfigError, parse_config

    with pytest.raises(ConfigError, match="cluster") as info:
        parse_config({"cluster": value}, root=tmp_path)
    assert problem in str(info.value)


def test_bad_cluster_flag(tmp_path):
    out = run_cli("check", "--cluster", "scheduler:8786", cwd=REPO / "example_repo", env=ENV)
    assert out.returncode == 2
    assert "--cluster must be a Dask scheduler address" in out.stderr


def test_nested_policy_cannot_name_a_cluster(tmp_path):
    work = _small_repo(tmp_path)
    write(work / "models" / "boom" / "eigengate.toml", 'cluster = "tcp://127.0.0.1:8786"\n')
    code, _, _, err = _main(work, "--no-cache")
    assert code == 2
    assert "cluster is a key of the repository's top policy only" in err


def test_worker_that_sees_another_repository(cluster, tmp_path):
    """A chunk whose policy digest differs from the worker's copy is refused."""
    from eigengate.scan import cluster as cl
    from eigengate.version import __version__

    lc, client = cluster
    work = _small_repo(tmp_path)
    spec = (str(work), "pyproject.toml", "not-the-digest", __version__)
    future = client.submit(cl._analyse_chunk, spec, [], pure=False)
    with pytest.raises(cl.ClusterError, match="reads another policy"):
        future.result(timeout=60)
    gone = (str(tmp_path / "elsewhere"), None, "x", __version__)
    with pytest.raises(cl.ClusterError, match="does not see the repository folder"):
        client.submit(cl._analyse_chunk, gone, [], pure=False).result(timeout=60)


def test_chunks_cover_every_file_once_and_shrink_at_the_end():
    from eigengate.scan.cluster import CHUNK_MAX, chunk_sizes

    for files, threads in [(1, 1), (5, 2), (37, 2), (1000, 2), (20000, 8)]:
        sizes = chunk_sizes(files, threads)
        assert sum(sizes) == files and all(1 <= s <= CHUNK_MAX for s in sizes)
        assert sizes == sorted(sizes, reverse=True) and sizes[-1] == 1
    assert chunk_sizes(37, 2)[0] == 4 and chunk_sizes(20000, 2)[0] == CHUNK_MAX
