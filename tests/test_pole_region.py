"""The pole-region margin is a true s-plane distance (checked against brute force geometry)."""

import math

import numpy as np
import pytest

from eigengate.rules.requirements import region_distance


def brute_distance(s, alpha, zeta, omega):
    """Distance from s to the region's boundary by dense sampling of the region (common practice:
    a signed distance is positive inside, negative outside)."""
    theta0 = math.acos(zeta)
    xs = np.linspace(-12, 4, 1601)
    ys = np.linspace(-8, 8, 1601)
    X, Y = np.meshgrid(xs, ys)
    Z = X + 1j * Y
    inside = (X <= -alpha) & (np.abs(np.angle(-Z)) <= theta0) & (np.abs(Z) <= omega)
    # boundary points: inside points with an outside neighbour
    edge = inside & ~(np.roll(inside, 1, 0) & np.roll(inside, -1, 0) & np.roll(inside, 1, 1)
                      & np.roll(inside, -1, 1))
    d = np.abs(Z[edge] - s).min()
    r, c = np.argmin(np.abs(ys - s.imag)), np.argmin(np.abs(xs - s.real))
    return d if inside[r, c] else -d


@pytest.mark.parametrize("s", [-3 + 1j, -1.5 + 0.2j, -6 + 5j, -0.2 + 3j, 1 + 1j, -9 + 0j, -2 + 6j])
def test_signed_distance_inside_matches_geometry(s):
    alpha, zeta, omega = 0.5, 0.4, 8.0
    got = region_distance(s, alpha, zeta, omega)
    ref = brute_distance(s, alpha, zeta, omega)
    assert math.copysign(1, got) == math.copysign(1, ref)
    if got > 0:  # inside the distance is exact
        assert got == pytest.approx(ref, abs=0.03)
    else:  # outside it is a lower bound of the true distance
        assert -got <= -ref + 0.03


def test_single_constraints_reduce_to_their_own_margin():
    s = -1.0 + 2.0j
    assert region_distance(s, 0.25, None, None) == pytest.approx(0.75)
    assert region_distance(s, None, None, 3.0) == pytest.approx(3.0 - abs(s))
    # sector: distance to the ray at angle arccos(ζ) from the negative real axis
    zeta = 0.2
    phi = math.atan2(2.0, 1.0)
    assert region_distance(s, None, zeta, None) == pytest.approx(abs(s) * math.sin(math.acos(zeta) - phi))
