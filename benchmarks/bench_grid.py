"""Grid benchmark: a 1,000-point operating-point grid of a 10-state loop in one model file
against 1,000 separate model files holding the same matrices.

Both repositories are written to a temporary folder: the grid is one YAML file (axes of 10 ×
100 values) with its plant and gain matrices stacked in one ``.npz``; the separate files are
1,000 YAML files, each with its own ``.npz`` of the same three matrices and the same
requirements. Each side is a whole ``eigengate check --no-cache`` process (start-up, loading,
analysis, text report), run back to back once per round for ``--repeat`` rounds; the figure is
the median of the per-round ratios grid / separate, with its range. Run twice: with the
default ``--jobs`` (the separate files are shared out among the cores, a grid file is one unit
of work) and with ``--jobs 1`` (like for like). Target: ≤ 2× with the default jobs.

Run: ``python benchmarks/bench_grid.py [--repeat 5] [--jobs N]``. The loop is invented: a
chain of 10 masses and springs, its stiffness scheduled on two variables, under a state
feedback that adds damping.
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

N, AXIS_A, AXIS_B = 10, 10, 100
PLUGIN = Path(__file__).resolve().parents[1] / "plugin"


def matrices(i: int, j: int):
    import numpy as np

    stiff = 1.0 + 0.1 * i + 0.01 * j
    a = -2.0 * stiff * np.eye(N) + stiff * (np.eye(N, k=1) + np.eye(N, k=-1))
    a -= 0.3 * np.eye(N)
    b = np.ones((N, 1)) / N
    k = 0.5 * np.ones((1, N))
    return a, b, k


HEAD = """\
model_format: 1
name: {name}
plant: {{states: [{states}], inputs: [u]{rest}}}
feedback: {{inputs: [u]{gain}}}
requirements: {{stable: true, min_decay_rate: 0.01}}
"""


def write_repos(root: Path) -> tuple[Path, Path]:
    import numpy as np

    states = ", ".join(f"x{k}" for k in range(N))
    grid, files = root / "grid", root / "files"
    for repo in (grid, files):
        (repo / "models").mkdir(parents=True)
        (repo / "pyproject.toml").write_text("[tool.eigengate]\n", encoding="utf-8")
    stack = [np.zeros((AXIS_A, AXIS_B) + s) for s in ((N, N), (N, 1), (1, N))]
    for i in range(AXIS_A):
        for j in range(AXIS_B):
            a, b, k = matrices(i, j)
            for s, m in zip(stack, (a, b, k)):
                s[i, j] = m
            np.savez(files / "models" / f"p_{i}_{j}.npz", A=a, B=b, K=k)
            (files / "models" / f"p_{i}_{j}.yaml").write_text(HEAD.format(
                name=f"chain-{i}-{j}", states=states,
                rest=f", A: {{file: p_{i}_{j}.npz, key: A}}, B: {{file: p_{i}_{j}.npz, key: B}}",
                gain=f", state_gain: {{file: p_{i}_{j}.npz, key: K}}"), encoding="utf-8")
    np.savez(grid / "models" / "grid.npz", A=stack[0], B=stack[1], K=stack[2])
    text = HEAD.format(name="chain", states=states, rest="", gain="") + (
        "grid:\n"
        f"  axes: {{a: [{', '.join(str(i) for i in range(AXIS_A))}], "
        f"b: [{', '.join(str(j) for j in range(AXIS_B))}]}}\n"
        "  matrices:\n"
        "    plant.A: {file: grid.npz, key: A}\n"
        "    plant.B: {file: grid.npz, key: B}\n"
        "    feedback.state_gain: {file: grid.npz, key: K}\n")
    (grid / "models" / "chain.yaml").write_text(text, encoding="utf-8")
    return grid, files


def run(repo: Path, jobs: int | None) -> float:
    cmd = [sys.executable, "-m", "eigengate", "check", "--no-cache", "-q", "models"]
    if jobs is not None:
        cmd += ["--jobs", str(jobs)]
    env = {**os.environ, "PYTHONPATH": str(PLUGIN)}
    t0 = time.perf_counter()
    out = subprocess.run(cmd, cwd=repo, env=env, capture_output=True, text=True)
    took = time.perf_counter() - t0
    if out.returncode != 0 or "1000 models checked" not in out.stdout:
        raise SystemExit(f"check failed in {repo}:\n{out.stdout[-2000:]}\n{out.stderr[-2000:]}")
    return took


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--jobs", type=int, default=None, help="--jobs of both sides")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        grid, files = write_repos(Path(tmp))
        run(grid, args.jobs), run(files, args.jobs)  # warm the file cache and the imports
        ratios, g_times, f_times = [], [], []
        for _ in range(args.repeat):
            g, f = run(grid, args.jobs), run(files, args.jobs)
            ratios.append(g / f)
            g_times.append(g)
            f_times.append(f)
    med = statistics.median(ratios)
    jobs = "default" if args.jobs is None else str(args.jobs)
    print(f"grid of {AXIS_A * AXIS_B} points (n={N}) / {AXIS_A * AXIS_B} model files, jobs "
          f"{jobs}: median {med:.2f}× (range {min(ratios):.2f}–{max(ratios):.2f}, "
          f"{args.repeat} rounds; medians {statistics.median(g_times):.2f} s vs "
          f"{statistics.median(f_times):.2f} s); target ≤ 2× {'met' if med <= 2 else 'NOT met'}")


if __name__ == "__main__":
    main()
