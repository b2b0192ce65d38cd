"""Parameter-range benchmark: ``robust:`` over two parameters of a 20-state closed loop.

The model (invented data): ten lightly damped modes of a mast (ω 1–12 rad/s, ζ 0.01–0.03)
in modal form, two actuators, an LQR state feedback (scipy's Riccati solver, fixed weights),
and two uncertain parameters: a damper gain that scales the velocity part of the first
actuator's gain, and a stiffness that shifts the first mode's spring. The requirement is
``robust: {stable: true, min_decay_rate: 0.01}``.

1. The whole check (``eigengate.check_model``: nominal analysis, the vertices and the four
   edges solved exactly by guardian maps, the 400-point interior grid and local minimisation,
   a full analysis at each worst point). Target: ≤ 5 s.
2. Against a plain grid search of the same accuracy, in the same rounds: the grid (N×N points,
   eigenvalues at each, N = 9, 17, 33, …) is refined until its worst margin is within 1e-6
   (relative) of the one the check found; the figure is the median of the per-round ratios
   grid / check. The grid proves nothing between its points, and its boundary points are
   only as sharp as its spacing (the check's are refined to about 1e-14).

Run: ``python benchmarks/bench_parameter_ranges.py [--repeat 3]``.
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path


def model_text() -> str:
    import numpy as np
    import scipy.linalg as la

    rng = np.random.default_rng(20)
    w = np.linspace(1.0, 12.0, 10)
    z = rng.uniform(0.01, 0.03, 10)
    a = np.zeros((20, 20))
    for i in range(10):
        a[2 * i, 2 * i + 1] = 1.0
        a[2 * i + 1, 2 * i] = -w[i] ** 2
        a[2 * i + 1, 2 * i + 1] = -2 * z[i] * w[i]
    b = np.zeros((20, 2))
    b[1::2, :] = rng.normal(size=(10, 2))
    p = la.solve_continuous_are(a, b, np.eye(20), np.eye(2))
    k = np.linalg.solve(np.eye(2), b.T @ p)
    damper = np.zeros((2, 20))
    damper[0, 1::2] = k[0, 1::2] * 0.5  # half the velocity gains per unit of damper gain
    stiff = np.zeros((20, 20))
    stiff[1, 0] = -1.0

    def mat(m) -> str:
        return "[" + ", ".join("[" + ", ".join(repr(float(x)) for x in row) + "]"
                               for row in m) + "]"

    return (f"model_format: 1\nname: mast-loop\nplant:\n  A: {mat(a)}\n  B: {mat(b)}\n"
            f"feedback:\n  state_gain: {mat(k)}\nparameters:\n"
            f"  damper_gain:\n    nominal: 0.0\n    range: [-0.8, 0.8]\n"
            f"    affects: {{feedback.state_gain: {mat(damper)}}}\n"
            f"  mast_stiffness:\n    nominal: 0.0\n    range: [-0.5, 6.0]\n"
            f"    affects: {{plant.A: {mat(stiff)}}}\n"
            "requirements:\n  robust: {stable: true, min_decay_rate: 0.01}\n")


def _timed(fn):
    t0 = time.perf_counter()
    out = fn()
    return time.perf_counter() - t0, out


def grid_search(box, target: float, alpha: float) -> tuple[float, int]:
    """The plain grid: worst decay-rate margin over N×N points, N doubled until within 1e-6
    (relative) of ``target``; returns (margin, N)."""
    import numpy as np

    n = 9
    while True:
        worst = np.inf
        for p1 in np.linspace(box.low[0], box.high[0], n):
            for p2 in np.linspace(box.low[1], box.high[1], n):
                lam = np.linalg.eigvals(box.build((float(p1), float(p2)))[0])
                worst = min(worst, float(-lam.real.max()) - alpha)
        if abs(worst - target) <= 1e-6 * max(abs(target), 1e-12) or n > 1025:
            return worst, n
        n = 2 * n - 1


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)
    import eigengate as eg
    from eigengate.load.loader import load_models

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "mast.yaml"
        path.write_text(model_text(), encoding="utf-8")
        (model,) = load_models(path, root=tmp)
    eg.check_model(model)  # warm the imports
    times, ratios = [], []
    for _ in range(args.repeat):
        t_check, result = _timed(lambda: eg.check_model(model))
        (v,) = [v for v in result.verdicts if v.rule == "EG113"]
        # the figure is the decay-rate margin (the smaller of the two: stable's is 0.01 more)
        t_grid, (g, n) = _timed(lambda: grid_search(model.parameters, v.figure.value, 0.01))
        times.append(t_check)
        ratios.append(t_grid / t_check)
    print(f"robust check, 2 parameters, 20 states: median {statistics.median(times):.2f} s "
          f"(range {min(times):.2f}–{max(times):.2f}, {args.repeat} rounds); target ≤ 5 s "
          f"{'met' if statistics.median(times) <= 5 else 'NOT met'}")
    print(f"  verdict: {'pass' if v.passed else 'FAIL'} ({v.decided_by}); worst margin "
          f"{v.figure.value:.9g} {v.figure.unit} at {v.figure.at_label} = "
          f"{', '.join(f'{x:.6g}' for x in v.figure.at)}")
    print(f"plain grid of the same accuracy ({n}×{n} points, worst margin {g:.9g}) / check: "
          f"median {statistics.median(ratios):.2f}× (range {min(ratios):.2f}–"
          f"{max(ratios):.2f})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
