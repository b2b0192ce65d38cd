"""The batched frequency response and the batched searches of eigengate.analysis.freqresp.

Sources beside each check:
- the response of a block of frequencies against the point-by-point route it replaced (one
  ``scipy.linalg.solve_triangular`` per frequency on the same Schur or QZ form) and against
  a dense ``numpy.linalg.solve`` of ``(λE − A) x = B`` at each frequency (reference
  libraries), to round-off;
- the root search against ``scipy.optimize.brentq`` and closed forms (by hand), the peak
  search against ``scipy.optimize.minimize_scalar`` and closed forms;
- margins of random PI loops against python-control's ``stability_margins`` (reference
  library).
"""

import math

import numpy as np
import pytest
from scipy.linalg import solve_triangular
from scipy.optimize import brentq, minimize_scalar

from eigengate.analysis import freqresp
from eigengate.analysis.freqresp import Resolvent, bracketed_roots, local_maxima
from eigengate.analysis.margins import LoopTransfer, siso_margins, unstable_poles

EPS = np.finfo(float).eps


def loop(a, b, c, d, dt=None, e=None):
    f = lambda x: np.atleast_2d(np.asarray(x, float))  # noqa: E731
    return LoopTransfer(f(a), f(b), f(c), f(d), None if e is None else f(e), dt,
                        tuple(f"u{i + 1}" for i in range(np.atleast_2d(d).shape[0])))


def pointwise(res: Resolvent, ws):
    """The route replaced: one triangular solve per frequency on the same reduction."""
    out = []
    n = res.T.shape[0]
    eye = np.eye(n) if res.S is None else res.S
    for w in ws:
        lam = complex(0.0, w) if res.dt is None else complex(np.exp(1j * w * res.dt))
        x = solve_triangular(lam * eye - res.T, res.Bt, check_finite=False)
        out.append(res.Ct @ x + res.D)
    return np.array(out)


def dense(lt: LoopTransfer, ws):
    """No reduction at all: a dense solve of (λE − A) x = B at each frequency (numpy)."""
    e = np.eye(lt.A.shape[0]) if lt.E is None else lt.E
    lam = 1j * ws if lt.sample_period is None else np.exp(1j * ws * lt.sample_period)
    x = np.linalg.solve(lam[:, None, None] * e - lt.A, np.broadcast_to(lt.B, (ws.size,) +
                                                                          lt.B.shape))
    return lt.C @ x + lt.D


def random_loop(rng, n, p=1, m=1, dt=None, descriptor=False):
    a = rng.normal(size=(n, n)) / math.sqrt(n) - 1.5 * np.eye(n)
    if dt is not None:
        a = a / (2.0 * np.max(np.abs(np.linalg.eigvals(a))))  # inside the unit circle
    e = np.diag(rng.uniform(0.5, 2.0, n)) + 0.1 * np.triu(rng.normal(size=(n, n)), 1) \
        if descriptor else None
    return loop(a, rng.normal(size=(n, m)), rng.normal(size=(p, n)),
                rng.normal(size=(p, m)), dt, e)


def close(got, want):
    """Equal to round-off: within a few hundred ulps of the response's size."""
    scale = np.max(np.abs(want))
    return np.max(np.abs(got - want)) <= 500 * EPS * scale


# ------------------------------------------------------------------ the batched response

@pytest.mark.parametrize("n, p, m, dt, descriptor", [
    (1, 1, 1, None, False), (3, 1, 1, None, False), (7, 1, 1, 0.05, False),
    (5, 2, 2, None, False), (4, 2, 3, 0.1, False), (6, 1, 1, None, True),
    (5, 2, 2, None, True), (30, 1, 1, None, False), (25, 2, 2, 0.02, True)])
def test_block_response_equals_the_point_by_point_route(n, p, m, dt, descriptor):
    # n = 25, 30 take the BLAS row products (above freqresp.SMALL), the others the sums
    rng = np.random.default_rng(1000 + 17 * n + p + 3 * m)
    lt = random_loop(rng, n, p, m, dt, descriptor)
    res = Resolvent(lt)
    ws = np.geomspace(1e-3, (math.pi / dt) if dt else 1e3, 257)
    got = res(ws)
    assert got.shape == (ws.size, p, m)
    assert close(got, pointwise(res, ws))  # scipy solve_triangular, frequency by frequency
    assert close(got, dense(lt, ws))  # numpy dense solves, no reduction


def test_blocks_split_by_the_workspace_limit_give_the_same_response(monkeypatch):
    rng = np.random.default_rng(5)
    lt = random_loop(rng, 6, 2, 2)
    res = Resolvent(lt)
    ws = np.geomspace(0.01, 100.0, 101)
    whole = res(ws)
    monkeypatch.setattr(freqresp, "CHUNK", 6 * 2 * 7)  # blocks of 7 frequencies
    assert np.array_equal(res(ws), whole)  # each frequency's solve is independent
    assert np.array_equal(res(ws[::-1]), whole[::-1])  # and so is the order


def test_poles_on_the_axis_give_nan_only_at_their_frequencies():
    # L = 1/(s² + 4) + 1/s (by hand): poles at ω = 0 and ω = 2
    a = np.array([[0.0, 1.0, 0.0], [-4.0, 0.0, 0.0], [0.0, 0.0, 0.0]])
    lt = loop(a, [[0.0], [1.0], [1.0]], [[1.0, 0.0, 1.0]], [[0.0]])
    res = Resolvent(lt)
    ws = np.array([0.0, 0.5, 2.0, 3.0])
    h = res(ws)[:, 0, 0]
    assert np.isnan(h[0]) and np.isnan(h[2])
    s = 1j * ws[[1, 3]]
    assert h[[1, 3]] == pytest.approx(1 / (s * s + 4) + 1 / s, rel=1e-13)
    assert res.siso([3.0])[0] == res.scalar(3.0) == h[3]


def test_continuous_lambdas_are_exactly_on_the_axis():
    res = Resolvent(loop([[-1.0]], [[1.0]], [[1.0]], [[0.0]]))
    lam = res.lambdas(np.array([1e-300, 0.3, 7.0, 1e300]))
    assert np.all(lam.real == 0.0) and list(lam.imag) == [1e-300, 0.3, 7.0, 1e300]


def test_eigenvalues_of_the_reduced_form():
    # diag of the Schur form: the open-loop poles (numpy eigvals as reference); QZ: α/β
    rng = np.random.default_rng(9)
    lt = random_loop(rng, 5)
    got = np.sort_complex(Resolvent(lt).eigenvalues())
    assert got == pytest.approx(np.sort_complex(np.linalg.eigvals(lt.A)), rel=1e-12)
    d = loop(np.diag([-1.0, -3.0]), [[1.0], [1.0]], [[1.0, 1.0]], [[0.0]],
             e=np.diag([2.0, 0.0]))  # one infinite eigenvalue (β = 0): left out
    assert Resolvent(d).eigenvalues() == pytest.approx([-0.5])


# ------------------------------------------------------------------ roots in batches

def test_bracketed_roots_match_brent_on_many_brackets_at_once():
    # increasing curves k·ln(x/r) + 0.2·tanh(x − r), one per bracket, each with its root at r
    rng = np.random.default_rng(3)
    r = rng.uniform(0.5, 50.0, 40)
    k = rng.integers(1, 4, 40)
    g = lambda x, i: k[i] * np.log(x / r[i]) + 0.2 * np.tanh(x - r[i])  # noqa: E731
    a, b = r * rng.uniform(0.9, 0.999, 40), r * rng.uniform(1.001, 1.1, 40)
    calls = []

    def f(x, rows):
        calls.append(rows.size)
        return g(x, rows)

    got = bracketed_roots(f, a, b, g(a, np.arange(40)), g(b, np.arange(40)), xtol=1e-14 * a)
    for j in range(40):
        want = brentq(lambda x: g(x, j), a[j], b[j], xtol=1e-14 * a[j], rtol=1e-13)
        assert got[j] == pytest.approx(want, rel=2e-13)  # scipy brentq
    assert got == pytest.approx(r, rel=2e-13)  # the roots are r (by construction)
    assert len(calls) <= 12 and calls[0] == 40  # all brackets in each call, few calls


def test_bracketed_roots_exact_zero_and_bisection_fallback():
    # x = 2 is hit exactly by the first false-position step of the line f = x − 2 on [1, 3]
    line = bracketed_roots(lambda x, rows: x - 2.0, [1.0], [3.0], [-1.0], [1.0], xtol=1e-14)
    assert line[0] == 2.0
    # a flat-then-steep function stalls plain false position (one end never moves); the
    # bisection fallback keeps the bracket shrinking: root of x^20 − 0.5 on [0, 1.5] (by hand)
    steps = []

    def f(x, rows):
        steps.append(float(x[0]))
        return x ** 20 - 0.5

    root = bracketed_roots(f, [0.0], [1.5], [-0.5], [1.5 ** 20 - 0.5], xtol=1e-15)
    assert root[0] == pytest.approx(0.5 ** (1 / 20), rel=1e-13)
    assert len(steps) < 80


def test_a_nan_inside_a_bracket_does_not_stall_it():
    # NaN below 1.5 (a pole, say): the bracket's lower end moves past it; the root of
    # x − 2 is still found (by hand)
    f = lambda x, rows: np.where(x < 1.5, math.nan, x - 2.0)  # noqa: E731
    root = bracketed_roots(f, [1.0], [3.0], [-1.0], [1.0], xtol=1e-14)
    assert root[0] == pytest.approx(2.0, rel=1e-13)


# ------------------------------------------------------------------ peaks in batches

def test_local_maxima_match_a_bounded_search_on_many_intervals():
    rng = np.random.default_rng(4)
    c = rng.uniform(1.0, 10.0, 12)
    wd = rng.uniform(0.05, 0.3, 12)
    g = lambda x, i: 1.0 / (1.0 + ((x - c[i]) / wd[i]) ** 2) + 0.01 * x  # noqa: E731
    a, b = c - rng.uniform(0.1, 0.5, 12), c + rng.uniform(0.1, 0.5, 12)

    def f(x, rows):
        return g(x, rows[:, None] if x.ndim == 2 else rows)

    xs, vs = local_maxima(f, a, b)
    for j in range(12):
        r = minimize_scalar(lambda x: -g(x, j), bounds=(a[j], b[j]), method="bounded",
                            options={"xatol": 1e-12 * b[j]})  # scipy
        assert vs[j] == pytest.approx(-r.fun, rel=1e-13)
        assert vs[j] >= -r.fun * (1 - 1e-15)
        # the maximum of 1/(1 + u²) + 0.01x: 2u/(1+u²)² = 0.01·wd (by hand, solved by brentq)
        u = brentq(lambda u: 2 * u / (1 + u * u) ** 2 - 0.01 * wd[j], 0.0, 0.5)
        assert xs[j] == pytest.approx(c[j] + u * wd[j], rel=1e-9)


def test_local_maxima_counts_nan_as_minus_infinity_and_keeps_the_best_sample():
    # NaN on the left half; a maximum 3 at x = 0.75 on the right (by hand)
    f = lambda x, rows: np.where(x < 0.5, math.nan, 3.0 - (x - 0.75) ** 2)  # noqa: E731
    xs, vs = local_maxima(f, np.array([0.0]), np.array([1.0]))
    assert vs[0] == pytest.approx(3.0, rel=1e-15) and xs[0] == pytest.approx(0.75, abs=1e-7)
    # a kink (no parabola fits): the best sample stays, exactly at the apex 0.5
    kink = lambda x, rows: -np.abs(x - 0.5)  # noqa: E731
    xs, vs = local_maxima(kink, np.array([0.0]), np.array([1.0]))
    assert vs[0] == 0.0 and xs[0] == 0.5


# ------------------------------------------------------------------ margins of PI loops

def pi_loops(count=25, seed=202612):
    """Plants of two to four poles (some lightly damped) under PI controllers (invented)."""
    rng = np.random.default_rng(seed)
    out = []
    while len(out) < count:
        poles = []
        for _ in range(int(rng.integers(1, 3))):
            if rng.random() < 0.5:
                poles.append(-rng.uniform(0.2, 20.0))
            else:
                wn, z = rng.uniform(0.5, 30.0), rng.uniform(0.05, 0.7)
                poles += [complex(-z * wn, wn * math.sqrt(1 - z * z)),
                          complex(-z * wn, -wn * math.sqrt(1 - z * z))]
        if len(poles) < 2:
            poles.append(-rng.uniform(0.2, 20.0))
        den = np.real(np.poly(poles))
        kp = rng.uniform(0.2, 2.0)
        ki = kp * min(abs(p) for p in poles) * rng.uniform(0.05, 0.5)
        num_l = np.polymul([kp, ki], [den[-1] * rng.uniform(0.5, 3.0)])
        den_l = np.polymul([1.0, 0.0], den)
        if np.all(np.roots(np.polyadd(den_l, num_l)).real < 0):  # closed loop stable
            out.append((num_l, den_l))
    return out


@pytest.mark.parametrize("num, den", pi_loops())
def test_pi_loop_margins_equal_python_control(num, den):
    control = pytest.importorskip("control")
    sys = control.ss(control.tf(num, den))
    lt = loop(sys.A, sys.B, sys.C, sys.D)
    assert unstable_poles(lt) == 0  # as chosen (the closed-loop polynomial's roots, numpy)
    ours = siso_margins(lt)
    gm, pm, _sm, wpc, wgc, _ws = control.stability_margins(sys)  # python-control
    assert ours.phase_margin == pytest.approx(pm, abs=1e-6)
    assert ours.phase_margin_frequency == pytest.approx(wgc, rel=1e-8)
    if math.isfinite(gm) and gm < 1e12:
        assert ours.gain_margin == pytest.approx(gm, rel=1e-7)
        assert ours.gain_margin_frequency == pytest.approx(wpc, rel=1e-8)
    else:  # none, or python-control's polynomial artefact far above every pole, where |L|
        # is at rounding level ("GM ≈ 1e15", see test_margins_reference): no crossing there
        assert ours.gain_margin == math.inf and ours.phase_crossovers in ((), (0.0,))
        if math.isfinite(gm):
            ws = np.geomspace(wpc / 10, wpc * 10, 2001)
            assert np.max(np.abs(dense(lt, ws))) < 1e-10  # numpy dense solves


def test_a_caller_that_checked_stability_skips_the_second_decomposition(monkeypatch):
    # the margin requirement checks the model's own spectrum first; loop_margins(stable=True)
    # then does not count the closed-loop poles again, and its margins are the same
    # (Routh on s³ + 3s² + 2s + 1: stable, GM = 6 for K/(s(s+1)(s+2)), by hand)
    from eigengate.analysis import margins
    from eigengate.model import interconnect as ic

    z = np.zeros
    a, b, c, d = (np.asarray(x, float) for x in ic.tf_siso([1.0], [1.0, 3.0, 2.0, 0.0]))
    parts = margins.LoopParts("output_gain", a, b, c, d, None, z((0, 0)), z((0, 1)),
                              z((1, 0)), np.array([[1.0]]), ("u",), ("y",))
    full = margins.loop_margins(parts)
    counted = []
    real = margins.unstable_poles
    monkeypatch.setattr(margins, "unstable_poles", lambda lt, k=1.0: counted.append(k) or
                        real(lt, k))
    quick = margins.loop_margins(parts, stable=True)
    assert 1.0 not in counted  # only the gain-limit probes (k ≠ 1) decomposed a closed loop
    assert quick.channels[0].gain_margin == full.channels[0].gain_margin == \
        pytest.approx(6.0, rel=1e-9)
    assert quick.channels[0].phase_margin == full.channels[0].phase_margin
    assert parts.margins(stable=True) is parts.margins()  # computed once, then kept
