"""Start-up cost of the pytest plugin: ``pytest --collect-only`` with and without it.

Writes a small suite (plain tests, no model files configured, no fixture used) into a
temporary folder and runs ``python -m pytest --collect-only -q`` on it, once as is (the
installed plugin loads through its entry point) and once with ``-p no:eigengate``. The two
runs alternate ``--repeat`` times, so a busy machine slows both alike; the medians and their
difference are printed. Target: at most 50 ms more with the plugin. The exit status is 1 when
the difference is above ``--limit-ms``.

Run: ``python benchmarks/bench_plugin_startup.py [--repeat 21] [--files 20]``.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path


def write_suite(folder: Path, files: int, tests: int) -> None:
    (folder / "pytest.ini").write_text("[pytest]\naddopts = -p no:cacheprovider\n",
                                       encoding="utf-8")
    for i in range(files):
        body = "\n".join(f"def test_case_{j}():\n    assert {j} + 1 > {j}\n"
                         for j in range(tests))
        (folder / f"test_suite_{i:02d}.py").write_text(body, encoding="utf-8")


def run_once(folder: Path, extra: list[str], cache: Path) -> float:
    # Bytecode is cached (outside the repository) as on a user's machine, for both sides.
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    env["PYTHONPYCACHEPREFIX"] = str(cache)
    start = time.perf_counter()
    out = subprocess.run([sys.executable, "-m", "pytest", "--collect-only", "-q", *extra],
                         cwd=folder, capture_output=True, text=True, env=env)
    elapsed = time.perf_counter() - start
    if out.returncode != 0:
        raise SystemExit(f"pytest failed ({out.returncode}):\n{out.stdout}\n{out.stderr}")
    return elapsed


def check_sides(folder: Path) -> None:
    """Make sure the two sides differ: the plugin loads, and ``-p no:eigengate`` stops it."""
    for extra, expected in (([], True), (["-p", "no:eigengate"], False)):
        out = subprocess.run([sys.executable, "-m", "pytest", "--help", *extra], cwd=folder,
                             capture_output=True, text=True)
        if ("--eigengate-config" in out.stdout) != expected:
            raise SystemExit("eigengate is not installed as a pytest plugin (pip install -e .)"
                             if expected else "-p no:eigengate did not disable the plugin")


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--repeat", type=int, default=21, help="runs of each side (default 21)")
    p.add_argument("--files", type=int, default=20, help="test files in the suite")
    p.add_argument("--tests", type=int, default=5, help="tests per file")
    p.add_argument("--limit-ms", type=float, default=50.0, help="allowed overhead")
    args = p.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        folder, cache = Path(tmp) / "suite", Path(tmp) / "pycache"
        folder.mkdir()
        write_suite(folder, args.files, args.tests)
        check_sides(folder)
        run_once(folder, [], cache)  # warm the file system cache and the bytecode
        run_once(folder, ["-p", "no:eigengate"], cache)
        with_plugin, without = [], []
        for _ in range(args.repeat):
            with_plugin.append(run_once(folder, [], cache))
            without.append(run_once(folder, ["-p", "no:eigengate"], cache))
    on, off = statistics.median(with_plugin), statistics.median(without)
    diff_ms = (on - off) * 1000
    print(f"suite: {args.files} files x {args.tests} tests, --collect-only, "
          f"{args.repeat} runs each, interleaved")
    print(f"with eigengate:      median {on * 1000:8.1f} ms")
    print(f"-p no:eigengate:     median {off * 1000:8.1f} ms")
    print(f"difference:                 {diff_ms:+8.1f} ms (limit {args.limit_ms:g} ms)")
    best = (min(with_plugin) - min(without)) * 1000
    print(f"fastest runs:        {min(with_plugin) * 1000:.1f} vs {min(without) * 1000:.1f} ms "
          f"({best:+.1f} ms); when the two disagree by much, the machine is busy: rerun")
    return 0 if diff_ms <= args.limit_ms else 1


if __name__ == "__main__":
    sys.exit(main())
