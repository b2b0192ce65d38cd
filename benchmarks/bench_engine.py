"""Engine benchmark: eigengate against a minimal hand-written loop, side by side in one run.

1. Files: generates N model files (YAML, 4–30 states, inline matrices) and times
   load + analysis + verdicts (``eigengate.check_file``) against the loop a team would write by
   hand (PyYAML C loader, ``numpy.linalg.eigvals``, ``max real part < 0``). Target: ≤ 1.5×.
2. Dense: one 1,000-state model, full modal analysis (participation factors, condition
   numbers, clusters) against ``scipy.linalg.eig`` with left and right eigenvectors.
   Target: ≤ 2×.

Each side runs once per round, back to back, for ``--repeat`` rounds; the figure is the
median of the per-round ratios (with their range), so a machine whose speed drifts slows
both sides of a ratio alike. Run: ``python benchmarks/bench_engine.py [--files 2000]``.
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from pathlib import Path


def generate(folder: Path, count: int, seed: int = 7, states: tuple[int, int] = (4, 30),
             shift: tuple[float, float] = (0.2, 1.6)) -> list[Path]:
    """Write ``count`` model files of ``states`` (4–30 by default) states (random stable-ish
    plants, invented data: ``A`` is a normal matrix scaled by 1/√n less a diagonal drawn from
    ``shift``)."""
    import numpy as np
    import yaml

    rng = np.random.default_rng(seed)
    paths = []
    for i in range(count):
        n = int(rng.integers(states[0], states[1] + 1))
        a = rng.normal(size=(n, n)) / np.sqrt(n) - rng.uniform(*shift) * np.eye(n)
        b = rng.normal(size=(n, 2))
        c = rng.normal(size=(1, n))
        doc = {
            "model_format": 1,
            "name": f"bench-{i:04d}",
            "plant": {"A": np.round(a, 6).tolist(), "B": np.round(b, 6).tolist(),
                      "C": np.round(c, 6).tolist()},
            "requirements": {"stable": True, "min_damping": 0.05},
        }
        p = folder / f"m{i:04d}.yaml"
        p.write_text(yaml.safe_dump(doc, sort_keys=False), encoding="utf-8")
        paths.append(p)
    return paths


def hand_loop(paths: list[Path]) -> int:
    import numpy as np
    import yaml

    stable = 0
    for p in paths:
        with open(p, "rb") as fh:
            doc = yaml.load(fh, Loader=yaml.CSafeLoader)
        a = np.array(doc["plant"]["A"], dtype=float)
        stable += bool(np.linalg.eigvals(a).real.max() < 0)
    return stable


def engine_loop(paths: list[Path], root: Path) -> int:
    from eigengate.scan.engine import check_file

    stable = 0
    for p in paths:
        result = check_file(p, root=root)
        stable += bool(result.results and result.results[0].verdicts[0].passed)
    return stable


def rounds(repeat: int, *funcs, inner: dict[int, int] | None = None
           ) -> tuple[list[list[float]], list]:
    """Run the functions one after the other, ``repeat`` rounds; return each one's time in
    every round and its last value. The sides of one round run back to back, so they see
    the machine alike: compare them round by round (see :func:`ratio`). ``inner`` maps a
    function's position to a number of runs in a row whose best is its time in the round
    (for a short side, which one pause of the machine would otherwise swamp)."""
    times: list[list[float]] = [[] for _ in funcs]
    values = [None] * len(funcs)
    for _ in range(repeat):
        for k, f in enumerate(funcs):
            best = float("inf")
            for _ in range((inner or {}).get(k, 1)):
                t0 = time.perf_counter()
                values[k] = f()
                best = min(best, time.perf_counter() - t0)
            times[k].append(best)
    return times, values


def ratio(top: list[float], bottom: list[float]) -> str:
    """The median of the per-round ratios ``top/bottom``, with their range: on a shared
    machine whose speed drifts, a ratio within one round is steadier than a ratio of the
    best times of each side, which may come from different moments."""
    per_round = sorted(t / b for t, b in zip(top, bottom))
    mid = len(per_round) // 2
    median = per_round[mid] if len(per_round) % 2 else (per_round[mid - 1] + per_round[mid]) / 2
    return f"{median:.2f}x (rounds {per_round[0]:.2f}-{per_round[-1]:.2f})"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--files", type=int, default=2000)
    ap.add_argument("--dense", type=int, default=1000, help="order of the dense model")
    ap.add_argument("--repeat", type=int, default=7, help="rounds")
    args = ap.parse_args(argv)

    import numpy as np
    import scipy.linalg as la

    import eigengate
    from eigengate.analysis.modes import analyse

    work = Path(tempfile.mkdtemp(prefix="eigengate-bench-"))
    try:
        (work / ".git").mkdir()  # the folder is its own repository root
        paths = generate(work, args.files)
        engine_loop(paths[:20], work)  # warm imports on both sides before timing
        hand_loop(paths[:20])
        (t_hand, t_eng), (n_hand, n_eng) = rounds(
            args.repeat, lambda: hand_loop(paths), lambda: engine_loop(paths, work))
        if n_hand != n_eng:
            print(f"verdicts differ: hand loop {n_hand} stable, eigengate {n_eng}", file=sys.stderr)
            return 1
        print(f"files: {args.files} models, 4-30 states; hand loop {min(t_hand):.3f} s, "
              f"eigengate {min(t_eng):.3f} s (best); ratio {ratio(t_eng, t_hand)} "
              f"(target <= 1.5x); {n_eng} stable")

        rng = np.random.default_rng(3)
        n = args.dense
        a = rng.normal(size=(n, n)) / np.sqrt(n) - 1.1 * np.eye(n)
        model = eigengate.from_arrays(a)
        (t_eig, t_modes), (_, spectrum) = rounds(
            args.repeat, lambda: la.eig(a, left=True, right=True), lambda: analyse(model))
        print(f"dense: {n} states; scipy.linalg.eig(left, right) {min(t_eig):.3f} s, full "
              f"modal analysis {min(t_modes):.3f} s (best); ratio {ratio(t_modes, t_eig)} "
              f"(target <= 2x); {len(spectrum.modes)} modes")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
