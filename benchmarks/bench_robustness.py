"""Robustness benchmark: stability radius and pseudospectral abscissa of a dense 200-state
model against a plain grid search of the same accuracy, side by side in the same rounds.

The model: ``N/√n + 0.6·triu(N')/√n − shift·I`` (fixed seed, shifted to spectral abscissa
−0.1; moderately non-normal: ‖AᵀA − AAᵀ‖F/‖A‖F² about 0.3; invented data).

1. Stability radius ``min_ω σ_min(A − iωI)``: ``robustness.stability_radius`` (level sets,
   rtol 1e-9, and rtol = the grid's accuracy) against a uniform ω grid over [0, 1.2·max|Im λ|]
   whose spacing ``h = r₀√(8·tol)`` (r₀ = min |Re λ| ≥ r) makes the quadratic error below
   tol·r for a minimum of curvature ≈ 1/r. Target: ours ≤ 2 s.
2. Pseudospectral abscissa (ε = 0.05): ``robustness.pseudospectral_abscissa`` (criss-cross)
   against a grid of horizontal lines (spacing ``√(8·tol·ε·|α_ε|)``, for a boundary of
   curvature ≈ 1/ε), each searched from the right: steps of ``σ_min − ε`` (σ_min is
   1-Lipschitz, so no step enters the pseudospectrum), then Brent to 1e-12. Target: ≤ 2 s.

Both grids use the same Schur-form σ_min evaluator as ours, so the ratio measures the search,
not the linear algebra. Each side runs once per round, back to back, for ``--repeat``
rounds; the figure is the median of the per-round ratios (with their range), and each line
reports the grid's deviation from our bracket, to show the accuracy it reached.
Run: ``python benchmarks/bench_robustness.py [--repeat 3] [--tol 1e-3]``.
"""

from __future__ import annotations

import argparse
import math
import statistics
import time


def model(n: int = 200, seed: int = 17):
    import numpy as np

    rng = np.random.default_rng(seed)
    A = rng.normal(size=(n, n)) / math.sqrt(n) + 0.6 * np.triu(rng.normal(size=(n, n)), 1) \
        / math.sqrt(n)
    return A - (np.linalg.eigvals(A).real.max() + 0.1) * np.eye(n)


def _timed(fn):
    t0 = time.perf_counter()
    out = fn()
    return time.perf_counter() - t0, out


def grid_radius(A, tol: float) -> tuple[float, int]:
    import numpy as np

    from eigengate.analysis.robustness import _Triangular

    lam = np.linalg.eigvals(A)
    r0 = float(np.min(np.abs(lam.real)))
    h = r0 * math.sqrt(8.0 * tol)
    ws = np.arange(0.0, 1.2 * float(np.max(np.abs(lam.imag))) + h, h)
    tri = _Triangular(A)
    return min(tri.smin(complex(0.0, w)) for w in ws), len(ws)


def grid_abscissa(A, eps: float, tol: float) -> tuple[float, int]:
    import numpy as np
    from scipy.optimize import brentq

    from eigengate.analysis.robustness import _Triangular

    lam = np.linalg.eigvals(A)
    tri = _Triangular(A)
    far = float(np.linalg.eigvalsh((A + A.T) / 2.0)[-1]) + 2.0 * eps
    guess = abs(float(lam.real.max())) + eps
    h = math.sqrt(8.0 * tol * eps * guess)
    best, evals = -math.inf, 0
    for y in np.arange(0.0, float(np.max(np.abs(lam.imag))) + 2 * eps + h, h):
        x, s = far, tri.smin(complex(far, y))
        evals += 1
        while s > eps and x > float(lam.real.min()) - 2 * eps:
            x -= max(s - eps, 1e-3 * eps)
            s = tri.smin(complex(x, y))
            evals += 1
        if s > eps:
            continue
        def g(t, y=y):
            return tri.smin(complex(t, y)) - eps
        step = max(tri.smin(complex(x, y)), eps)
        hi = x + step + eps
        if g(hi) > 0:
            best = max(best, brentq(g, x, hi, xtol=1e-12))
    return best, evals


def _line(label: str, ours: list[float], theirs: list[float], extra: str) -> str:
    ratios = [a / b for a, b in zip(ours, theirs)]
    med = statistics.median(ratios)
    return (f"{label}: ours {statistics.median(ours):.2f} s, grid {statistics.median(theirs):.2f} "
            f"s; ours/grid median {med:.3f}× (range {min(ratios):.3f}–{max(ratios):.3f}, "
            f"{len(ratios)} rounds); {extra}")


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--repeat", type=int, default=3)
    p.add_argument("--tol", type=float, default=1e-3)
    p.add_argument("--n", type=int, default=200)
    args = p.parse_args(argv)
    from eigengate.analysis import pseudospectra as ps
    from eigengate.analysis import robustness as rb

    A = model(args.n)
    eps = 0.05
    rb.stability_radius(A[:20, :20] - 5 * __import__("numpy").eye(20))  # warm imports, BLAS
    rows: dict[str, list[float]] = {k: [] for k in ("r", "r_tol", "r_grid", "p", "p_tol",
                                                    "p_grid")}
    for _ in range(args.repeat):
        t, rad = _timed(lambda: rb.stability_radius(A))
        rows["r"].append(t)
        rows["r_tol"].append(_timed(lambda: rb.stability_radius(A, rtol=args.tol))[0])
        t, (g_r, n_r) = _timed(lambda: grid_radius(A, args.tol))
        rows["r_grid"].append(t)
        t, psa = _timed(lambda: ps.pseudospectral_abscissa(A, eps))
        rows["p"].append(t)
        rows["p_tol"].append(_timed(lambda: ps.pseudospectral_abscissa(A, eps,
                                                                       rtol=args.tol))[0])
        t, (g_p, n_p) = _timed(lambda: grid_abscissa(A, eps, args.tol))
        rows["p_grid"].append(t)
    print(f"model n={args.n}; grid accuracy target tol={args.tol:g}")
    dev_r = (g_r - rad.value) / rad.value
    print(_line("stability radius (rtol 1e-9)", rows["r"], rows["r_grid"],
                f"r = {rad.value:.10g} in [{rad.lower:.10g}, {rad.upper:.10g}], "
                f"{rad.iterations} sweeps; grid {n_r} points, relative deviation {dev_r:.1e}; "
                f"target ≤ 2 s {'met' if statistics.median(rows['r']) <= 2 else 'NOT met'}"))
    print(_line(f"stability radius (rtol {args.tol:g})", rows["r_tol"], rows["r_grid"], ""))
    dev_p = (g_p - psa.value) / abs(psa.value)
    print(_line(f"pseudospectral abscissa ε={eps} (rtol 1e-9)", rows["p"], rows["p_grid"],
                f"α_ε = {psa.value:.10g} in [{psa.lower:.10g}, {psa.upper:.10g}], "
                f"{psa.iterations} sweeps; grid {n_p} σ_min evaluations, relative deviation "
                f"{dev_p:.1e}; target ≤ 2 s "
                f"{'met' if statistics.median(rows['p']) <= 2 else 'NOT met'}"))
    print(_line(f"pseudospectral abscissa (rtol {args.tol:g})", rows["p_tol"], rows["p_grid"],
                ""))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
