"""The pole region of ``pole_region`` requirements as geometry of the s-plane.

The allowed region is the intersection of up to three half-planes and discs: decay rate at
least α (``Re s ≤ −α``), damping at least ζ (a sector about the negative real axis) and
natural frequency at most ω (``|s| ≤ ω``). A mode's verdict reads its signed distance to the
region's boundary, which is 1-Lipschitz in s, so the mode's error bound transfers to it.
"""

from __future__ import annotations

import math

__all__ = ["region_distance"]


def region_distance(s: complex, alpha: float | None, zeta: float | None,
                    omega: float | None) -> float:
    """Signed s-plane distance from ``s`` to the boundary of the allowed region.

    Positive inside. Inside, it is exact (the smallest distance to any constraint's boundary);
    outside, it is the largest distance to a single violated constraint, a lower bound of the
    distance to the region.
    """
    if math.isinf(s.real):
        return math.inf
    d = []
    if alpha is not None:
        d.append(-alpha - s.real)
    if zeta is not None:
        theta0 = math.acos(max(-1.0, min(1.0, zeta)))  # half-angle of the sector about -Re
        r = abs(s)
        phi = math.atan2(abs(s.imag), -s.real) if r > 0 else 0.0
        gap = theta0 - phi
        d.append(r * math.sin(gap) if abs(gap) < math.pi / 2 else math.copysign(r, gap))
    if omega is not None:
        d.append(omega - abs(s))
    # Inside, the nearest boundary is the nearest constraint's; outside, min(d) is minus the
    # largest single violation.
    return min(d)
