"""Transfer-function realisation and loop closing, checked against python-control.

Reference library: python-control (``control.tf``, ``control.ss``, ``control.feedback``,
``control.minreal``) evaluates the same systems independently of our numpy formulas.
"""

import control
import numpy as np
import pytest

from eigengate.model import interconnect as ic

POINTS = [0.3j, 1.0 + 2.0j, 5.0j, -0.4 + 0.7j]


def frd(a, b, c, d, s):
    """C (sI - A)^-1 B + D at the complex point s."""
    n = a.shape[0]
    if n == 0:
        return d.astype(complex)
    return c @ np.linalg.solve(s * np.eye(n) - a, b) + d


def ref_frd(sys, s):
    return np.atleast_2d(np.asarray(sys(s)))


def test_siso_controllable_form_matches_python_control():
    # python-control: control.tf evaluated at a few complex points
    num, den = [2.0, 3.0, 1.0], [4.0, 2.0, 8.0, 4.0]
    a, b, c, d = ic.tf_siso(num, den)
    assert a.shape == (3, 3)
    np.testing.assert_allclose(a[0], [-0.5, -2.0, -1.0])  # normalised by the leading 4
    ref = control.tf(num, den)
    for s in POINTS:
        np.testing.assert_allclose(frd(a, b, c, d, s), ref_frd(ref, s), rtol=1e-12)


def test_siso_biproper_has_feedthrough_and_leading_zeros_are_ignored():
    a, b, c, d = ic.tf_siso([0.0, 0.0, 3.0, 1.0], [0.0, 1.0, 2.0])
    assert d[0, 0] == pytest.approx(3.0)
    ref = control.tf([3.0, 1.0], [1.0, 2.0])  # python-control reference
    for s in POINTS:
        np.testing.assert_allclose(frd(a, b, c, d, s), ref_frd(ref, s), rtol=1e-12)


def test_static_gain_has_no_states():
    a, b, c, d = ic.tf_siso([6.0], [2.0])
    assert a.shape == (0, 0) and d[0, 0] == 3.0


def test_improper_and_zero_denominator_refused():
    with pytest.raises(ic.InterconnectError, match="improper: numerator degree 2 exceeds "
                       "denominator degree 1"):
        ic.tf_siso([1, 0, 0], [1, 1])
    with pytest.raises(ic.InterconnectError, match="zero denominator"):
        ic.tf_siso([1], [0, 0])
    with pytest.raises(ic.InterconnectError, match=r"entry \(1,2\) is improper"):
        ic.tf_mimo([[[1], [1, 0]]], [[[1, 1], [1]]])


@pytest.mark.parametrize("num, den, order", [
    # [[1/(s+1), 1/(s+1)]]: one shared pole, minimal order 1
    ([[[1], [1]]], [[[1, 1], [1, 1]]], 1),
    # diag(1/(s+1), 1/(s+2)): minimal order 2
    ([[[1], [0]], [[0], [1]]], [[[1, 1], [1]], [[1], [1, 2]]], 2),
    # [[1/(s+1)], [1/(s+1)]] (one input, two outputs): order 1
    ([[[1]], [[2]]], [[[1, 1]], [[1, 1]]], 1),
    # [[1/(s+1), 1/(s+2)], [1/(s+1), 1/(s+2)]]: rank-one in each column, order 2
    ([[[1], [1]], [[1], [1]]], [[[1, 1], [1, 2]], [[1, 1], [1, 2]]], 2),
    # [[1/(s+1)], [1/(s+2)]] with the same input: order 2
    ([[[1]], [[1]]], [[[1, 1]], [[1, 2]]], 2),
])
def test_mimo_minimal_order_and_frequency_response(num, den, order):
    a, b, c, d = ic.tf_mimo(num, den)
    assert a.shape == (order, order)
    ref = control.tf(num, den)  # python-control reference
    for s in POINTS:
        np.testing.assert_allclose(frd(a, b, c, d, s), ref_frd(ref, s), rtol=1e-10, atol=1e-12)


def test_mimo_proper_entries_with_feedthrough():
    num = [[[1, 2], [3]], [[2, 0, 1], [1, 0]]]
    den = [[[1, 3], [1, 1]], [[1, 1, 4], [1, 5]]]
    a, b, c, d = ic.tf_mimo(num, den)
    ref = control.tf(num, den)  # python-control reference
    for s in POINTS:
        np.testing.assert_allclose(frd(a, b, c, d, s), ref_frd(ref, s), rtol=1e-10)
    # distinct poles -3, roots of s²+s+4 (column 1) and -1, -5 (column 2): McMillan degree 5
    assert a.shape[0] == 5


def test_observable_part_removes_unobservable_state():
    a = np.diag([-1.0, -2.0, -3.0])
    b = np.ones((3, 1))
    c = np.array([[1.0, 0.0, 1.0]])
    ar, br, cr, dr = ic.observable_part(a, b, c, np.zeros((1, 1)))
    assert ar.shape == (2, 2)
    np.testing.assert_allclose(np.sort(np.linalg.eigvals(ar).real), [-3.0, -1.0])


def plant():
    a = np.array([[0.0, 1.0, 0.0], [-2.0, -0.5, 1.0], [0.0, 0.0, -4.0]])
    b = np.array([[0.0, 1.0], [1.0, 0.0], [0.5, 2.0]])
    c = np.array([[1.0, 0.0, 0.0], [0.0, 1.0, 1.0]])
    d = np.array([[0.2, 0.0], [0.0, 0.1]])
    return a, b, c, d


def assert_same_system(ours, ref):
    a, b, c, d = ours
    np.testing.assert_allclose(np.sort_complex(np.linalg.eigvals(a)),
                               np.sort_complex(control.poles(ref)), rtol=1e-9, atol=1e-9)
    for s in POINTS:
        np.testing.assert_allclose(frd(a, b, c, d, s), ref_frd(ref, s), rtol=1e-9, atol=1e-12)


def test_state_feedback_all_inputs():
    a, b, c, d = plant()
    k = np.array([[1.0, 0.5, 0.0], [0.2, 0.0, 0.3]])
    a_cl, b_cl, c_cl, d_cl = ic.state_feedback(a, b, c, d, k, [0, 1])
    np.testing.assert_allclose(a_cl, a - b @ k)
    # python-control reference: feedback of the plant through a gain on the full state
    full = control.ss(a, b, np.vstack([c, np.eye(3)]), np.vstack([d, np.zeros((3, 2))]))
    loop = control.feedback(full, control.ss([], [], [], np.hstack([np.zeros((2, 2)), k])))
    ref = control.ss(loop.A, loop.B, loop.C[:2], loop.D[:2])
    assert_same_system((a_cl, b_cl, c_cl, d_cl), ref)


def test_state_feedback_on_named_subset():
    a, b, c, d = plant()
    k = np.array([[0.0, 2.0, 1.0]])
    a_cl = ic.state_feedback(a, b, c, d, k, [1])[0]
    np.testing.assert_allclose(a_cl, a - b[:, [1]] @ k)


def test_output_feedback_with_feedthrough():
    a, b, c, d = plant()
    k = np.array([[0.5, 0.0], [0.3, 1.5]])
    ours = ic.output_feedback(a, b, c, d, k, [0, 1], [0, 1])
    m = np.linalg.inv(np.eye(2) + k @ d)
    np.testing.assert_allclose(ours[0], a - b @ m @ k @ c)
    # python-control reference: control.feedback(P, K) with negative feedback
    ref = control.feedback(control.ss(a, b, c, d), control.ss([], [], [], k))
    assert_same_system(ours, ref)


def test_output_feedback_on_selected_signals():
    a, b, c, d = plant()
    k = np.array([[0.7]])
    ours = ic.output_feedback(a, b, c, d, k, [1], [0])
    # python-control reference: feedback through a 2×2 gain that is zero except from
    # output 1 to input 2, the same loop as selecting those channels
    gain = np.zeros((2, 2))
    gain[1, 0] = 0.7
    ref = control.feedback(control.ss(a, b, c, d), control.ss([], [], [], gain))
    assert_same_system(ours, ref)


def test_ill_posed_output_loop_refused():
    a, b, c, d = plant()
    d = np.array([[1.0, 0.0], [0.0, 1.0]])
    with pytest.raises(ic.InterconnectError, match="ill-posed"):
        ic.output_feedback(a, b, c, d, -np.eye(2), [0, 1], [0, 1])


def test_dynamic_controller_matches_python_control():
    a, b, c, d = plant()
    ac = np.array([[-1.0, 0.5], [0.0, -3.0]])
    bc = np.array([[1.0, 0.0], [0.5, 1.0]])
    cc = np.array([[0.4, 0.0], [0.1, 0.2]])
    dc = np.array([[0.3, 0.0], [0.0, 0.6]])
    ours = ic.dynamic_feedback(a, b, c, d, ac, bc, cc, dc, [0, 1], [0, 1])
    assert ours[0].shape == (5, 5)
    # python-control reference: control.feedback(P, C) — negative feedback, states of P first
    ref = control.feedback(control.ss(a, b, c, d), control.ss(ac, bc, cc, dc))
    assert_same_system(ours, ref)
    # python-control's controller reads +y and is subtracted at the plant input; ours reads -y
    # and is added, so its controller states are the negatives of ours: A_cl = T A_ref T.
    t = np.diag([1.0, 1.0, 1.0, -1.0, -1.0])
    np.testing.assert_allclose(ours[0], t @ ref.A @ t, atol=1e-12)


def test_dynamic_controller_formula_in_the_docstring():
    a, b, c, d = plant()
    ac, bc, cc, dc = np.array([[-2.0]]), np.array([[1.0, 1.0]]), np.array([[1.0], [0.5]]), \
        np.array([[0.2, 0.0], [0.1, 0.3]])
    m = np.linalg.inv(np.eye(2) + dc @ d)
    expected = np.block([[a - b @ m @ dc @ c, b @ m @ cc],
                         [-bc @ (c - d @ m @ dc @ c), ac - bc @ d @ m @ cc]])
    np.testing.assert_allclose(ic.dynamic_feedback(a, b, c, d, ac, bc, cc, dc, [0, 1],
                                                   [0, 1])[0], expected, atol=1e-12)


def test_dynamic_siso_loop_on_selected_channels_and_discrete():
    # discrete plant and PI controller: the algebra is the same in z (python-control, dt=0.1)
    a, b, c, d = plant()
    ac, bc, cc, dc = ic.tf_siso([1.5, -1.38], [1.0, -1.0])
    ours = ic.dynamic_feedback(a / 10, b, c, d, ac, bc, cc, dc, [0], [1])
    sel_p = control.ss(a / 10, b[:, [0]], c[[1], :], d[[1], [0]].reshape(1, 1), 0.1)
    ref_a = control.feedback(sel_p, control.tf([1.5, -1.38], [1.0, -1.0], 0.1)).A
    np.testing.assert_allclose(np.sort_complex(np.linalg.eigvals(ours[0])),
                               np.sort_complex(np.linalg.eigvals(ref_a)), atol=1e-9)
