"""Loop margins against outside references: Routh, textbook values, Åström & Murray's
sensitivity bounds, python-control (as a reference library) and brute-force grids."""

import math

import numpy as np
import pytest

from eigengate.model import interconnect as ic
from eigengate.analysis.margins import (LoopParts, LoopTransfer, channel_loop,
                               disk_gain_range, disk_phase, loop_margins, loop_transfer,
                               siso_margins, unstable_poles)


def siso_parts(a, b, c, d, k=1.0, dt=None):
    """Static output feedback u = -k y around (a, b, c, d)."""
    z = np.zeros
    return LoopParts("output_gain", a, b, c, d, None, z((0, 0)), z((0, 1)), z((1, 0)),
                     np.array([[k]]), ("u",), ("y",), dt)


def lt_of(a, b, c, d, dt=None):
    return LoopTransfer(np.asarray(a, float), np.asarray(b, float), np.asarray(c, float),
                        np.asarray(d, float), None, dt, ("u",))


def routh_stable(coeffs):
    """Routh–Hurwitz: no sign change (and no zero) in the first column of the Routh array."""
    c = [float(x) for x in coeffs]
    n = len(c)
    rows = [c[0::2], c[1::2] + [0.0] * (len(c[0::2]) - len(c[1::2]))]
    for _ in range(n - 2):
        up, lo = rows[-2], rows[-1]
        if lo[0] == 0:
            return False
        new = [(lo[0] * up[j + 1] - up[0] * lo[j + 1]) / lo[0] for j in range(len(up) - 1)]
        rows.append(new + [0.0])
    first = [r[0] for r in rows[:n]]
    return all(x > 0 for x in first) or all(x < 0 for x in first)


# ---------------------------------------------------------------- textbook loop K/(s(s+1)(s+2))

TEXTBOOK = ic.tf_siso([1.0], [1.0, 3.0, 2.0, 0.0])


def test_textbook_loop_margins():
    # Classic textbook example (REFERENCES.md, cross-checked there with python-control):
    # K = 1 gives GM = 6 (15.56 dB) at ω = √2 rad/s and PM ≈ 53.4°.
    m = loop_margins(siso_parts(*TEXTBOOK)).channels[0]
    assert m.gain_margin == pytest.approx(6.0, rel=1e-9)
    assert m.gain_margin_db == pytest.approx(15.563, abs=5e-3)
    assert m.gain_margin_frequency == pytest.approx(math.sqrt(2.0), rel=1e-9)
    assert m.phase_margin == pytest.approx(53.4, abs=0.05)
    assert m.lower_gain_margin is None
    # Delay margin = PM/ωgc (radians over rad/s).
    assert m.delay_margin == pytest.approx(math.radians(m.phase_margin) / m.phase_margin_frequency)


@pytest.mark.parametrize("k", [0.5, 3.0, 5.9, 6.1, 8.0])
def test_textbook_loop_stability_range_matches_routh(k):
    # Routh on s^3 + 3 s^2 + 2 s + K: stable iff 0 < K < 6.
    expected = routh_stable([1.0, 3.0, 2.0, k])
    assert expected == (0 < k < 6)
    lt = loop_transfer(siso_parts(*TEXTBOOK, k=k))
    assert (unstable_poles(lt) == 0) == expected
    if expected:  # the gain margin scales as 6/K
        assert loop_margins(siso_parts(*TEXTBOOK, k=k)).channels[0].gain_margin == \
            pytest.approx(6.0 / k, rel=1e-8)


# ---------------------------------------------------------------- random loops

def random_stable_loops(count=30, seed=20240611):
    """Seeded random SISO plants (2–5 stable poles, some complex) with a stabilising gain."""
    rng = np.random.default_rng(seed)
    out = []
    while len(out) < count:
        poles = []
        order = int(rng.integers(2, 6))
        while len(poles) < order:
            if order - len(poles) >= 2 and rng.random() < 0.5:
                wn, zeta = 10 ** rng.uniform(-1, 1.3), rng.uniform(0.05, 0.9)
                poles += [complex(-zeta * wn, wn * math.sqrt(1 - zeta ** 2))] * 1
                poles.append(poles[-1].conjugate())
            else:
                poles.append(complex(-10 ** rng.uniform(-1, 1.3), 0))
        den = np.real(np.poly(poles))
        nz = int(rng.integers(0, order))
        num = np.real(np.poly(-10 ** rng.uniform(-1, 1.3, nz))) if nz else np.array([1.0])
        num = num * abs(den[-1] / num[-1]) * 10 ** rng.uniform(-0.5, 1.5)
        a, b, c, d = ic.tf_siso(num, den)
        if unstable_poles(lt_of(a, b, c, d)) == 0:
            out.append((a, b, c, d))
    return out


LOOPS = random_stable_loops()


def dense(a, b, c, d, lo, hi, n=100000):
    """Brute force: a dense solve of (jωI − A) x = B at every point (no reduction)."""
    w = np.geomspace(lo, hi, n)
    a, b, c = np.asarray(a, float), np.asarray(b, float), np.asarray(c, float)
    m = 1j * w[:, None, None] * np.eye(a.shape[0]) - a
    x = np.linalg.solve(m, np.broadcast_to(b, (w.size,) + b.shape))
    return w, (c @ x)[:, 0, 0] + float(np.asarray(d).ravel()[0])


@pytest.mark.parametrize("index", range(len(LOOPS)))
def test_random_loops_against_python_control(index):
    control = pytest.importorskip("control")
    a, b, c, d = LOOPS[index]
    ours = siso_margins(lt_of(a, b, c, d))
    gm, pm, _sm, wpc, wgc, _ws = control.stability_margins(control.ss(a, b, c, d),
                                                           returnall=True)
    # python-control (poly method) reports every crossing it finds; each must be one of ours.
    for w in wgc:
        assert min(abs(np.array(ours.gain_crossovers) - w)) <= 1e-6 * w
    # python-control's polynomial method can report a phase crossing far above every pole
    # where |L| is at rounding level (≈1e-16, "GM ≈ 1e15"): a root of the rounded polynomial
    # Im(N(jω)·conj(D(jω))), not of L. Those are checked against a dense grid instead.
    spurious = np.isfinite(wpc) & (gm > 1e12)
    for w in wpc[spurious]:
        grid, h = dense(a, b, c, d, w / 10, w * 10, 20001)
        assert np.max(abs(h)) < 1e-10  # |L| is rounding-level there: no meaningful crossing
    wpc, gm = wpc[~spurious], gm[~spurious]
    for w in wpc[np.isfinite(wpc) & (wpc > 0)]:
        assert min(abs(np.array(ours.phase_crossovers) - w)) <= 1e-6 * w
    missed = [w for w in ours.gain_crossovers if not np.any(abs(wgc - w) <= 1e-6 * w)]
    missed += [w for w in ours.phase_crossovers
               if w > 0 and not np.any(abs(wpc - w) <= 1e-6 * w)]
    if missed:
        # python-control missed a crossing: check ours against a dense brute-force grid
        # instead (a sign change of |L| - 1, or of Im L with Re L < 0, next to it).
        for w0 in missed:
            w, h = dense(a, b, c, d, w0 * 0.999, w0 * 1.001, 2001)
            assert np.any(np.diff(np.sign(abs(h) - 1))) or np.any(
                np.diff(np.sign(h.imag)) & (h.real[1:] < 0))
    if len(wgc):
        pms = np.remainder(np.angle([complex(control.ss(a, b, c, d)(1j * w)) for w in wgc],
                                    deg=True), 360.0) - 180.0
        assert min(abs(pms)) == pytest.approx(abs(ours.phase_margin), abs=1e-6)
    else:
        assert math.isinf(ours.phase_margin)
    finite = gm[np.isfinite(gm)]
    if finite.size:  # python-control's gm is the crossing gain nearest 1 (in log)
        near = finite[np.argmin(abs(np.log(finite)))]
        ours_k = [k for k in (ours.gain_margin, ours.lower_gain_margin)
                  if k is not None and math.isfinite(k)]
        assert min(abs(np.log(ours_k) - math.log(near))) <= 1e-6
    else:
        assert math.isinf(ours.gain_margin)


@pytest.mark.parametrize("index", range(len(LOOPS)))
def test_sensitivity_peak_bounds(index):
    # Åström & Murray, Feedback Systems: GM ≥ Ms/(Ms − 1) and PM ≥ 2·arcsin(1/(2 Ms)).
    a, b, c, d = LOOPS[index]
    m = siso_margins(lt_of(a, b, c, d))
    ms = m.sensitivity_peak
    assert ms >= 1.0 - 1e-9  # strictly proper loop: |S(j∞)| = 1
    if ms > 1.0:
        assert m.gain_margin >= ms / (ms - 1.0) * (1 - 1e-7)
    if math.isfinite(m.phase_margin):
        assert abs(m.phase_margin) >= math.degrees(2 * math.asin(1 / (2 * ms))) - 1e-6
    # and against a dense brute-force grid: the peak is not underestimated
    w, h = dense(a, b, c, d, 1e-3, 1e4)
    assert ms >= np.max(1.0 / abs(1.0 + h)) * (1 - 1e-9)


# ---------------------------------------------------------------- disk margins

def test_disk_margin_relations_and_python_control():
    control = pytest.importorskip("control")
    m = siso_margins(lt_of(*TEXTBOOK))
    alpha = m.disk_margin
    # Seiler, Packard & Gahinet 2020, balanced disk (σ = 0): α = 1/‖S − I/2‖∞ = 2/‖S − T‖∞.
    w, h = dense(*TEXTBOOK, 1e-3, 1e3)
    assert alpha == pytest.approx(2.0 / np.max(abs((1 - h) / (1 + h))), rel=1e-6)
    # python-control's disk_margins (SISO path: 1/|S − I/2| on the given grid)
    dm, dgm, dpm = control.disk_margins(control.ss(*TEXTBOOK), w[::20])
    assert alpha == pytest.approx(float(dm), rel=1e-4)
    assert disk_phase(alpha) == pytest.approx(float(dpm), rel=1e-4)
    lo, hi = disk_gain_range(alpha)
    assert 20 * math.log10(hi) == pytest.approx(float(dgm), rel=1e-4)
    # The disk margin is a guarantee: classical margins are at least as large.
    assert hi <= m.gain_margin and disk_phase(alpha) <= m.phase_margin
    # every real gain inside the disk's range keeps the loop stable (eigenvalues)
    for k in np.linspace(lo, hi, 9):
        assert unstable_poles(lt_of(*TEXTBOOK), k) == 0


def test_disk_margin_paper_example():
    # Seiler, Packard & Gahinet 2020 use L(s) = 25 / (s^3 + 10 s^2 + 10 s + 10) to show
    # that classical margins can look fine while the disk margin is small. The figures
    # below are recalled from memory, not read from the paper: classical GM ≈ 3.6 (11.1 dB),
    # PM ≈ 29.5°, disk margin α ≈ 0.46, i.e. gains ≈ [0.63, 1.59] (≈ ±4 dB).
    m = siso_margins(lt_of(*ic.tf_siso([25.0], [1.0, 10.0, 10.0, 10.0])))
    assert m.gain_margin == pytest.approx(3.6, rel=0.01)  # exact: (10·10 − 10)/25 = 3.6
    assert m.phase_margin == pytest.approx(29.5, abs=0.5)
    assert m.disk_margin == pytest.approx(0.46, abs=0.01)
    lo, hi = disk_gain_range(m.disk_margin)
    assert lo == pytest.approx(0.63, abs=0.01) and hi == pytest.approx(1.59, abs=0.02)


def test_mimo_spinning_body_loop_at_a_time_hides_a_small_multiloop_margin():
    # The spinning-body example of the python-control disk_margins docstring (also a classic
    # robust-control textbook case): each loop alone has GM = ∞ and PM = 90°, yet
    # simultaneous ±10 % gain changes in the two channels destabilise it.
    z = np.zeros
    a = np.array([[0.0, 10.0], [-10.0, 0.0]])
    c = np.array([[1.0, 10.0], [-10.0, 1.0]])
    parts = LoopParts("output_gain", a, np.eye(2), c, z((2, 2)), None, z((0, 0)), z((0, 2)),
                      z((2, 0)), np.eye(2), ("u1", "u2"), ("y1", "y2"))
    m = loop_margins(parts)
    for ch in m.channels:
        assert math.isinf(ch.gain_margin) and ch.phase_margin == pytest.approx(90.0)
    assert m.disk_margin < 0.11
    lt = loop_transfer(parts)
    lo, hi = disk_gain_range(m.disk_margin)
    rng = np.random.default_rng(7)
    for _ in range(20):  # inside the guaranteed range: stable, whatever the combination
        g = np.diag(rng.uniform(lo, hi, 2))
        assert unstable_poles(LoopTransfer(lt.A, lt.B @ g, lt.C, lt.D @ g, None, None,
                                           lt.channels)) == 0
    g = np.diag([1.1, 0.9])  # just outside: unstable
    assert unstable_poles(LoopTransfer(lt.A, lt.B @ g, lt.C, lt.D @ g, None, None,
                                       lt.channels)) > 0
    # loop-at-a-time agrees with closing the other channel by hand
    one = channel_loop(lt, 0)
    assert one.D.shape == (1, 1) and unstable_poles(one) == 0
