"""Sparse benchmark: the sparse modal search on large generated models (issue 15).

1. Time: eigengate's sparse search (``eigengate.analyse_sparse`` with the targets of
   ``stable: true`` and ``min_damping: 0.05``: rightmost and least damped modes, residual
   bounds, participation factors, coverage) on the 2-D heat equation (five-point Laplacian
   on a √n × √n grid, invented data) against a bare ``scipy.sparse.linalg.eigs(A, k=6,
   sigma=0)`` on the same matrix, both sides back to back in each round. Target: ≤ 3×.
2. Memory: the peak resident memory (VmHWM) of a fresh process that builds the model and runs
   the search, against the same for the bare ``eigs``. Target: ≤ 1 GB for 10⁵ states.
3. Scale: one run at 10⁶ states (``--million``). Target: ≤ 2 minutes.
4. Second order (``--lattice``): a 2-D mass–spring lattice ``M q'' + D q' + K q = 0`` of n/2
   masses (springs to the four neighbours and to the frame at the edges, masses 1–2,
   Rayleigh damping D = 0.002·M + 0.002·K; invented data) given as ``from_second_order``
   (sparse companion form, never dense), ``stable: true`` and ``min_damping: 0.0015`` with
   the structural certificates (inertia counts of M, D, K; the proportional-damping bound
   ζ ≥ min α/(2ω) + βω/2, here √(αβ) = 0.002, which is the lattice's true smallest damping
   ratio: ``min_damping: 0.05`` fails on it, near ω = 1), against a bare ``eigs(A, k=6, M=E, sigma=0)`` on the same
   companion pencil; time ratio and peak memory as in (1) and (2).

The figure of (1) is the median of the per-round ratios (with their range), so a machine
whose speed drifts slows both sides alike. Run:
``python benchmarks/bench_sparse.py [--states 100000] [--repeat 5] [--million]``.
"""

from __future__ import annotations

import argparse
import math
import statistics
import subprocess
import sys
import time


def heat(n: int):
    """Five-point Laplacian on an m×m grid (m = ⌊√n⌋), scaled by (m+1)²: symmetric, stable."""
    import scipy.sparse as sp

    m = int(math.isqrt(n))
    t = sp.diags([1.0, -2.0, 1.0], [-1, 0, 1], shape=(m, m))
    eye = sp.identity(m)
    return ((sp.kron(t, eye) + sp.kron(eye, t)) * float((m + 1) ** 2)).tocsr()


def lattice(n: int):
    """(M, D, K) of a 2-D mass–spring lattice of about n/2 masses."""
    import numpy as np
    import scipy.sparse as sp

    m = int(math.isqrt(n // 2))
    t = sp.diags([-1.0, 2.0, -1.0], [-1, 0, 1], shape=(m, m))
    eye = sp.identity(m)
    K = (sp.kron(t, eye) + sp.kron(eye, t)).tocsr()
    M = sp.diags(np.linspace(1.0, 2.0, m * m)).tocsr()
    D = (0.002 * M + 0.002 * K).tocsr()
    return M, D, K


def lattice_model(n: int):
    from eigengate.model.second_order import from_second_order

    M, D, K = lattice(n)
    return from_second_order(M, K, D, sparse=True)


def ours_so(model) -> object:
    from eigengate.analysis.sparse_modes import Target, analyse_sparse

    return analyse_sparse(model, [Target("right", 0.0), Target("sector", 0.0015)])


def bare_so(model) -> object:
    from scipy.sparse.linalg import eigs

    return eigs(model.A, k=6, M=model.E, sigma=0)


def ours(A) -> object:
    from eigengate.analysis.sparse_modes import Target, analyse_sparse
    from eigengate.model.core import from_arrays

    model = from_arrays(A, sparse=True)
    return analyse_sparse(model, [Target("right", 0.0), Target("sector", 0.05)])


def bare(A) -> object:
    from scipy.sparse.linalg import eigs

    return eigs(A, k=6, sigma=0)


def _timed(fn, *args) -> float:
    t0 = time.perf_counter()
    fn(*args)
    return time.perf_counter() - t0


def _rounds(mine, theirs, arg, repeat: int):
    """Both sides back to back in each round: (median ratio, ratios, our times, bare times)."""
    ratios, t_ours, t_bare = [], [], []
    for _ in range(repeat):
        a = _timed(mine, arg)
        b = _timed(theirs, arg)
        t_ours.append(a)
        t_bare.append(b)
        ratios.append(a / b)
    return statistics.median(ratios), ratios, t_ours, t_bare


_CHILD = """
import sys
sys.path[:0] = [{bench!r}]
import bench_sparse as b
A = b.{build}({n})
b.{side}(A)
print([l for l in open('/proc/self/status') if l.startswith('VmHWM')][0].split()[1])
"""


def peak_kb(side: str, n: int, build: str = "heat") -> int:
    """VmHWM (kB) of a fresh process that builds the model and runs ``side``."""
    import os

    code = _CHILD.format(bench=os.path.dirname(os.path.abspath(__file__)), n=n,
                         side=side, build=build)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    return int(out.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--states", type=int, default=100_000)
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--million", action="store_true", help="also one 10⁶-state run")
    parser.add_argument("--lattice", action="store_true",
                        help="the second-order mass-spring lattice instead of the heat equation")
    args = parser.parse_args()
    if args.lattice:
        return second_order(args.states, args.repeat)
    A = heat(args.states)
    n = A.shape[0]
    med, ratios, t_ours, t_bare = _rounds(ours, bare, A, args.repeat)
    print(f"sparse search vs eigs(k=6, sigma=0), n = {n}: median {med:.3f}× (range "
          f"{min(ratios):.3f}–{max(ratios):.3f}, {len(ratios)} rounds; ours "
          f"{statistics.median(t_ours):.2f} s, bare {statistics.median(t_bare):.2f} s); "
          f"target ≤ 3×: {'met' if med <= 3.0 else 'NOT met'}")
    spectrum = ours(A)
    print(f"  {spectrum.search.coverage()}")
    print(f"  rightmost {spectrum.modes[0].describe()} ± {spectrum.modes[0].uncertainty:.3g}")
    mine, theirs = peak_kb("ours", n), peak_kb("bare", n)
    print(f"peak memory (VmHWM), n = {n}: ours {mine / 1024:.0f} MB, bare eigs "
          f"{theirs / 1024:.0f} MB; target ≤ 1024 MB: {'met' if mine <= 1 << 20 else 'NOT met'}")
    if args.million:
        big = heat(1_000_000)
        seconds = _timed(ours, big)
        print(f"n = {big.shape[0]}: {seconds:.1f} s; target ≤ 120 s: "
              f"{'met' if seconds <= 120 else 'NOT met'}")


def second_order(states: int, repeat: int) -> None:
    model = lattice_model(states)
    n = model.n_states
    med, ratios, t_ours, t_bare = _rounds(ours_so, bare_so, model, repeat)
    print(f"second-order lattice, sparse search + certificate vs eigs(A, k=6, M=E, sigma=0), "
          f"n = {n}: median {med:.3f}× (range {min(ratios):.3f}–{max(ratios):.3f}, "
          f"{len(ratios)} rounds; ours {statistics.median(t_ours):.2f} s, bare "
          f"{statistics.median(t_bare):.2f} s); target ≤ 3×: {'met' if med <= 3.0 else 'NOT met'}")
    spectrum = ours_so(model)
    print(f"  {spectrum.search.coverage()}")
    print(f"  proofs: {[t.describe() for t, _ in spectrum.search.proofs]}")
    print(f"  rightmost {spectrum.modes[0].describe()} ± {spectrum.modes[0].uncertainty:.3g}")
    mine, theirs = peak_kb("ours_so", states, "lattice_model"), \
        peak_kb("bare_so", states, "lattice_model")
    print(f"peak memory (VmHWM), n = {n}: ours {mine / 1024:.0f} MB, bare eigs "
          f"{theirs / 1024:.0f} MB; target ≤ 1024 MB: {'met' if mine <= 1 << 20 else 'NOT met'}")


if __name__ == "__main__":
    main()
