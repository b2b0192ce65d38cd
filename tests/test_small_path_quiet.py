"""The small modal path's shortcuts give the general path's results, bit for bit.

Beyond ``tests/test_modes_small_path.py`` (random matrices of many kinds), this covers the
cases the later shortcuts of ``analysis.small_modes`` and ``analysis.small_lapack`` branch
on: nearly repeated eigenvalues (clusters that do or do not form), defective complex pairs,
complex pairs that follow each other or are interleaved with real eigenvalues (slices or
index arrays for the pair columns), and the bounds computed without ``numpy.errstate``
(below the overflow limits) or under it (above them). The reference is the general path:
scipy's ``matrix_balance`` and ``eig``, ``bounds.estimate``, ``bounds.enclose`` and the numpy
clustering sweep (``modes.small_lapack`` patched to refuse every matrix).
"""

import numpy as np
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from eigengate.analysis import modes, small_modes

from test_modes_small_path import assert_same_as_general


def _rotation(re, im):
    return np.array([[re, im], [-im, re]])


def _build(args):
    n, seed, kind = args
    rng = np.random.default_rng(seed)
    q = rng.normal(size=(n, n)) + 3.0 * np.eye(n)  # well enough conditioned
    if kind == 0:  # nearly repeated real eigenvalues: relative gaps from 1e-15 to 1e-5
        base = rng.choice([-2.0, -0.5, 0.5])
        gaps = 10.0 ** rng.uniform(-15, -5, size=n) * rng.choice([0.0, 1.0], size=n)
        return q @ np.diag(base * (1.0 + gaps)) @ np.linalg.inv(q)
    if kind == 1:  # defective complex pairs: rotation blocks coupled in a chain
        a = np.zeros((n, n))
        re, im = rng.choice([-1.0, 0.0, -0.25]), rng.choice([0.5, 2.0])
        for i in range(0, n - 1, 2):
            a[i:i + 2, i:i + 2] = _rotation(re, im)
            if i + 3 < n:
                a[i:i + 2, i + 2:i + 4] = np.eye(2)
        if n % 2:
            a[-1, -1] = re
        return a
    if kind == 2:  # complex pairs interleaved with real eigenvalues, nearly repeated pairs
        blocks, i = [], 0
        while i < n:
            if i + 1 < n and rng.random() < 0.6:
                im = rng.choice([1.0, 1.0 + 1e-9, 1.0 + 1e-6, 3.0])
                blocks.append(_rotation(rng.choice([-1.0, -1.0 + 1e-12, 0.5]), im))
                i += 2
            else:
                blocks.append(np.array([[rng.choice([-3.0, -1.0, 0.0])]]))
                i += 1
        a = np.zeros((n, n))
        k = 0
        for b in blocks:
            a[k:k + len(b), k:k + len(b)] = b
            k += len(b)
        p = rng.permutation(n)
        return (q @ a @ np.linalg.inv(q))[np.ix_(p, p)]
    # kind 3: scales across the limit of the bounds without numpy.errstate
    return rng.normal(size=(n, n)) * 10.0 ** float(rng.choice([90.0, 99.9, 100.0, 110.0]))


_cases = st.tuples(st.integers(1, 14) | st.integers(15, modes.SMALL_ORDER),
                   st.integers(0, 2**32 - 1), st.integers(0, 3)).map(_build)


@settings(max_examples=200, deadline=None)
@given(_cases)
def test_small_path_shortcuts_match_the_general_path(a):
    assert_same_as_general(a)


@settings(max_examples=100, deadline=None)
@given(st.tuples(st.integers(1, modes.SMALL_ORDER), st.integers(0, 2**32 - 1),
                 st.integers(0, 2)).map(_build))
def test_bounds_without_errstate_raise_nothing_below_the_limits(a):
    # the claim that lets small_modes.bounds skip numpy.errstate: below its limits no
    # division by zero, overflow or invalid operation occurs (numpy raising proves it)
    small = modes.small_lapack(a)
    lam, vr, vl, both, norm, _, work, absw = small_modes.decompose(a, small)
    dots = np.abs(np.einsum("ij,ij->j", vl.conj(), vr))
    # above the limits bounds computes under numpy.errstate: nothing to show there
    assume(norm < small_modes._QUIET_NORM and dots.min() > small_modes._QUIET_DOT)
    base = modes.BOUND_FACTOR * len(a) * 2.0 ** -52 * norm
    with np.errstate(divide="raise", over="raise", invalid="raise"):
        small_modes.bounds(work, absw, lam, vr, vl, both, norm, base)
