"""Linter benchmark on generated model files, every figure measured side by side in one run.

* cold check (empty cache, one process) against the minimal hand-written loop of
  bench_engine.py (PyYAML C loader, numpy eigvals, max real part < 0): target ≤ 1.5×;
* warm re-check (nothing changed, every result from the cache) against the cold check:
  target ≥ 20× faster;
* ``--jobs 2`` against ``--jobs 1`` (no cache): target ≥ 1.6× faster on 2 cores;
* peak memory (resident set of this process and of the pool's workers): target < 300 MB.

Each timing is the best of ``--repeat`` interleaved runs. Run:
``python benchmarks/bench_linter.py [--files 2000]``.
"""

from __future__ import annotations

import argparse
import resource
import shutil
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_engine import generate, hand_loop  # noqa: E402


def timed(func):
    t0 = time.perf_counter()
    value = func()
    return time.perf_counter() - t0, value


def _peak_rss_mb(cmd: list[str]) -> float:
    """Peak resident set size of a command, from its own rusage (MB)."""
    import subprocess

    code = ("import resource, subprocess, sys; subprocess.run(sys.argv[1:], "
            "stdout=subprocess.DEVNULL); "
            "print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)")
    out = subprocess.run([sys.executable, "-c", code, *cmd], capture_output=True, text=True,
                         check=True)
    return int(out.stdout.strip()) / 1024


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--files", type=int, default=2000)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)

    from eigengate.cli import render
    from eigengate.config import load_config
    from eigengate.runner import scan

    work = Path(tempfile.mkdtemp(prefix="eigengate-lint-bench-"))
    try:
        (work / ".git").mkdir()
        paths = generate(work / "models", args.files) if (work / "models").mkdir() is None else []
        config = load_config(start=work)

        def check(jobs: int, cache: bool):
            result = scan([work], config, jobs=jobs, use_cache=cache)
            render("text", list(result.files))
            return result

        def cold():
            shutil.rmtree(work / ".eigengate-cache", ignore_errors=True)
            return check(1, True)

        hand_loop(paths[:20])
        check(1, False)
        best = {"hand": 1e9, "cold": 1e9, "warm": 1e9, "j1": 1e9, "j2": 1e9}
        for _ in range(args.repeat):
            t, _ = timed(lambda: hand_loop(paths))
            best["hand"] = min(best["hand"], t)
            t, r_cold = timed(cold)
            best["cold"] = min(best["cold"], t)
            t, r_warm = timed(lambda: check(1, True))
            best["warm"] = min(best["warm"], t)
            assert r_warm.cache_hits == args.files, r_warm.cache_hits
            t, r1 = timed(lambda: check(1, False))
            best["j1"] = min(best["j1"], t)
            t, r2 = timed(lambda: check(2, False))
            best["j2"] = min(best["j2"], t)
        same = [f.findings for f in r1.files] == [f.findings for f in r2.files]
        # Peak memory of the real command line, in a fresh process (cold, then warm).
        peaks = []
        for extra in (["--jobs", "1"], ["--jobs", "1"], ["--jobs", "2", "--no-cache"]):
            if extra[1] == "1" and not peaks:
                shutil.rmtree(work / ".eigengate-cache", ignore_errors=True)
            peaks.append(_peak_rss_mb([sys.executable, "-m", "eigengate", "check", "-q",
                                       *extra, str(work)]))
        peak_self, peak_warm, peak_kids = peaks
        n = args.files
        print(f"{n} model files, 4-30 states")
        print(f"cold check {best['cold']:.3f} s vs hand loop {best['hand']:.3f} s: "
              f"ratio {best['cold'] / best['hand']:.2f}x (target <= 1.5x)")
        print(f"warm re-check {best['warm']:.3f} s: {best['cold'] / best['warm']:.1f}x faster "
              f"than cold (target >= 20x)")
        print(f"--jobs 2 {best['j2']:.3f} s vs --jobs 1 {best['j1']:.3f} s: "
              f"{best['j1'] / best['j2']:.2f}x faster (target >= 1.6x); same findings: {same}")
        print(f"peak memory of `eigengate check` on {n} files: {peak_self:.0f} MB cold, "
              f"{peak_warm:.0f} MB warm, {peak_kids:.0f} MB in the main process with --jobs 2 "
              f"(target < 300 MB)")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
