"""Engine benchmark: eigengate against a minimal hand-written loop, side by side in one run.

1. Files: generates N model files (YAML, 4–30 states, inline matrices) and times
   load + analysis + verdicts (``eigengate.check_file``) against the loop a team would write by
   hand (PyYAML C loader, ``numpy.linalg.eigvals``, ``max real part < 0``). Target: ≤ 1.5×.
2. Dense: one 1,000-state model, full modal analysis (participation factors, condition
   numbers, clusters) against ``scipy.linalg.eig`` with left and right eigenvectors.
   Target: ≤ 2×.

Each side runs ``--repeat`` times, interleaved, and the best time of each is compared, so a
busy machine slows both alike. Run: ``python benchmarks/bench_engine.py [--files 2000]``.
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from pathlib import Path


def generate(folder: Path, count: int, seed: int = 7) -> list[Path]:
    """Write ``count`` model files of 4–30 states (random stable-ish plants, invented data)."""
    import numpy as np
    import yaml

    rng = np.random.default_rng(seed)
    paths = []
    for i in range(count):
        n = int(rng.integers(4, 31))
        a = rng.normal(size=(n, n)) / np.sqrt(n) - rng.uniform(0.2, 1.6) * np.eye(n)
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
    from eigengate.engine import check_file

    stable = 0
    for p in paths:
        result = check_file(p, root=root)
        stable += bool(result.results and result.results[0].verdicts[0].passed)
    return stable


def best_of(repeat: int, *funcs):
    """Interleave the functions ``repeat`` times; return each one's best time and last value."""
    best = [float("inf")] * len(funcs)
    values = [None] * len(funcs)
    for _ in range(repeat):
        for k, f in enumerate(funcs):
            t0 = time.perf_counter()
            values[k] = f()
            best[k] = min(best[k], time.perf_counter() - t0)
    return best, values


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--files", type=int, default=2000)
    ap.add_argument("--dense", type=int, default=1000, help="order of the dense model")
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)

    import numpy as np
    import scipy.linalg as la

    import eigengate
    from eigengate.modes import analyse

    work = Path(tempfile.mkdtemp(prefix="eigengate-bench-"))
    try:
        (work / ".git").mkdir()  # the folder is its own repository root
        paths = generate(work, args.files)
        engine_loop(paths[:20], work)  # warm imports on both sides before timing
        hand_loop(paths[:20])
        (t_hand, t_eng), (n_hand, n_eng) = best_of(
            args.repeat, lambda: hand_loop(paths), lambda: engine_loop(paths, work))
        if n_hand != n_eng:
            print(f"verdicts differ: hand loop {n_hand} stable, eigengate {n_eng}", file=sys.stderr)
            return 1
        print(f"files: {args.files} models, 4-30 states; hand loop {t_hand:.3f} s, "
              f"eigengate {t_eng:.3f} s; ratio {t_eng / t_hand:.2f}x (target <= 1.5x); "
              f"{n_eng} stable")

        rng = np.random.default_rng(3)
        n = args.dense
        a = rng.normal(size=(n, n)) / np.sqrt(n) - 1.1 * np.eye(n)
        model = eigengate.from_arrays(a)
        (t_eig, t_modes), (_, spectrum) = best_of(
            args.repeat, lambda: la.eig(a, left=True, right=True), lambda: analyse(model))
        print(f"dense: {n} states; scipy.linalg.eig(left, right) {t_eig:.3f} s, full modal "
              f"analysis {t_modes:.3f} s; ratio {t_modes / t_eig:.2f}x (target <= 2x); "
              f"{len(spectrum.modes)} modes")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
