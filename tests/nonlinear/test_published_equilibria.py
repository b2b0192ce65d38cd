"""Equilibria and linearisations against published results and python-control."""

import math
from pathlib import Path

import numpy as np
import pytest

from eigengate.analysis.equilibrium import classify
from eigengate.analysis.modes import analyse
from eigengate.analysis.nonlinear import VectorField, find_equilibria, jacobians, linearise

import importlib.util

_spec = importlib.util.spec_from_file_location("nl_fields", Path(__file__).with_name("fields.py"))
fields = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fields)


def vf(fn, states, inputs=(), **params):
    return VectorField(fn, tuple(states), tuple(inputs), params, reference=fn.__name__)


def kind_at(field, x, u=None):
    return classify(analyse(linearise(field, x, u)).modes)


# ---------------------------------------------------------------- Lorenz (Strogatz, ch. 9)

def test_lorenz_origin_is_a_saddle_with_the_published_eigenvalues():
    lorenz = vf(fields.lorenz, "xyz", rho=28.0)
    eig = sorted(analyse(linearise(lorenz, [0, 0, 0])).eigenvalues(), key=lambda z: z.real)
    expected = sorted([-8 / 3, (-11 - math.sqrt(1201)) / 2, (-11 + math.sqrt(1201)) / 2])
    assert [z.real for z in eig] == pytest.approx(expected, rel=1e-12)
    assert kind_at(lorenz, [0, 0, 0]).type == "saddle"


@pytest.mark.parametrize("rho, stable", [(20.0, True), (24.5, True), (25.0, False), (28.0, False)])
def test_lorenz_wing_equilibria_lose_stability_at_the_hopf_value(rho, stable):
    # C± = (±√(β(ρ−1)), ±√(β(ρ−1)), ρ−1) are stable below ρ_H = σ(σ+β+3)/(σ−β−1) ≈ 24.74.
    sigma, beta = 10.0, 8.0 / 3.0
    assert sigma * (sigma + beta + 3) / (sigma - beta - 1) == pytest.approx(24.7368, abs=1e-4)
    lorenz = vf(fields.lorenz, "xyz", rho=rho)
    r = math.sqrt(beta * (rho - 1))
    for s in (1, -1):
        eq = kind_at(lorenz, [s * r, s * r, rho - 1])
        assert (eq.unstable == 0) is stable


def test_lorenz_box_search_finds_the_three_equilibria():
    lorenz = vf(fields.lorenz, "xyz", rho=28.0)
    search = find_equilibria(lorenz, [-20, -20, -5], [20, 20, 40], starts=32)
    r = math.sqrt(8 / 3 * 27)
    xs = sorted(e.x for e in search.equilibria)
    assert len(xs) == 3
    assert np.allclose(xs, sorted([(-r, -r, 27.0), (0, 0, 0), (r, r, 27.0)]), atol=1e-8)
    types = {round(e.x[0]): e.equilibrium.type for e in search.equilibria}
    assert types[0] == "saddle" and types[round(r)] == "saddle"  # 1 stable + 2 unstable (focus)


# ---------------------------------------------------------------- Van der Pol, pendulum

@pytest.mark.parametrize("mu, expected", [(0.5, "unstable-focus"), (1.9, "unstable-focus"),
                                          (2.1, "unstable-node"), (4.0, "unstable-node")])
def test_van_der_pol_origin(mu, expected):
    # origin: unstable focus for 0 < μ < 2, unstable node for μ > 2 (standard result)
    assert kind_at(vf(fields.van_der_pol, ["x", "v"], mu=mu), [0, 0]).type == expected


def test_damped_pendulum_hanging_and_inverted():
    # hanging equilibrium: stable focus for small damping; inverted: saddle (common practice)
    p = vf(fields.pendulum, ["theta", "omega"], ["torque"], b=0.2)
    assert kind_at(p, [0, 0], [0]).type == "stable-focus"
    assert kind_at(p, [math.pi, 0], [0]).type == "saddle"
    assert kind_at(vf(fields.pendulum, ["theta", "omega"], ["torque"], b=3.0), [0, 0],
                   [0]).type == "stable-node"


# ---------------------------------------------------------------- Jacobian methods

def test_jacobian_methods_agree_and_are_chosen_by_trying():
    x, u = [0.7, -0.3], [0.2]
    exact_a = np.array([[0.0, 1.0], [-math.cos(0.7), -0.2]])
    a, b, how = jacobians(vf(fields.pendulum, "tw", ["u"]), x, u)
    assert how == "complex step" and np.allclose(a, exact_a, atol=1e-14)
    assert np.allclose(b, [[0.0], [1.0]], atol=1e-14)
    a, b, how = jacobians(vf(fields.pendulum_real_only, "tw", ["u"]), x, u)
    assert how == "central differences" and np.allclose(a, exact_a, atol=1e-8)
    with_jac = VectorField(fields.pendulum, ("t", "w"), ("u",), {},
                           jacobian=fields.pendulum_jacobian)
    assert jacobians(with_jac, x, u)[2] == "jacobian function"
    # accepts complex numbers but is not analytic (abs): detected, central differences used
    a, _, how = jacobians(vf(fields.not_analytic, "ab"), [-2.0, 1.0])
    assert how == "central differences" and a[0, 0] == pytest.approx(-1.0, abs=1e-8)


def test_linearisation_matches_python_control():
    control = pytest.importorskip("control")
    params = {"b": 0.35, "g_over_l": 2.0}
    sys = control.NonlinearIOSystem(
        lambda t, x, u, p: fields.pendulum(x, u, **params), None, inputs=1, outputs=2,
        states=2, name="pendulum")
    ref = control.linearize(sys, [0.4, 0.1], [0.3])
    ours = linearise(vf(fields.pendulum, "tw", ["u"], **params), [0.4, 0.1], [0.3])
    assert np.allclose(ours.A, ref.A, atol=1e-6) and np.allclose(ours.B, ref.B, atol=1e-6)


def test_search_that_finds_nothing_reports_why():
    search = find_equilibria(vf(fields.no_equilibrium, "ab"), [-1, -1], [1, 1], starts=8)
    assert search.equilibria == () and search.failed == 8
    assert "8 starts" in search.describe() and "did not converge" in search.describe()
