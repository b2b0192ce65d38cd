"""The five pitfalls of computing loop margins, each shown on a case where it matters."""

import math
import warnings

import numpy as np
import pytest

from eigengate.model import interconnect as ic
from eigengate.analysis.margins import LoopTransfer, Resolvent, siso_margins, unstable_poles


def lt_of(a, b, c, d, dt=None):
    return LoopTransfer(np.asarray(a, float), np.asarray(b, float), np.asarray(c, float),
                        np.atleast_2d(np.asarray(d, float)), None, dt, ("u",))


def modal(freqs, zeta, gain):
    """A flexible structure: lightly damped modes, velocity-collocated input and output."""
    n = 2 * len(freqs)
    a, b, c = np.zeros((n, n)), np.zeros((n, 1)), np.zeros((1, n))
    for i, w in enumerate(freqs):
        a[2 * i:2 * i + 2, 2 * i:2 * i + 2] = [[-zeta * w, w], [-w, -zeta * w]]
        b[2 * i + 1, 0] = 1.0
        c[0, 2 * i + 1] = gain * w
    return a, b, c, np.zeros((1, 1))


# ------------------------------------------------- (1) no polynomial transfer function

def test_polynomial_conversion_is_visibly_wrong_state_space_is_right():
    mpmath = pytest.importorskip("mpmath")
    from scipy.signal import ss2tf

    # 14 modes clustered between 10 and 12 rad/s, ζ = 0.001 (all poles at Re s ≈ -0.01).
    a, b, c, d = modal(np.linspace(10.0, 12.0, 14), 1e-3, 0.5)
    num, den = ss2tf(a, b, c, d)
    # The polynomial's roots no longer are the poles: some cross into the right half-plane.
    assert np.max(np.roots(den).real) > 0.0
    assert unstable_poles(lt_of(a, b, c, d), 0.0) == 0  # the model itself is stable
    w0 = 11.0 * 1.0003
    mpmath.mp.dps = 50  # reference: C (jωI − A)⁻¹ B in 50-digit arithmetic
    n = a.shape[0]
    m = mpmath.matrix(n, n)
    for i in range(n):
        for j in range(n):
            m[i, j] = (1j * w0 if i == j else 0) - a[i, j]
    x = mpmath.lu_solve(m, mpmath.matrix(b.tolist()))
    ref = complex(sum(c[0, j] * x[j] for j in range(n)))
    ours = Resolvent(lt_of(a, b, c, d)).scalar(w0)
    poly = np.polyval(num[0], 1j * w0) / np.polyval(den, 1j * w0)
    assert abs(ours - ref) <= 1e-10 * abs(ref)
    assert abs(poly - ref) >= 0.1 * abs(ref)  # polynomial route: not even the right magnitude


# ------------------------------------------------- (2) discrete loops up to Nyquist

def test_discrete_margins_use_the_unit_circle_up_to_nyquist():
    control = pytest.importorskip("control")
    from scipy.signal import cont2discrete

    T = 0.1
    a, b, c, d = ic.tf_siso([1.0], [1.0, 3.0, 2.0, 0.0])
    ad, bd, cd, dd, _ = cont2discrete((a, b, c, d), T, method="zoh")
    ours = siso_margins(lt_of(ad, bd, cd, dd, T))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # python-control may note a method fallback
        gm, pm, _, wpc, wgc, _ = control.stability_margins(control.ss(ad, bd, cd, dd, T))
    assert ours.gain_margin == pytest.approx(gm, rel=1e-5)
    assert ours.phase_margin == pytest.approx(pm, abs=1e-4)
    assert ours.gain_margin_frequency == pytest.approx(wpc, rel=1e-5)
    # the sampled loop has less margin than the continuous one (GM 6, PM 53.4°)
    assert ours.gain_margin < 6.0 and ours.phase_margin < 53.4
    assert max(ours.phase_crossovers) <= math.pi / T


def test_discrete_crossing_exactly_at_nyquist():
    # L(z) = K/(z + 0.5): closed-loop pole z = -0.5 - K, stable iff K < 0.5; L(-1) = -2K is
    # on the negative real axis at the Nyquist frequency π/T, so GM = 0.5/K there.
    T, k = 0.05, 0.2
    ours = siso_margins(lt_of([[-0.5]], [[1.0]], [[k]], [[0.0]], T))
    assert ours.gain_margin == pytest.approx(0.5 / k, rel=1e-12)
    assert ours.gain_margin_frequency == pytest.approx(math.pi / T)
    assert unstable_poles(lt_of([[-0.5]], [[1.0]], [[k]], [[0.0]], T), 0.99 * 0.5 / k) == 0
    assert unstable_poles(lt_of([[-0.5]], [[1.0]], [[k]], [[0.0]], T), 1.01 * 0.5 / k) == 1


# ------------------------------------------------- (3) open-loop unstable: two gain margins

def winding(ell, k, w_max=1e3, n=200001):
    """Counter-clockwise encirclements of -1/k by L(jω), ω from -∞ to ∞ (dense grid)."""
    w = np.concatenate([-np.geomspace(w_max, 1e-6, n // 2), np.geomspace(1e-6, w_max, n // 2)])
    h = 1.0 + k * ell(1j * w)
    return round(float(np.sum(np.angle(h[1:] / h[:-1]))) / (2 * math.pi))


def test_open_loop_unstable_loop_has_upper_and_lower_gain_margins():
    # L = K/((s-1)(s+2)(s+3)): s^3 + 4s^2 + s - 6 + K is Hurwitz (Routh) iff 6 < K < 10.
    K = 8.0
    a, b, c, d = ic.tf_siso([K], np.poly([1.0, -2.0, -3.0]))
    lt = lt_of(a, b, c, d)
    m = siso_margins(lt)
    assert m.gain_margin == pytest.approx(10.0 / K, rel=1e-9)
    assert m.lower_gain_margin == pytest.approx(6.0 / K, rel=1e-9)
    assert m.lower_gain_margin_frequency == 0.0  # L(0) = -K/6 is on the negative real axis
    # Nyquist: one open-loop RHP pole, so stability needs one counter-clockwise encirclement
    # of -1 (Z = P - N = 0); eigenvalues of the closed loop agree on either side of each limit.
    for k, stable in ((0.74, False), (0.76, True), (1.0, True), (1.24, True), (1.26, False)):
        assert (unstable_poles(lt, k) == 0) is stable
        # (a 3rd-order loop evaluated from its factors: a reference independent of ours)
        assert (winding(lambda s: K / ((s - 1) * (s + 2) * (s + 3)), k) == 1) is stable


# ------------------------------------------------- (4) lightly damped crossovers

def test_lightly_damped_crossovers_are_not_missed():
    # L = k ωn²/(s² + 2ζωn s + ωn²), k = 0.01, ζ = 1e-4: |L| exceeds 1 only in a 1 % band
    # around ωn, |L| = 1 at ω² = ωn²[(1 - 2ζ²) ± √((1 - 2ζ²)² - (1 - k²))] (exact).
    k, zeta, wn = 0.01, 1e-4, 10.0
    a = [[0.0, 1.0], [-wn ** 2, -2 * zeta * wn]]
    lt = lt_of(a, [[0.0], [1.0]], [[k * wn ** 2, 0.0]], [[0.0]])
    q = 1 - 2 * zeta ** 2
    exact = sorted(wn * math.sqrt(q + s * math.sqrt(q * q - (1 - k * k))) for s in (-1, 1))
    m = siso_margins(lt)
    assert len(m.gain_crossovers) == 2
    assert m.gain_crossovers == pytest.approx(exact, rel=1e-10)
    # a plain log grid (40 points a decade) steps over the whole band: no crossover seen
    w = np.geomspace(0.11, 1100, 161)
    h = Resolvent(lt)(w)[:, 0, 0]
    assert not np.any(np.diff(np.sign(abs(h) - 1.0)))


# ------------------------------------------------- (5) delay margin over every crossover

def test_delay_margin_is_the_least_over_every_gain_crossover():
    # L = 0.5/s + 0.3 ωn²/(s² + 2ζωn s + ωn²), ωn = 10, ζ = 0.01: three gain crossovers; the
    # first (low frequency) has a large delay margin, the last (past the resonance) the least.
    wn, zeta = 10.0, 0.01
    a = np.zeros((3, 3))
    a[1:, 1:] = [[0.0, 1.0], [-wn ** 2, -2 * zeta * wn]]
    lt = lt_of(a, [[1.0], [0.0], [1.0]], [[0.5, 0.3 * wn ** 2, 0.0]], [[0.0]])
    assert unstable_poles(lt) == 0
    m = siso_margins(lt)
    assert len(m.gain_crossovers) == 3
    per = [math.radians(p % 360.0) / w for p, w in zip(m.phase_margins, m.gain_crossovers)]
    assert m.delay_margin == pytest.approx(min(per))
    assert m.delay_margin < per[0] / 10  # taking the first crossover would be far off
    assert m.delay_margin_frequency == pytest.approx(m.gain_crossovers[2])
    # brute force: the delayed Nyquist curve L(jω)e^{-jωτ} reaches -1 at τ = DM, not before
    def ell(w):  # the loop from its formula: a reference independent of the state space
        s = 1j * w
        return 0.5 / s + 0.3 * wn ** 2 / (s * s + 2 * zeta * wn * s + wn ** 2)

    w = np.geomspace(1e-2, 1e3, 200001)
    h = ell(w)
    for tau in np.linspace(0.0, 0.98 * m.delay_margin, 25):
        assert np.min(abs(1 + h * np.exp(-1j * w * tau))) > 1e-3
    w_loc = np.linspace(0.9999, 1.0001, 20001) * m.delay_margin_frequency
    h_loc = ell(w_loc)
    assert np.min(abs(1 + h_loc * np.exp(-1j * w_loc * m.delay_margin))) < 1e-5
