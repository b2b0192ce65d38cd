"""Linter benchmark on generated model files, every figure measured side by side in one run.

* cold check (empty cache, one process) against the minimal hand-written loop of
  bench_engine.py (PyYAML C loader, numpy eigvals, max real part < 0): target ≤ 1.5×;
* warm re-check (nothing changed, every result from the cache) against the cold check:
  target ≥ 20× faster;
* ``--jobs 2`` against ``--jobs 1`` (no cache): target ≥ 1.6× faster on 2 cores; beside it,
  the ceiling of this machine (the same pure-Python work in two processes against one);
* peak memory (resident set of this process and of the pool's workers): target < 300 MB.

All of them run back to back in each of ``--repeat`` rounds (the warm re-check, which is short,
three times in a row, its best counting); each figure is the median of the per-round
ratios, with their range (see bench_engine.ratio). The check is the one the
command line runs (scan, then the text report), in this process, so the figures leave out
the interpreter's start-up, which is measured apart. Run:
``python benchmarks/bench_linter.py [--files 2000]``.
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_engine import generate, hand_loop, ratio, rounds  # noqa: E402


def _peak_rss_mb(cmd: list[str]) -> tuple[float, float]:
    """Peak resident set size of a command, from its own rusage (MB), and its wall time (s)
    from start to exit, interpreter start-up included."""
    import subprocess

    code = ("import resource, subprocess, sys, time; t = time.perf_counter(); "
            "subprocess.run(sys.argv[1:], stdout=subprocess.DEVNULL); "
            "print(time.perf_counter() - t, "
            "resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)")
    out = subprocess.run([sys.executable, "-c", code, *cmd], capture_output=True, text=True,
                         check=True)
    wall, rss = out.stdout.split()
    return int(rss) / 1024, float(wall)


def _burn(go=None, n: int = 8_000_000) -> int:
    if go is not None:
        go.wait()
    total = 0
    for i in range(n):
        total += i * i
    return total


def _burn_in(processes: int) -> float:
    """Seconds for the same pure-Python work (two burns) in one process, or split over two
    processes started beforehand: the most that a second process can give on this machine."""
    import multiprocessing as mp
    import time

    if processes == 1:
        t0 = time.perf_counter()
        _burn(), _burn()
        return time.perf_counter() - t0
    ctx = mp.get_context("fork" if "fork" in mp.get_all_start_methods() else "spawn")
    go = ctx.Event()
    workers = [ctx.Process(target=_burn, args=(go,)) for _ in range(2)]
    for w in workers:
        w.start()
    time.sleep(0.2)  # both started and waiting
    t0 = time.perf_counter()
    go.set()
    for w in workers:
        w.join()
    return time.perf_counter() - t0


def _warm_with_baseline(work: Path) -> float:
    import contextlib
    import io
    import time

    from eigengate.cli import main as cli

    def run(*args: str) -> float:
        with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
            t0 = time.perf_counter()
            cli([*args, "--jobs", "1", str(work)])
            return time.perf_counter() - t0

    run("baseline", "accept")
    run("check", "-q")
    best = min(run("check", "-q") for _ in range(3))
    shutil.rmtree(work / ".eigengate", ignore_errors=True)
    return best


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--files", type=int, default=2000)
    ap.add_argument("--repeat", type=int, default=7, help="rounds")
    args = ap.parse_args(argv)

    from eigengate.cli import render
    from eigengate.scan.config import load_config
    from eigengate.scan.runner import scan

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
        hits: list[int] = []
        burns: list[float] = []  # one process, two processes, alternately

        def warm():
            result = check(1, True)
            hits.append(result.cache_hits)
            return result

        (t_hand, t_cold, t_warm, t_j1, t_j2, _, _), (_, _, _, r1, r2, _, _) = rounds(
            args.repeat, lambda: hand_loop(paths), cold, warm, lambda: check(1, False),
            lambda: check(2, False), lambda: burns.append(_burn_in(1)),
            lambda: burns.append(_burn_in(2)), inner={2: 3})
        assert hits == [args.files] * 3 * args.repeat, hits
        same = [f.findings for f in r1.files] == [f.findings for f in r2.files]
        # A repository has a baseline: the warm re-check then also compares every model.
        with_baseline = _warm_with_baseline(work)
        # Peak memory of the real command line, in a fresh process (cold, then warm).
        peaks = []
        for extra in (["--jobs", "1"], ["--jobs", "1"], ["--jobs", "2", "--no-cache"]):
            if extra[1] == "1" and not peaks:
                shutil.rmtree(work / ".eigengate-cache", ignore_errors=True)
            peaks.append(_peak_rss_mb([sys.executable, "-m", "eigengate", "check", "-q",
                                       *extra, str(work)]))
        (peak_self, wall_cold), (peak_warm, wall_warm), (peak_kids, _) = peaks
        n = args.files
        print(f"{n} model files, 4-30 states")
        print(f"cold check {min(t_cold):.3f} s vs hand loop {min(t_hand):.3f} s (best): "
              f"ratio {ratio(t_cold, t_hand)} (target <= 1.5x)")
        print(f"warm re-check {min(t_warm):.3f} s (best): {ratio(t_cold, t_warm)} faster than "
              f"cold (target >= 20x)")
        print(f"--jobs 2 {min(t_j2):.3f} s vs --jobs 1 {min(t_j1):.3f} s (best): "
              f"{ratio(t_j1, t_j2)} faster (target >= 1.6x); same findings: {same}")
        burn1, burn2 = burns[0::2], burns[1::2]
        print(f"  the ceiling on this machine, a pure-Python burn in 2 processes against 1, in "
              f"the same rounds: {ratio(burn1, burn2)} faster")
        print(f"peak memory of `eigengate check` on {n} files: {peak_self:.0f} MB cold, "
              f"{peak_warm:.0f} MB warm, {peak_kids:.0f} MB in the main process with --jobs 2 "
              f"(target < 300 MB)")
        print(f"warm re-check of the same files against an accepted baseline (the command "
              f"line in this process, every model compared, best of 3): {with_baseline:.3f} s")
        print(f"end to end, a fresh `eigengate check -q --jobs 1` (interpreter start-up "
              f"included, one run each): cold {wall_cold:.2f} s, warm {wall_warm:.2f} s")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
