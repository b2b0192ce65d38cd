"""Vector fields for the nonlinear tests (imported as ``fields:NAME`` from this folder)."""

import math

import numpy as np


def lorenz(x, u, sigma=10.0, beta=8.0 / 3.0, rho=28.0):
    """Lorenz system (Strogatz, Nonlinear Dynamics and Chaos, ch. 9)."""
    return np.array([sigma * (x[1] - x[0]),
                     x[0] * (rho - x[2]) - x[1],
                     x[0] * x[1] - beta * x[2]])


def van_der_pol(x, u, mu=1.0):
    """x'' - mu (1 - x^2) x' + x = 0 as a first-order system."""
    return np.array([x[1], mu * (1.0 - x[0] ** 2) * x[1] - x[0]])


def pendulum(x, u, b=0.2, g_over_l=1.0):
    """Damped pendulum theta'' + b theta' + (g/l) sin(theta) = torque."""
    torque = u[0] if len(u) else 0.0
    return np.array([x[1], -b * x[1] - g_over_l * np.sin(x[0]) + torque])


def pendulum_jacobian(x, u, b=0.2, g_over_l=1.0):
    a = np.array([[0.0, 1.0], [-g_over_l * np.cos(x[0]), -b]])
    return a, np.array([[0.0], [1.0]])


def pendulum_real_only(x, u, b=0.2, g_over_l=1.0):
    """The pendulum through math.sin: refuses complex input, so central differences are used."""
    return [float(x[1]), float(-b * x[1] - g_over_l * math.sin(x[0]) + u[0])]


def not_analytic(x, u):
    """Accepts complex input but uses abs(): a complex step would be wrong here."""
    return np.array([np.abs(x[0]) - 1.0, -x[1]])


def wrong_shape(x, u):
    return np.array([x[0], x[1], 0.0])


def gives_nan(x, u):
    return np.array([np.nan, x[1]])


def raises(x, u):
    raise ZeroDivisionError("rotor speed is zero")


def no_equilibrium(x, u):
    return np.array([1.0 + x[0] ** 2, -x[1]])


def cubic(x, u, a=1.0):
    """x' = a x - x^3, y' = -y: equilibria at 0 and ±sqrt(a) for a > 0."""
    return np.array([a * x[0] - x[0] ** 3, -x[1]])
