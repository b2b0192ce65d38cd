"""Bounds benchmark: the cost of residual-based bounds and of certified enclosures.

1. Dense: full modal analysis (``eigengate.analyse``: balancing, eigenpairs, residual-based
   bounds, clusters, participation factors) of one dense 1,000-state model against
   ``scipy.linalg.eig(left=True, right=True)`` on the same matrix. Target: ≤ 1.3×. Enclosures
   are off at this order (``bounds.ENCLOSE_LIMIT`` = 400).
2. Enclosures: the extra cost of ``bounds.enclose`` (and of the residual it reuses) at
   n = 100, 200, 400, as a fraction of the same analysis, and the decided fraction of
   thresholds 1e-8 relative from the true spectral abscissa and minimum damping of a
   lightly damped structure (ζ = 0.005–0.01, block-diagonal modal form rotated by a random
   orthogonal matrix; invented data) at n = 100, 400, 1000, 1500.

Each side runs once per round, back to back, for ``--repeat`` rounds; the figure is the
median of the per-round ratios (with their range), so a machine whose speed drifts slows
both sides of a ratio alike. Run: ``python benchmarks/bench_bounds.py [--repeat 5]``.
"""

from __future__ import annotations

import argparse
import math
import statistics
import time


def dense(n: int, seed: int = 11):
    import numpy as np

    rng = np.random.default_rng(seed)
    return rng.normal(size=(n, n)) / np.sqrt(n) - 1.2 * np.eye(n)


def flexible(n: int, seed: int = 5):
    """Lightly damped structure: blocks [[-ζω, ωd], [-ωd, -ζω]], rotated; returns the matrix
    and the blocks' eigenvalues -ζω + iωd."""
    import numpy as np

    rng = np.random.default_rng(seed)
    k = n // 2
    w = np.sort(rng.uniform(1.0, 30.0, k))
    z = rng.uniform(0.005, 0.01, k)
    B = np.zeros((n, n))
    for i in range(k):
        a, b = -z[i] * w[i], w[i] * math.sqrt(1 - z[i] ** 2)
        B[2 * i:2 * i + 2, 2 * i:2 * i + 2] = [[a, b], [-b, a]]
    Q, R = np.linalg.qr(rng.normal(size=(n, n)))
    Q = Q * np.sign(np.diag(R))
    return Q @ B @ Q.T, -z * w + 1j * w * np.sqrt(1 - z ** 2)


def _timed(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def _ratio_line(label: str, ratios: list[float], target: float | None = None) -> str:
    med = statistics.median(ratios)
    text = f"{label}: median {med:.3f}× (range {min(ratios):.3f}–{max(ratios):.3f}, " \
           f"{len(ratios)} rounds)"
    return text + (f"; target ≤ {target}× {'met' if med <= target else 'NOT met'}"
                   if target else "")


def bench_dense(n: int, repeat: int) -> str:
    import scipy.linalg as la

    import eigengate as eg

    A = dense(n)
    model = eg.from_arrays(A)
    eg.analyse(model)  # warm the imports and the BLAS
    ratios = []
    for _ in range(repeat):
        ref = _timed(lambda: la.eig(A, left=True, right=True))
        ours = _timed(lambda: eg.analyse(model))
        ratios.append(ours / ref)
    return _ratio_line(f"dense n={n}: analyse / scipy.linalg.eig(left, right)", ratios, 1.3)


def bench_enclosures(sizes: list[int], repeat: int) -> list[str]:
    import numpy as np
    import scipy.linalg as la

    from eigengate.analysis import bounds

    out = []
    for n in sizes:
        A, _ = flexible(n)
        lam, vl, vr = la.eig(A, left=True, right=True)
        shares, extra = [], []
        for _ in range(repeat):
            t_eig = _timed(lambda: la.eig(A, left=True, right=True))
            R = A @ vr - vr * lam
            t_enc = _timed(lambda: bounds.enclose(A, lam, vr, vl, R))
            shares.append(t_enc / t_eig)
            extra.append(t_enc)
        rho = bounds.enclose(A, lam, vr, vl, R)
        radius = "none" if rho is None else f"max radius {float(np.max(rho)):.2e}"
        out.append(_ratio_line(f"enclosure n={n}: enclose / eig", shares)
                   + f"; {statistics.median(extra) * 1e3:.1f} ms; {radius}")
    return out


def bench_decided(sizes: list[int]) -> list[str]:
    import numpy as np

    import eigengate as eg
    from eigengate.rules.requirements import MinDamping, MinDecayRate, evaluate

    out = []
    for n in sizes:
        A, ev = flexible(n)
        sp = eg.analyse(eg.from_arrays(A))
        abscissa = float(ev.real.max())
        zmin = float(np.min(-ev.real / np.abs(ev)))
        kinds = []
        for rel in (-1e-8, 1e-8):
            for req, truth in ((MinDecayRate(-abscissa * (1 + rel)), -abscissa >= -abscissa * (1 + rel)),
                               (MinDamping(zmin * (1 + rel)), zmin >= zmin * (1 + rel))):
                v = evaluate(sp, [req])[0]
                wrong = v.decided_by != "uncertain" and v.passed != truth
                kinds.append(v.decided_by + (" WRONG" if wrong else ""))
        out.append(f"flexible n={n}: thresholds 1e-8 relative: {', '.join(kinds)}")
    return out


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--repeat", type=int, default=5)
    p.add_argument("--dense", type=int, default=1000)
    args = p.parse_args(argv)
    print(bench_dense(args.dense, args.repeat))
    for line in bench_enclosures([100, 200, 400], args.repeat):
        print(line)
    for line in bench_decided([100, 400, 1000, 1500]):
        print(line)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
