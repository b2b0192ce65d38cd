"""Exact margins of loops with closed-form answers, and the frequency grid's own guarantees.

Written to kill the mutants of analysis/margins.py that survived the other tests
(tests/mutation/run_mutmut.py). References, named beside each check:
- first- and second-order loops solved by hand: the closed loop of ``k·L`` is a polynomial
  whose roots give the gain limits (Routh–Hurwitz for degree 1 and 2: all coefficients of one
  sign; Jury for degree 1: |root| < 1), |L(jω)| = 1 solved for the crossover (common practice);
- frequency responses, crossovers and phase margins from python-control (reference library);
- the sensitivity peak ‖S‖∞ against a dense frequency grid refined locally by
  scipy.optimize.minimize_scalar (reference library);
- the balanced disk margin α = 2 / max_ω |S − T| (Seiler, Packard & Gahinet, IEEE CSM 2020).
"""

from __future__ import annotations

import math

import control
import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from eigengate.analysis.freqresp import crossings, peaks
from eigengate.analysis.margins import (MAX_POINTS, STEP_LOG_GAIN, STEP_PHASE, LoopTransfer,
                                        Resolvent, _grid, siso_margins, unstable_poles)


def _roots(f, w, v, valid):  # the batched root search on one quantity (L = the point itself)
    return crossings(lambda x: x, w, [(f, v, valid)])[0]


def _peak(fun, w, v, at_end):  # the batched peak search on one quantity
    return peaks(lambda x: x, w, [(fun, v, at_end)])[0]


def lt(a, b, c, d, dt=None, e=None):
    f = lambda x: np.atleast_2d(np.asarray(x, float))  # noqa: E731
    return LoopTransfer(f(a), f(b), f(c), f(d), None if e is None else f(e), dt, ("u",))


def tf_lt(num, den, dt=None):
    sys = control.ss(control.tf(num, den, dt if dt else 0))
    return lt(sys.A, sys.B, sys.C, sys.D, dt), sys


def ref_response(sys, w, dt=None):  # python-control's own evaluation
    s = 1j * np.atleast_1d(np.asarray(w, float))
    s = s if dt is None else np.exp(s * dt)
    return np.asarray(sys(s), complex).reshape(-1)


# ------------------------------------------------------------------ frequency response

@pytest.mark.parametrize("dt", [None, 0.1])
def test_resolvent_matches_python_control(dt):
    loop, sys = tf_lt([2.0, 1.0], [1.0, 0.6, 4.0, 1.0], dt)
    res = Resolvent(loop)
    w = np.array([0.01, 0.3, 1.0, 2.0, 7.0, 30.0 if dt is None else 31.4])
    assert res(w)[:, 0, 0] == pytest.approx(ref_response(sys, w, dt), rel=1e-12, abs=1e-14)
    assert res.scalar(1.0) == pytest.approx(ref_response(sys, 1.0, dt)[0], rel=1e-12)


def test_resolvent_of_a_descriptor_loop_and_at_a_pole():
    # E = diag(2, 1): L(s) = C (sE − A)⁻¹ B = 1/(2s + 1) + 1/(s + 3) (by hand)
    loop = lt(np.diag([-1.0, -3.0]), [[1.0], [1.0]], [[1.0, 1.0]], [[0.0]], e=np.diag([2.0, 1.0]))
    res = Resolvent(loop)
    for w in (0.0, 0.5, 4.0):
        s = 1j * w
        assert res.scalar(w) == pytest.approx(1 / (2 * s + 1) + 1 / (s + 3), rel=1e-13)
    integ = Resolvent(lt([[0.0]], [[1.0]], [[1.0]], [[0.0]]))  # 1/s: a pole at ω = 0
    assert math.isnan(integ.scalar(0.0).real) and integ.scalar(2.0) == pytest.approx(-0.5j)
    static = Resolvent(lt(np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), [[0.7]]))
    assert static.scalar(3.0) == 0.7  # no states: L = D


# ------------------------------------------------------------------ closed-form margins

def test_first_order_unstable_plant_lower_gain_margin():
    # L = 2/(s − 1): closed loop s − 1 + 2k, stable iff k > 1/2 (Routh, degree 1).
    # |L(jω)| = 1 at ω = √3; ∠L = −120° there, so PM = 60°, delay margin (π/3)/√3.
    loop, sys = tf_lt([2.0], [1.0, -1.0])
    m = siso_margins(loop)
    assert m.lower_gain_margin == pytest.approx(0.5, rel=1e-12)
    assert m.lower_gain_margin_frequency == 0.0
    assert m.gain_margin == math.inf and m.gain_margin_frequency is None
    assert m.phase_margin == pytest.approx(60.0, abs=1e-9)
    assert m.phase_margin_frequency == pytest.approx(math.sqrt(3.0), rel=1e-10)
    assert m.delay_margin == pytest.approx(math.pi / 3 / math.sqrt(3.0), rel=1e-9)
    assert m.delay_margin_frequency == pytest.approx(math.sqrt(3.0), rel=1e-10)
    assert m.lower_gain_margin_db == pytest.approx(20 * math.log10(0.5), rel=1e-12)
    _gm, pm, _sm, _wpc, wgc, _ws = control.stability_margins(sys)
    assert m.phase_margin == pytest.approx(pm, abs=1e-6)  # python-control
    assert m.phase_margin_frequency == pytest.approx(wgc, rel=1e-8)
    # S = (s − 1)/(s + 1): |S(jω)| = 1 for all ω (all-pass), so ‖S‖∞ = 1
    assert m.sensitivity_peak == pytest.approx(1.0, abs=1e-12)


def test_negative_dc_gain_puts_the_peak_and_the_crossing_at_zero():
    # L = −0.5/(s + 1): closed loop s + 1 − 0.5k, stable iff k < 2; S = (s+1)/(s+0.5), whose
    # magnitude falls from 2 at ω = 0 (by hand)
    loop, _ = tf_lt([-0.5], [1.0, 1.0])
    m = siso_margins(loop)
    assert m.gain_margin == pytest.approx(2.0, rel=1e-12) and m.gain_margin_frequency == 0.0
    assert m.lower_gain_margin is None and m.phase_crossovers == (0.0,)
    assert m.phase_margin == math.inf and m.gain_crossovers == ()
    assert m.delay_margin == math.inf and m.delay_margin_frequency is None
    assert m.sensitivity_peak == pytest.approx(2.0, rel=1e-12)
    assert m.sensitivity_peak_frequency == 0.0
    # |S − T| = |(1 − L)/(1 + L)| = |(s + 1.5)/(s + 0.5)|: 3 at ω = 0, α = 2/3 (Seiler et al.)
    assert m.disk_margin == pytest.approx(2.0 / 3.0, rel=1e-12) and m.disk_margin_frequency == 0.0


def test_negative_feedthrough_puts_the_limit_at_infinity():
    # L = −0.5 s/(s + 1): closed loop (1 − 0.5k) s + 1, stable iff k < 2 (Routh, degree 1);
    # |S(jω)| = |jω + 1|/|0.5 jω + 1| rises to its supremum 2 as ω → ∞ (by hand)
    loop, _ = tf_lt([-0.5, 0.0], [1.0, 1.0])
    m = siso_margins(loop)
    assert m.gain_margin == pytest.approx(2.0, rel=1e-12)
    assert m.gain_margin_frequency == math.inf
    assert m.sensitivity_peak == pytest.approx(2.0, rel=1e-12)
    assert m.sensitivity_peak_frequency == math.inf
    assert m.disk_margin == pytest.approx(2.0 / 3.0, rel=1e-12)  # |S − T| → 3
    assert m.disk_margin_frequency == math.inf


def test_discrete_loop_crosses_at_nyquist():
    # L(z) = 0.5/z, T = 0.2: closed loop z + 0.5k, stable iff |0.5k| < 1 (Jury, degree 1);
    # L(−1) = −0.5: the phase crossing is at the Nyquist frequency π/T
    T = 0.2
    loop, _ = tf_lt([0.5], [1.0, 0.0], T)
    m = siso_margins(loop)
    assert m.gain_margin == pytest.approx(2.0, rel=1e-12)
    assert m.gain_margin_frequency == pytest.approx(math.pi / T, rel=1e-15)
    assert math.pi / T in m.phase_crossovers and m.gain_crossovers == ()
    # S = z/(z + 0.5): |S| peaks at z = −1 with 1/0.5 = 2 (by hand)
    assert m.sensitivity_peak == pytest.approx(2.0, rel=1e-9)
    assert m.sensitivity_peak_frequency == pytest.approx(math.pi / T, rel=1e-6)


def test_crossover_beyond_the_default_grid_is_found_by_widening():
    # L = 1e5/(s + 1): |L(jω)| = 1 at ω = √(1e10 − 1), far above 1e3·ωn; PM = 180° − atan ω
    loop, sys = tf_lt([1e5], [1.0, 1.0])
    m = siso_margins(loop)
    wc = math.sqrt(1e10 - 1)
    assert m.gain_crossovers == pytest.approx((wc,), rel=1e-10)
    assert m.phase_margin == pytest.approx(180.0 - math.degrees(math.atan(wc)), abs=1e-8)
    _gm, pm, _sm, _wpc, wgc, _ws = control.stability_margins(sys)
    assert m.phase_margin_frequency == pytest.approx(wgc, rel=1e-8)  # python-control


@pytest.mark.parametrize("k", [200.0, 1e4])
def test_crossover_below_the_default_grid_is_found_by_widening(k):
    # L = k·s/(s + 1)²: |L(jω)| ≈ k·ω below the double pole and ≈ k/ω above it, so |L| = 1
    # near ω = 1/k and ω = k; for k = 1e4 the low one lies below 1e-3·ωn, the default grid's
    # lower end (python-control reference; found missing before the widening was corrected)
    loop, sys = tf_lt([k, 0.0], [1.0, 2.0, 1.0])
    m = siso_margins(loop)
    _gm, pm, _sm, _wpc, wgc, _ws = control.stability_margins(sys, returnall=True)
    assert len(m.gain_crossovers) == len(wgc) == 2
    assert sorted(m.gain_crossovers) == pytest.approx(sorted(wgc), rel=1e-8)
    # |L(jω)| = kω/(1 + ω²) = 1: ω² − kω + 1 = 0, so ω = (k ∓ √(k² − 4))/2 (by hand)
    lo, hi = 2 / (k + math.sqrt(k * k - 4)), (k + math.sqrt(k * k - 4)) / 2
    assert sorted(m.gain_crossovers) == pytest.approx([lo, hi], rel=1e-12)
    # the smallest |PM| is reported (python-control's pm list, ±90.6° here)
    assert abs(m.phase_margin) == pytest.approx(min(abs(p) for p in pm), abs=1e-6)
    # the delay margin comes from every crossover, the low one included (it is the larger)
    want = min(math.radians(p % 360.0) / w for p, w in zip(pm, wgc))
    assert m.delay_margin == pytest.approx(want, rel=1e-7)


def test_delay_margin_is_the_smallest_over_every_crossover():
    # a resonant loop with three gain crossovers: dm = min_i PM_i / ω_i (radians)
    loop, sys = tf_lt([0.5, 0.3, 4.0], [1.0, 0.4, 4.0, 0.0])
    m = siso_margins(loop)
    _gm, pm, _sm, _wpc, wgc, _ws = control.stability_margins(sys, returnall=True)
    assert len(wgc) == len(m.gain_crossovers) >= 1
    assert sorted(m.gain_crossovers) == pytest.approx(sorted(wgc), rel=1e-8)
    want = min(math.radians(p % 360.0) / w for p, w in zip(pm, wgc))
    assert m.delay_margin == pytest.approx(want, rel=1e-7)


# ------------------------------------------------------------------ the grid's guarantees

@pytest.mark.parametrize("zeta", [0.3, 0.01])
def test_grid_is_fine_enough_between_every_pair_of_points(zeta):
    loop, sys = tf_lt([1.0], [1.0, 2 * zeta * 3.0, 9.0, 0.5])
    w, h = _grid(loop, Resolvent(loop), None)
    assert np.all(np.diff(w) > 0) and w.size < MAX_POINTS
    href = ref_response(sys, w)  # python-control at the grid points
    assert h[:, 0, 0] == pytest.approx(href, rel=1e-10)
    dl = np.abs(np.diff(np.log(np.abs(href))))
    dp = np.abs(np.angle(href[1:] / href[:-1]))
    assert dl.max() <= STEP_LOG_GAIN and dp.max() <= STEP_PHASE
    # the default span: three decades either side of the natural frequencies, widened only
    # while |L| < 1 still rises below (here |L| falls, so no widening)
    wn = np.abs(np.roots([1.0, 2 * zeta * 3.0, 9.0, 0.5]))
    assert w[0] == pytest.approx(wn.min() / 1e3, rel=1e-12)
    assert w[-1] == pytest.approx(wn.max() * 1e3, rel=1e-12)
    assert w.size >= 40 * 6  # at least 40 points per decade over six decades
    # a point at the damped frequency of the resonant pair (roots by numpy)
    wd = float(np.max(np.roots([1.0, 2 * zeta * 3.0, 9.0, 0.5]).imag))
    assert np.min(np.abs(w - wd)) <= 1e-12 * wd


def test_grid_honours_a_given_range_and_the_nyquist_end():
    loop, _ = tf_lt([1.0], [1.0, 0.5, 2.0])
    w, _h = _grid(loop, Resolvent(loop), (0.1, 10.0))
    assert w[0] == pytest.approx(0.1, rel=1e-15) and w[-1] == pytest.approx(10.0, rel=1e-15)
    T = 0.5
    dloop, _ = tf_lt([0.2], [1.0, -0.5], T)
    w, _h = _grid(dloop, Resolvent(dloop), None)
    assert w[-1] == math.pi / T and np.all(w <= math.pi / T)
    w, _h = _grid(dloop, Resolvent(dloop), (0.01, 100.0))
    assert w[-1] == math.pi / T and w[0] == pytest.approx(0.01)
    w, _h = _grid(dloop, Resolvent(dloop), (0.01, 1.0))
    assert w[-1] == pytest.approx(1.0) and math.pi / T not in w


# ------------------------------------------------------------------ peak search and roots

def test_sensitivity_peak_against_a_dense_grid_with_local_refinement():
    loop, sys = tf_lt([4.0], [1.0, 1.2, 3.0, 1.0])
    m = siso_margins(loop)
    w = np.geomspace(1e-2, 1e2, 40001)
    s = np.abs(1.0 / (1.0 + ref_response(sys, w)))  # python-control response
    i = int(np.argmax(s))
    f = lambda x: -abs(1.0 / (1.0 + ref_response(sys, x)[0]))  # noqa: E731
    r = minimize_scalar(f, bounds=(w[i - 1], w[i + 1]), method="bounded",
                        options={"xatol": 1e-13})
    assert m.sensitivity_peak == pytest.approx(-r.fun, rel=1e-12)
    assert m.sensitivity_peak >= s.max()
    assert m.sensitivity_peak_frequency == pytest.approx(r.x, rel=1e-5)
    ds = np.abs((1 - ref_response(sys, w)) / (1 + ref_response(sys, w)))
    assert m.disk_margin == pytest.approx(2.0 / ds.max(), rel=1e-6)  # Seiler et al. 2020
    assert m.disk_margin <= 2.0 / ds.max() * (1 + 1e-12)


def test_peak_picks_the_best_of_its_three_local_searches():
    # two maxima: 1.4 on the grid at x = 1, 1.5 at x = 2.05 between grid points 2.0 and 2.1,
    # whose grid values (1.5·e^(−1/4) ≈ 1.17) are only the second and third largest
    # (by hand; the searches take vectorised functions: arrays in, arrays out)
    fun = lambda x: 1.4 * np.exp(-(x - 1.0) ** 2 / 0.01) + 1.5 * np.exp(-(x - 2.05) ** 2 / 0.01)  # noqa: E501,E731
    w = np.linspace(0.0, 3.0, 31)
    v = fun(w)
    best, at = _peak(fun, w[1:], v[1:], 0.0)
    assert best == pytest.approx(1.5, rel=1e-9) and at == pytest.approx(2.05, abs=1e-5)
    # a supremum at the end wins over the grid, and a larger value at zero over both
    assert _peak(fun, w[1:], v[1:], 7.0) == (7.0, math.inf)
    g = lambda x: np.where(x == 0.0, 9.0, fun(x))  # noqa: E731
    assert _peak(g, w[1:], v[1:], 7.0) == (9.0, 0.0)
    nan_at_zero = lambda x: np.where(x == 0.0, math.nan, fun(x))  # noqa: E731
    assert _peak(nan_at_zero, w[1:], v[1:], 0.0)[0] == pytest.approx(1.5, rel=1e-9)


def test_roots_between_sign_changes_and_exact_zeros():
    f = lambda x: (x - 1.5) * (x - 4.0)  # noqa: E731
    w = np.array([1.0, 2.0, 3.0, 4.0, 5.0])
    v = np.array([f(x) for x in w])
    assert _roots(f, w, v, lambda i: True) == pytest.approx([1.5, 4.0], rel=1e-13)
    assert _roots(f, w, v, lambda i: i != 0) == [4.0]  # invalid interval skipped
    assert _roots(f, w, v, lambda i: False) == [4.0]  # a grid point on the root stays


def test_discrete_loop_whose_sensitivities_stay_below_one():
    # L(z) = 0.51 + 0.005/(z − 0.5), T = 0.1: Re L > 0 on the unit circle, so |S| < 1 and
    # |S − T| < 1 everywhere; the peaks must come from the circle itself (dense grid on
    # [0, π/T], by hand), not from an end value
    T = 0.1
    loop = lt([[0.5]], [[1.0]], [[0.005]], [[0.51]], T)
    m = siso_margins(loop)
    w = np.linspace(0.0, math.pi / T, 20001)
    ell = 0.51 + 0.005 / (np.exp(1j * w * T) - 0.5)
    s = np.abs(1 / (1 + ell))
    st = np.abs((1 - ell) / (1 + ell))
    assert m.sensitivity_peak == pytest.approx(s.max(), rel=1e-7) and m.sensitivity_peak < 1
    assert m.disk_margin == pytest.approx(2 / st.max(), rel=1e-7) and m.disk_margin > 2
    assert m.channel == "u" and m.gain_margin == math.inf and m.phase_margins == ()


def test_channel_name_phase_margins_and_the_size_check():
    loop, _ = tf_lt([2.0], [1.0, -1.0])
    m = siso_margins(loop)
    assert m.channel == "u" and m.phase_margins == pytest.approx((60.0,), abs=1e-9)
    anon = LoopTransfer(loop.A, loop.B, loop.C, loop.D, None, None, ())
    assert siso_margins(anon).channel == "u1"
    two = LoopTransfer(np.eye(1) * -1, np.ones((1, 2)), np.ones((2, 1)), np.zeros((2, 2)), None,
                       None, ("a", "b"))
    with pytest.raises(ValueError, match=r"^siso_margins needs a 1×1 loop, got 2×2$"):
        siso_margins(two)
    three = LoopTransfer(np.eye(1) * -1, np.ones((1, 3)), np.ones((2, 1)), np.zeros((2, 3)),
                         None, None, ("a", "b"))
    with pytest.raises(ValueError, match=r"got 2×3$"):
        siso_margins(three)


def test_a_given_range_is_used_by_the_margins():
    # L = 2/(s − 1) on [0.01, 1]: the gain crossover √3 lies outside, so none is found
    loop, _ = tf_lt([2.0], [1.0, -1.0])
    m = siso_margins(loop, (0.01, 1.0))
    assert m.gain_crossovers == () and m.phase_margin == math.inf


def _slow_integrators():
    # (num, den, T, crossover, phase margin in degrees), each solved by hand:
    # k/s: |L| = k/ω = 1 at ω = k, ∠L = −90°;
    # k/(s(s + 1)): k/(ω·√(1 + ω²)) = 1, ω² = 2k²/(1 + √(1 + 4k²)), PM = 90° − atan ω;
    # kT/(z − 1): |L| = kT/(2·sin(ωT/2)) = 1, ω = (2/T)·asin(kT/2), PM = 90° − ωT/2
    k2 = 1e-4
    w2 = math.sqrt(2 * k2 * k2 / (1 + math.sqrt(1 + 4 * k2 * k2)))
    T, k3 = 0.1, 5e-4
    w3 = 2 / T * math.asin(k3 * T / 2)
    return [([5e-4], [1.0, 0.0], None, 5e-4, 90.0),
            ([k2], [1.0, 1.0, 0.0], None, w2, 90.0 - math.degrees(math.atan(w2))),
            ([k3 * T], [1.0, -1.0], T, w3, 90.0 - math.degrees(w3 * T / 2))]


@pytest.mark.parametrize("num, den, dt, wc, want_pm", _slow_integrators())
def test_integrating_loop_crossing_below_the_default_grid(num, den, dt, wc, want_pm):
    # A slow integral loop: |L| falls with ω and is below 1 at the default lower end
    # (1e-3·ωn, or 1e-3 rad/s without modes), so the crossover lies below it. Found missing
    # (PM reported as ∞: a silent pass of any phase-margin requirement).
    loop, sys = tf_lt(num, den, dt)
    m = siso_margins(loop)
    assert m.gain_crossovers == pytest.approx((wc,), rel=1e-10)
    assert m.phase_margin == pytest.approx(want_pm, abs=1e-8)
    if dt is None:  # (python-control falls back to a coarse grid for discrete loops)
        _gm, pm, _sm, _wpc, wgc, _ws = control.stability_margins(sys)
        assert m.phase_margin == pytest.approx(pm, abs=1e-6)  # python-control
        assert m.phase_margin_frequency == pytest.approx(wgc, rel=1e-8)
    assert m.delay_margin == pytest.approx(math.radians(want_pm) / wc, rel=1e-9)


def test_flat_low_end_below_one_is_not_widened():
    # L = −0.5/(s + 1) is flat at the low end (|L| → 0.5): no crossover can lie below, the
    # grid keeps its default lower end 1e-3 rad/s (three decades below the pole, by hand)
    loop, _ = tf_lt([-0.5], [1.0, 1.0])
    w, _h = _grid(loop, Resolvent(loop), None)
    assert w[0] == pytest.approx(1e-3, rel=1e-12)


@pytest.mark.parametrize("x0", [1.23456789, 1.23456789e-3])
def test_peak_location_to_the_search_tolerance(x0):
    # a smooth maximum at x0 between grid points spaced 8 % apart: the bounded search
    # (xatol 1e-12·b) puts it at x0 to about 1e-12 relative (by hand: f = 1/(1 + (x/x0 − 1)²))
    fun = lambda x: 1.0 / (1.0 + (x / x0 - 1.0) ** 2)  # noqa: E731
    w = x0 * np.geomspace(0.3, 3.0, 30)
    best, at = _peak(fun, w, np.array([fun(x) for x in w]), 0.0)
    assert best == pytest.approx(1.0, rel=1e-15)
    assert at == pytest.approx(x0, rel=1e-9)


def test_gain_limit_candidates_are_strictly_above_or_below_one():
    # a candidate at exactly 1 or above 1 is never a lower limit, one at 1 never an upper
    # one: L = 1.2/(s − 1) is stable for k > 1/1.2 (Routh, degree 1), so probing below a
    # candidate of 1 or 1.5 would find instability; L = 5/(s + 1)³ is stable for k < 1.6
    # (Routh: 3·3 > 1 + 5k), so probing 2·1 would too
    from eigengate.analysis.margins import _gain_limits

    unst, _ = tf_lt([1.2], [1.0, -1.0])
    assert unstable_poles(unst, 0.75) == 1 and unstable_poles(unst, 0.5) == 1
    assert _gain_limits(unst, [(1.5, 7.0)]) == ((math.inf, None), (None, None))
    assert _gain_limits(unst, [(1.0, 7.0)]) == ((math.inf, None), (None, None))
    third, _ = tf_lt([5.0], [1.0, 3.0, 3.0, 1.0])
    assert unstable_poles(third, 2.0) == 2
    assert _gain_limits(third, [(1.0, 3.0)]) == ((math.inf, None), (None, None))
