"""Exact behaviour of the loop-level paths of analysis/margins.py: break points, loop-at-a-time
channels, the multi-loop sensitivity and disk margins, the singular-loop and memo paths.

Written against the mutants of those paths that survived (tests/mutation/run_mutmut.py).
References, named beside each check:
- the loop transfer ``K·P`` (plant input) and ``P·K`` (plant output) from python-control's
  ``series`` and its frequency response (reference library);
- loop-at-a-time: channel i with the others closed is the lower fractional transformation
  ``l_ii − l_io (I + L_oo)⁻¹ l_oi`` of the full response (Skogestad & Postlethwaite,
  Multivariable Feedback Control, 2nd ed., section 3.8, from memory);
- σ̄ is invariant under unitary similarity, so ``U·diag(l1, l2)·Uᵀ`` has the singular values of
  the decoupled loop (Golub & Van Loan, Matrix Computations, from memory);
- the balanced disk margin α = 2 / max σ̄(S − T) and its gain range (Seiler, Packard & Gahinet,
  IEEE Control Systems Magazine, 2020).
"""

from __future__ import annotations

import math

import control
import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from eigengate.analysis.margins import (LoopMargins, LoopParts, LoopTransfer, Resolvent,
                                        channel_loop, disk_gain_range, loop_margins,
                                        loop_transfer, unstable_poles)

Z = np.zeros


def parts_of(plant, controller, at="plant_input", dt=None, e=None, channel=None, rng=None):
    a, b, c, d = (np.atleast_2d(np.asarray(x, float)) for x in plant)
    ac, bc, cc, dc = (np.asarray(x, float) for x in controller)
    names = tuple(f"u{i + 1}" for i in range(b.shape[1]))
    outs = tuple(f"y{i + 1}" for i in range(c.shape[0]))
    return LoopParts("controller", a, b, c, d, e, ac, bc, cc, dc, names, outs, dt, at,
                     channel, rng)


def respond(lt_: LoopTransfer, w):
    """C (λE − A)⁻¹ B + D by a dense solve at each frequency (no reduction)."""
    e = np.eye(lt_.A.shape[0]) if lt_.E is None else lt_.E
    out = []
    for x in np.atleast_1d(w):
        lam = 1j * x if lt_.sample_period is None else np.exp(1j * x * lt_.sample_period)
        out.append(lt_.C @ np.linalg.solve(lam * e - lt_.A, lt_.B) + lt_.D)
    return np.array(out)


# A two-input, two-output plant with feedthrough, and a first-order controller with
# feedthrough: every block of the interconnection is used
PLANT = (np.array([[-1.0, 0.4], [-0.3, -2.0]]), np.array([[1.0, 0.2], [0.0, 1.0]]),
         np.array([[1.0, 0.5], [0.3, 1.0]]), np.array([[0.1, 0.05], [0.0, 0.2]]))
CONTROLLER = (np.array([[-3.0]]), np.array([[1.0, 0.5]]), np.array([[0.4], [0.2]]),
              np.array([[0.6, 0.1], [0.05, 0.8]]))
W = np.array([0.0, 0.1, 0.7, 2.0, 9.0])


@pytest.mark.parametrize("at", ["plant_input", "plant_output"])
def test_loop_transfer_at_both_break_points_against_python_control(at):
    parts = parts_of(PLANT, CONTROLLER, at=at)
    lt_ = loop_transfer(parts)
    P, K = control.ss(*PLANT), control.ss(*CONTROLLER)
    ref = control.series(P, K) if at == "plant_input" else control.series(K, P)  # K·P, P·K
    want = np.array([ref(1j * x) for x in W])  # python-control
    assert respond(lt_, W) == pytest.approx(want, rel=1e-12, abs=1e-14)
    assert lt_.A.shape == (3, 3) and lt_.E is None and lt_.sample_period is None
    assert lt_.at == at
    assert lt_.channels == (("u1", "u2") if at == "plant_input" else ("y1", "y2"))
    # the break point given as an argument wins over the one in the parts
    other = "plant_output" if at == "plant_input" else "plant_input"
    assert loop_transfer(parts, other).at == other


def test_loop_transfer_keeps_a_descriptor_and_the_sample_period():
    # E = diag(2, 1) on the plant: the loop's E is blockdiag(E, I) (controller states proper)
    e = np.diag([2.0, 1.0])
    for at in ("plant_input", "plant_output"):
        lt_ = loop_transfer(parts_of(PLANT, CONTROLLER, at=at, e=e))
        assert np.array_equal(lt_.E, np.diag([2.0, 1.0, 1.0]))
        # the plant alone with E: C (sE − A)⁻¹ B + D, then in series with K (python-control
        # for the controller, a dense solve for the descriptor plant)
        p = LoopTransfer(*PLANT, e, None, ("u1", "u2"))
        k = control.ss(*CONTROLLER)
        for x in W[1:]:
            pw, kw = respond(p, x)[0], k(1j * x)
            want = kw @ pw if at == "plant_input" else pw @ kw
            assert respond(lt_, x)[0] == pytest.approx(want, rel=1e-12)
    d = loop_transfer(parts_of(PLANT, CONTROLLER, dt=0.05))
    assert d.sample_period == 0.05


def test_a_bad_break_point_is_refused_with_the_choices():
    with pytest.raises(ValueError, match=r"^break point must be one of plant_input, "
                                         r"plant_output, got 'plant_middle'$"):
        loop_transfer(parts_of(PLANT, CONTROLLER), "plant_middle")


@pytest.mark.parametrize("at", ["plant_input", "plant_output"])
def test_channel_loop_is_the_lower_fractional_transformation(at):
    lt_ = loop_transfer(parts_of(PLANT, CONTROLLER, at=at, dt=None))
    full = respond(lt_, W)
    for i, o in ((0, 1), (1, 0)):
        one = channel_loop(lt_, i)
        assert one.D.shape == (1, 1) and one.channels == (lt_.channels[i],) and one.at == at
        assert one.E is None and one.sample_period is None
        # l_ii − l_io (1 + l_oo)⁻¹ l_oi (Skogestad & Postlethwaite, LFT)
        want = full[:, i, i] - full[:, i, o] * full[:, o, i] / (1.0 + full[:, o, o])
        assert respond(one, W)[:, 0, 0] == pytest.approx(want, rel=1e-12)


def test_channel_loop_keeps_the_descriptor_and_the_sample_period():
    e = np.diag([2.0, 1.0])
    lt_ = loop_transfer(parts_of(PLANT, CONTROLLER, e=e))
    one = channel_loop(lt_, 1)
    assert np.array_equal(one.E, lt_.E)
    full = respond(lt_, W)
    want = full[:, 1, 1] - full[:, 1, 0] * full[:, 0, 1] / (1.0 + full[:, 0, 0])  # LFT
    assert respond(one, W)[:, 0, 0] == pytest.approx(want, rel=1e-12)
    dlt = loop_transfer(parts_of((0.5 * np.eye(2), *PLANT[1:]), CONTROLLER[:0] + (
        0.2 * np.eye(1), *CONTROLLER[1:]), dt=0.1))
    assert channel_loop(dlt, 0).sample_period == 0.1
    solo = LoopTransfer(np.eye(1) * -1, np.ones((1, 1)), np.ones((1, 1)), Z((1, 1)), None,
                        None, ("u",))
    assert channel_loop(solo, 0) is solo  # nothing else to close


# ------------------------------------------------------------------ singular and unstable

def test_unstable_poles_refuses_a_singular_return_difference_at_its_threshold():
    # I + k·D with condition number exactly 1e12 is still solved; just above, it is
    # refused (-1). f = diag(1e12, 1) and diag(1e12 + 0.5, 1): their singular values are
    # the diagonal entries (by hand), so cond(f) is exact. Closed loop of the accepted one:
    # A − B f⁻¹ C = −I − diag(1e-12, 1): stable (by hand).
    def loop(d11):
        return LoopTransfer(-np.eye(2), np.eye(2), np.eye(2), np.diag([d11, 0.0]), None,
                            None, ("a", "b"))
    assert np.linalg.cond(np.eye(2) + np.diag([1e12 - 1.0, 0.0])) == 1e12  # numpy
    assert unstable_poles(loop(1e12 - 1.0)) == 0
    assert unstable_poles(loop(1e12 - 0.5)) == -1
    # a SISO loop with D = −1: 1 + D = 0, no closed loop (the margins report it unstable)
    dead = LoopTransfer(-np.eye(1), np.eye(1), np.eye(1), -np.eye(1), None, None, ("u",))
    assert unstable_poles(dead) == -1
    z = Z((1, 1))
    parts = LoopParts("output_gain", -np.eye(1), np.eye(1), np.eye(1), -np.eye(1), None,
                      Z((0, 0)), Z((0, 1)), Z((1, 0)), np.eye(1), ("u",), ("y",))
    m = loop_margins(parts)
    assert (m.at, m.unstable, m.channels) == ("plant_input", 1, ()) and z.shape == (1, 1)
    assert math.isnan(m.sensitivity_peak) and math.isnan(m.disk_margin)


def test_unstable_loop_reports_its_pole_count_and_break_point():
    # plant 1/(s − 1) twice (decoupled), gain 0.5: closed loop s − 1 + 0.5 in each channel,
    # two poles at +0.5 (by hand)
    parts = LoopParts("output_gain", np.eye(2), np.eye(2), np.eye(2), Z((2, 2)), None,
                      Z((0, 0)), Z((0, 2)), Z((2, 0)), 0.5 * np.eye(2), ("u1", "u2"),
                      ("y1", "y2"), at="plant_output")
    m = loop_margins(parts)
    assert (m.at, m.unstable, m.channels) == ("plant_output", 2, ())


# ------------------------------------------------------------------ multi-loop peaks

def rotated(l1, l2, dt=None):
    """U·diag(l1, l2)·Uᵀ in state space (U a rotation): coupled, with the singular values of
    the decoupled loop at every frequency (unitary invariance)."""
    s1, s2 = control.ss(l1), control.ss(l2)
    a = np.block([[s1.A, Z((s1.A.shape[0], s2.A.shape[0]))],
                  [Z((s2.A.shape[0], s1.A.shape[0])), s2.A]])
    b = np.block([[s1.B, Z((s1.A.shape[0], 1))], [Z((s2.A.shape[0], 1)), s2.B]])
    c = np.block([[s1.C, Z((1, s2.A.shape[0]))], [Z((1, s1.A.shape[0])), s2.C]])
    d = np.diag([s1.D[0, 0], s2.D[0, 0]])
    t = 0.6
    u = np.array([[math.cos(t), -math.sin(t)], [math.sin(t), math.cos(t)]])
    return a, b @ u.T, u @ c, u @ d @ u.T


def refined_peak(f, w):
    """max of f: a dense grid, then scipy's bounded search around its best point."""
    v = np.array([f(x) for x in w])
    i = int(np.argmax(v))
    r = minimize_scalar(lambda x: -f(x), bounds=(w[max(i - 1, 0)], w[min(i + 1, w.size - 1)]),
                        method="bounded", options={"xatol": 1e-13 * w[i]})
    return (-r.fun, r.x) if -r.fun > v[i] else (v[i], w[i])


def static_identity(p=2):
    return Z((0, 0)), Z((0, p)), Z((p, 0)), np.eye(p)


def test_multiloop_suprema_at_infinity():
    # L = U·diag(−0.5 s/(s+1), −0.3 s/(s+2))·Uᵀ: |S_i(jω)| rises to 1/(1 − 0.5) = 2 and
    # 1/0.7 as ω → ∞, |S_i − T_i| = |1 − l_i|/|1 + l_i| to 3 and 1.3/0.7 (by hand, as in the
    # SISO case), so σ̄(S) → 2 and σ̄(S − T) → 3: both suprema lie at ω = ∞
    l1 = control.tf([-0.5, 0.0], [1.0, 1.0])
    l2 = control.tf([-0.3, 0.0], [1.0, 2.0])
    parts = parts_of(rotated(l1, l2), static_identity())
    m = loop_margins(parts)
    assert m.at == "plant_input" and m.unstable == 0 and len(m.channels) == 2
    assert m.sensitivity_peak == pytest.approx(2.0, rel=1e-12)
    assert m.sensitivity_peak_frequency == math.inf
    assert m.disk_margin == pytest.approx(2.0 / 3.0, rel=1e-12)  # Seiler et al. 2020
    assert m.disk_margin_frequency == math.inf
    assert [c.channel for c in m.channels] == ["u1", "u2"]
    assert m.channel("u2") is m.channels[1] and m.channel("u1") is m.channels[0]


def test_multiloop_peaks_inside_the_band_against_a_dense_grid():
    # two resonant loops, coupled by the rotation; reference: the decoupled loops' |S_i| and
    # |S_i − T_i| on a dense grid (python-control responses), refined by a bounded search
    l1 = control.tf([2.0], [1.0, 1.2, 3.0, 1.0])
    l2 = control.tf([25.0], [1.0, 10.0, 10.0, 10.0])
    parts = parts_of(rotated(l1, l2), static_identity())
    m = loop_margins(parts)
    def resp(x):
        return [complex(np.asarray(g(1j * x)).reshape(-1)[0]) for g in (l1, l2)]

    def s(x):
        return max(abs(1 / (1 + h)) for h in resp(x))

    def st(x):
        return max(abs((1 - h) / (1 + h)) for h in resp(x))

    for f, value, at in ((s, m.sensitivity_peak, m.sensitivity_peak_frequency),
                         (st, 2.0 / m.disk_margin, m.disk_margin_frequency)):
        want, where = refined_peak(f, np.geomspace(1e-2, 1e2, 4001))
        assert value == pytest.approx(want, rel=1e-9)  # Seiler et al. 2020 for S − T
        assert at == pytest.approx(where, rel=1e-4)
    # σ̄, not the smallest singular value: the loops' peaks differ by more than 20 %
    w = np.geomspace(1e-2, 1e2, 4001)
    peaks = [max(abs(1 / (1 + resp(x)[i])) for x in w) for i in (0, 1)]
    assert max(peaks) > 1.2 * min(peaks)


def test_discrete_multiloop_peaks_below_one():
    # L(z) = U·diag(0.51 + 0.005/(z − 0.5), 0.6 + 0.004/(z − 0.3))·Uᵀ, T = 0.1: Re l_i > 0 on
    # the unit circle, so σ̄(S) < 1 and σ̄(S − T) < 1: the peaks come from the circle itself
    # (dense grid on [0, π/T], by hand), not from any end value
    T = 0.1
    l1 = control.ss([[0.5]], [[1.0]], [[0.005]], [[0.51]], T)
    l2 = control.ss([[0.3]], [[1.0]], [[0.004]], [[0.6]], T)
    parts = parts_of(rotated(l1, l2), static_identity(), dt=T)
    m = loop_margins(parts)
    w = np.linspace(0.0, math.pi / T, 20001)
    z = np.exp(1j * w * T)
    h1, h2 = 0.51 + 0.005 / (z - 0.5), 0.6 + 0.004 / (z - 0.3)
    s = np.maximum(abs(1 / (1 + h1)), abs(1 / (1 + h2)))
    st = np.maximum(abs((1 - h1) / (1 + h1)), abs((1 - h2) / (1 + h2)))
    assert m.sensitivity_peak == pytest.approx(s.max(), rel=1e-7) and s.max() < 1
    assert m.disk_margin == pytest.approx(2 / st.max(), rel=1e-7) and st.max() < 1
    assert math.isfinite(m.sensitivity_peak_frequency)
    assert math.isfinite(m.disk_margin_frequency)


def test_multiloop_uses_the_given_range_and_channel():
    # on [0.01, 1] the resonant loop's peak (near ω ≈ 1.6) lies outside; a range narrows the
    # crossover search only (docs/model-format.md): the ends ω = 0 and ω → ∞ still count, and
    # with D = 0, σ̄(S(j∞)) = 1 is the largest value (dense grid on the range, by hand)
    l1 = control.tf([2.0], [1.0, 1.2, 3.0, 1.0])
    l2 = control.tf([0.5], [1.0, 1.0])
    plant = rotated(l1, l2)
    parts = parts_of(plant, static_identity(), rng=(0.01, 1.0))
    m = loop_margins(parts)
    w = np.geomspace(0.01, 1.0, 4001)
    h1, h2 = (np.asarray(g(1j * w)).reshape(-1) for g in (l1, l2))
    s = np.maximum(abs(1 / (1 + h1)), abs(1 / (1 + h2)))
    assert s.max() < 0.8 and m.sensitivity_peak == 1.0
    assert m.sensitivity_peak_frequency == math.inf
    for c in m.channels:  # the range reaches the channels too: no crossover above 1
        assert all(x <= 1.0 for x in c.gain_crossovers + c.phase_crossovers)
    full = loop_margins(parts_of(plant, static_identity()))
    assert full.sensitivity_peak > m.sensitivity_peak * 1.01
    one = loop_margins(parts_of(plant, static_identity(), channel="u2"))
    assert [c.channel for c in one.channels] == ["u2"]
    assert one.channels[0].gain_margin == full.channel("u2").gain_margin
    assert one.channels[0].phase_margin == full.channel("u2").phase_margin


def test_single_channel_loop_reports_its_own_peaks():
    # p = 1: the loop's figures are the channel's (L = 2/(s − 1), |S| = 1 all-pass, by hand)
    parts = parts_of(([[1.0]], [[1.0]], [[2.0]], [[0.0]]), static_identity(1), at="plant_output")
    m = loop_margins(parts)
    (c,) = m.channels
    assert (m.at, m.unstable) == ("plant_output", 0)
    assert m.sensitivity_peak == c.sensitivity_peak == pytest.approx(1.0, abs=1e-12)
    assert m.sensitivity_peak_frequency == c.sensitivity_peak_frequency
    assert m.disk_margin == c.disk_margin and m.disk_margin_frequency == c.disk_margin_frequency
    assert c.lower_gain_margin == pytest.approx(0.5, rel=1e-12)  # Routh: s − 1 + 2k


def test_margins_are_computed_once_and_kept():
    parts = parts_of(rotated(control.tf([2.0], [1.0, 1.2, 3.0, 1.0]),
                             control.tf([0.5], [1.0, 1.0])), static_identity())
    first = parts.margins()
    assert isinstance(first, LoopMargins) and first.unstable == 0
    assert parts.margins() is first
    assert first.disk_margin == loop_margins(parts).disk_margin


def test_disk_gain_range_at_and_beyond_two():
    # α ≥ 2: the disk covers every positive gain (Seiler et al. 2020); below, the range
    # ((1 − α/2)/(1 + α/2), (1 + α/2)/(1 − α/2))
    assert disk_gain_range(2.0) == (0.0, math.inf)
    assert disk_gain_range(2.5) == (0.0, math.inf)
    assert disk_gain_range(3.0) == (0.0, math.inf)
    lo, hi = disk_gain_range(1.0)
    assert (lo, hi) == (pytest.approx(1 / 3), pytest.approx(3.0))
    assert Resolvent(LoopTransfer(-np.eye(1), np.eye(1), np.eye(1), Z((1, 1)), None, None,
                                  ("u",))).scalar(0.0) == pytest.approx(1.0)


def test_multiloop_with_an_integrator_skips_the_pole_at_zero():
    # L = U·diag(0.5/(s(s + 1)), 2/(s + 1))·Uᵀ: L(0) is infinite (the integrator), so ω = 0 is
    # no candidate (the peaks lie inside the band;
    # closed loops s² + s + 0.5 and s + 3: stable, Routh). Reference: the decoupled loops on
    # a dense grid (python-control), refined by scipy's bounded search
    l1 = control.tf([0.5], [1.0, 1.0, 0.0])
    l2 = control.tf([2.0], [1.0, 1.0])
    m = loop_margins(parts_of(rotated(l1, l2), static_identity()))

    def s(x):
        return max(abs(1 / (1 + complex(np.asarray(g(1j * x)).reshape(-1)[0]))) for g in (l1, l2))

    want, where = refined_peak(s, np.geomspace(1e-2, 1e2, 2001))
    assert m.sensitivity_peak == pytest.approx(want, rel=1e-9)
    assert m.sensitivity_peak_frequency == pytest.approx(where, rel=1e-4)
    assert math.isfinite(m.disk_margin) and 0 < m.disk_margin_frequency < math.inf


def test_resolvent_pole_guard_at_its_threshold():
    # the response is NaN where a diagonal entry of (λI − T) is at most 1e-14·max(1, |T_ii|)
    # (a pole on the axis), and finite just above: A = [[−a]], L(0) = 1/a (by hand)
    def at_zero(*poles):
        a = np.diag([-p for p in poles])
        return Resolvent(LoopTransfer(a, np.ones((len(poles), 1)), np.ones((1, len(poles))),
                                      Z((1, 1)), None, None, ("u",))).scalar(0.0)
    assert math.isnan(at_zero(1e-14).real)
    assert at_zero(1.5e-14) == pytest.approx(1 / 1.5e-14 + 0j, rel=1e-12)
    # relative to the largest |T_ii|: with a pole at −1e3 the guard is 1e-11
    assert math.isnan(at_zero(1e3, 1e-11).real)
    assert at_zero(1e3, 1.5e-11) == pytest.approx(1 / 1.5e-11 + 1e-3, rel=1e-12)
    # below 1 the guard stays 1e-14 (max with 1)
    assert at_zero(0.5, 1.5e-14) == pytest.approx(1 / 1.5e-14 + 2.0, rel=1e-12)


def test_unstable_poles_of_a_descriptor_loop_use_its_e():
    # (A, E) with A = [[0.1, 1], [−1, −1]], E = diag(1, 20): A alone is Hurwitz (trace −0.9,
    # det 0.9), but E⁻¹A has trace +0.05 and det 0.045: a pair in the right half-plane
    # (by hand; scipy's generalized eigenvalues agree)
    import scipy.linalg as la

    a, e = np.array([[0.1, 1.0], [-1.0, -1.0]]), np.diag([1.0, 20.0])
    loop = LoopTransfer(a, Z((2, 1)), Z((1, 2)), Z((1, 1)), e, None, ("u",))
    assert sum(x.real > 0 for x in la.eigvals(a, e)) == 2
    assert unstable_poles(loop) == 2
    assert unstable_poles(LoopTransfer(a, Z((2, 1)), Z((1, 2)), Z((1, 1)), None, None,
                                       ("u",))) == 0


def test_a_unit_loop_has_an_infinite_disk_margin():
    # L ≡ I (a plant of pure feedthrough I, controller I): S = I/2 and S − T = 0 at every
    # frequency, so σ̄(S) = 1/2 and α = 2/0 = ∞ (Seiler et al. 2020), for p = 2 and p = 1
    for p in (2, 1):
        plant = (-np.eye(p), Z((p, p)), Z((p, p)), np.eye(p))
        m = loop_margins(parts_of(plant, static_identity(p)))
        assert m.unstable == 0 and m.disk_margin == math.inf
        assert m.sensitivity_peak == pytest.approx(0.5, rel=1e-15)
        assert all(c.disk_margin == math.inf for c in m.channels)


@pytest.mark.parametrize("dt", [None, 0.2])
def test_resolvent_of_a_descriptor_loop_with_a_complex_pair(dt):
    # E⁻¹A has a complex pair (numpy: −0.017 ± 1.316j; discrete: |z| = 0.645), so only a
    # complex QZ makes (λS − T) triangular; reference: a dense solve C (λE − A)⁻¹ B + D at
    # each frequency (numpy), λ = jω or e^{jωT}
    a = np.array([[-0.2, 1.0], [-2.0, -0.4]]) if dt is None else \
        np.array([[0.5, 0.4], [-0.5, 0.6]])
    e = np.array([[1.0, 0.3], [0.0, 1.2]])
    loop = LoopTransfer(a, np.array([[0.0], [1.0]]), np.array([[1.0, 0.5]]), np.array([[0.1]]),
                        e, dt, ("u",))
    w = np.array([0.05, 0.9, 1.3, 2.0, 5.0 if dt is None else 15.0])
    got = Resolvent(loop)(w)
    assert got.shape == (5, 1, 1) and got.dtype == complex
    assert got == pytest.approx(respond(loop, w), rel=1e-12, abs=1e-15)
