"""Distributed audit benchmark: ``--cluster`` on a Dask LocalCluster against ``--jobs 2``.

The same generated model files (bench_engine.generate: 4–30 states) are checked, without the
cache, by the process pool with ``--jobs 2`` (this process and one worker) and by a
``LocalCluster`` of two worker processes of one thread each on the loopback interface, this
process being the client; each side renders the JSON report, and the two reports must be
identical byte for byte. Target: the cluster within 1.3× the time of ``--jobs 2`` (the
engine's overhead is small). The cluster is started once, before the rounds, and warmed
with one run (a cluster the audits go to is already running; its workers have imported
eigengate), and closed at the end; the pool starts its workers in every run, as
``eigengate check`` does. The sides run back to back in each of ``--repeat`` rounds; the
figure is the median of the per-round ratios with their range (bench_engine.ratio). Run:
``python benchmarks/bench_cluster.py [--files 20000] [--repeat 3]``.
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_engine import generate, ratio, rounds  # noqa: E402


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--files", type=int, default=20000)
    ap.add_argument("--repeat", type=int, default=3, help="rounds")
    args = ap.parse_args(argv)

    from distributed import LocalCluster

    from eigengate.cli import render
    from eigengate.scan.config import load_config
    from eigengate.scan.runner import scan

    work = Path(tempfile.mkdtemp(prefix="eigengate-cluster-bench-"))
    cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                           host="127.0.0.1", dashboard_address=":0",
                           worker_dashboard_address=None)
    try:
        (work / ".git").mkdir()
        (work / "models").mkdir()
        generate(work / "models", args.files)
        config = load_config(start=work)
        address = cluster.scheduler_address

        def check(**how) -> str:
            result = scan([work], config, use_cache=False, **how)
            assert result.analysed == args.files
            return render("json", list(result.files))

        warm = check(cluster=address)  # the workers import eigengate once in their life
        (t_pool, t_cluster), (r_pool, r_cluster) = rounds(
            args.repeat, lambda: check(jobs=2), lambda: check(cluster=address))
        same = r_pool == r_cluster == warm
        print(f"{args.files} model files, 4-30 states, no cache; LocalCluster of 2 worker "
              f"processes (1 thread each) on 127.0.0.1")
        print(f"--cluster {min(t_cluster):.2f} s vs --jobs 2 {min(t_pool):.2f} s (best): "
              f"ratio {ratio(t_cluster, t_pool)} (target <= 1.3x); identical JSON report: "
              f"{same}")
    finally:
        cluster.close()
        shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
