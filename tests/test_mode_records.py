"""What a mode record says about itself: its one-line description, its dominant states, the
rounding that orders modes, and the s-plane figures of discrete and boundary modes.

Figures from the handbook relations ζ = -Re(s)/|s|, ωn = |s|, τ = -1/Re(s) and, for discrete
models, s = ln(z)/T (a negative real z maps to Im s = π/T); second-order standard form
s² + 2ζωn s + ωn² (common in control textbooks)."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from eigengate import from_arrays
from eigengate.analysis.modes import _fmt_complex, _round_sig, analyse


def modes(A, **kw):
    return analyse(from_arrays(np.asarray(A, float), **kw)).modes


@pytest.mark.parametrize("A, text", [
    ([[-2.0]], "-2 (ζ=1, ωn=2 rad/s, τ=0.5 s)"),
    ([[0.0, 1.0], [-4.0, -0.4]], "-0.2±1.98997j (ζ=0.1, ωn=2 rad/s, τ=5 s)"),
    ([[0.0]], "0 (ζ=0, ωn=0 rad/s, τ=∞)"),
    ([[0.0, 1.0], [-4.0, 0.0]], "0±2j (ζ=0, ωn=2 rad/s, τ=∞)"),
    ([[-1.0, 0.0], [0.0, -1.0]], "-1 (ζ=1, ωn=1 rad/s, τ=1 s) ×2 semisimple"),
    ([[-1.0, 1.0], [0.0, -1.0]], "-1 (ζ=1, ωn=1 rad/s, τ=1 s) ×2 defective")])
def test_describe(A, text):
    (m,) = modes(A)
    assert m.describe() == text


def test_complex_formats():
    assert _fmt_complex(complex(1, 2), True) == "1±2j"
    assert _fmt_complex(complex(1, 2), False) == "1+2j"
    assert _fmt_complex(complex(0.5, 1.0), False) == "0.5+1j"
    assert _fmt_complex(complex(1, -2), False) == "1-2j"
    assert _fmt_complex(complex(-3, 0), True) == "-3"


def test_round_sig():
    assert _round_sig(123456789012.345) == 123456789000.0
    assert _round_sig(-1.23456789012345e-5) == -1.234567890e-5
    assert _round_sig(1234.5, 2) == 1200.0 and _round_sig(0.0) == 0.0
    assert _round_sig(math.inf) == math.inf and math.isnan(_round_sig(math.nan))


def test_top_states():
    (m,) = modes([[-1.0, 0, 0], [0, -2.0, 0], [0, 0, -3.0]])[:1]
    m = replace(m, states=("a", "b", "c"))
    p = lambda *v: replace(m, participation=np.array(v))  # noqa: E731
    assert p(0.1, 0.6, 0.3).top_states(2) == [("b", 0.6), ("c", 0.3)]
    assert p(0.5, 0.5, 0.0).top_states() == [("a", 0.5), ("b", 0.5)]  # ties: state order
    assert p(0.9, 0.05, 0.05).top_states() == [("a", 0.9), ("b", 0.05), ("c", 0.05)]
    assert p(0.9, 0.04, 0.06).top_states() == [("a", 0.9), ("c", 0.06)]
    # none above the floor: the largest one still names the mode
    assert p(0.2, 0.3, 0.5).top_states(min_factor=0.9) == [("c", 0.5)]


def test_discrete_figures():
    T = 0.1
    (dead,) = modes([[0.0]], sample_period=T)  # deadbeat z = 0: done in one step
    assert (dead.eigenvalue, dead.s, dead.uncertainty) == (0j, complex(-math.inf, 0.0), 0.0)
    assert (dead.damping_ratio, dead.time_constant) == (1.0, 0.0)
    (neg,) = modes([[-0.5]], sample_period=T)  # oscillation at the Nyquist frequency
    assert neg.s.real == pytest.approx(math.log(0.5) / T) and neg.s.imag == math.pi / T
    assert neg.eigenvalue == -0.5
    (pos,) = modes([[0.5]], sample_period=T)
    assert pos.s == complex(math.log(0.5) / T, 0.0)
    # the bound maps as δs = δz / (|z| T)
    (z,) = analyse(from_arrays(np.array([[0.5]]))).modes
    assert pos.uncertainty == pytest.approx(z.uncertainty / (0.5 * T), rel=1e-12)


def test_boundary_figures_have_no_negative_zero():
    (c,) = modes([[0.0, 1.0], [-4.0, 0.0]])
    assert c.damping_ratio == 0.0 and math.copysign(1.0, c.damping_ratio) == 1.0
    assert c.time_constant == math.inf and c.natural_frequency == pytest.approx(2.0)


def test_spectrum_lists_every_eigenvalue():
    A = np.zeros((5, 5))
    A[:2, :2] = [[0.0, 1.0], [-4.0, -0.4]]
    A[2:, 2:] = np.diag([-3.0, -3.0, -7.0])
    s = analyse(from_arrays(A))
    ev = s.eigenvalues()
    assert len(ev) == 5 == s.n_eigenvalues
    assert sorted(round(z.real, 9) for z in ev) == [-7.0, -3.0, -3.0, -0.2, -0.2]
    assert sorted(round(z.imag, 5) for z in ev) == [-1.98997, 0.0, 0.0, 0.0, 1.98997]


def test_spectrum_record():
    # modes are numbered from 1, least stable first; the norm the bounds scale with is the
    # Frobenius norm of the matrix LAPACK saw; balancing is used only when it helps
    s = analyse(from_arrays(np.diag([-3.0, -1.0, -2.0])))
    assert [m.index for m in s.modes] == [1, 2, 3]
    assert [m.eigenvalue for m in s.modes] == [-1.0, -2.0, -3.0]
    assert s.norm == pytest.approx(math.sqrt(14.0)) and s.balanced is False
    assert all(m.geometric_multiplicity == 1 and m.multiplicity == 1 for m in s.modes)
    # balancing (scipy.linalg.matrix_balance, powers of 2) brings this one near [[-1, 1], [1, -2]]
    from scipy.linalg import matrix_balance

    badly_scaled = np.array([[-1.0, 1e6], [1e-6, -2.0]])
    b = analyse(from_arrays(badly_scaled))
    ref = np.linalg.norm(matrix_balance(badly_scaled, permute=False)[0], "fro")
    assert b.balanced is True and b.norm == ref and ref < 3.0
    assert s.infinite == 0 and s.spectral_abscissa == -1.0 and s.spectral_radius == 3.0
