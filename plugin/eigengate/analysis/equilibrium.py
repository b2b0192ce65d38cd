"""Type of the equilibrium at the origin of x' = Ax (or x[k+1] = Ax[k]) from its modes.

Directions are counted with multiplicity on the s-plane equivalent: stable (Re s < 0),
unstable (Re s > 0) and center (Re s = 0 within the eigenvalue's error bound). The names for
two states follow common practice (a saddle has real eigenvalues of opposite sign, two of the
same sign make a node, a complex pair a focus, a purely imaginary pair a center); repeated or
zero eigenvalues are *degenerate* (a zero eigenvalue means a line of equilibria, not an
isolated one). For other orders the same rules give a coarse type, and the direction counts
are the precise statement.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable

from .modes import Mode

__all__ = ["Equilibrium", "classify", "EQUILIBRIUM_TYPES"]

EQUILIBRIUM_TYPES = ("saddle", "stable-node", "unstable-node", "stable-focus", "unstable-focus",
                     "center", "degenerate", "non-hyperbolic")


@dataclass(frozen=True)
class Equilibrium:
    """Classification of the origin."""

    type: str
    stable: int
    unstable: int
    center: int
    uncertain: bool
    detail: str

    @property
    def hyperbolic(self) -> bool:
        return self.center == 0

    def describe(self) -> str:
        text = (f"{self.type} ({self.stable} stable, {self.unstable} unstable, {self.center} "
                f"center direction{'s' if self.center != 1 else ''}"
                f"{'' if self.hyperbolic else ', non-hyperbolic'})")
        if self.detail:
            text += f": {self.detail}"
        if self.uncertain:
            text += " [an eigenvalue lies within its numerical uncertainty of the boundary]"
        return text


def side(mode: Mode) -> int:
    """-1 stable, +1 unstable, 0 on the boundary within the mode's error bound."""
    re = mode.s.real
    if re < -mode.uncertainty:
        return -1
    if re > mode.uncertainty:
        return 1
    return 0


def on_boundary_inexact(mode: Mode) -> bool:
    """True when the mode is within its error bound of the boundary but not exactly on it."""
    return side(mode) == 0 and mode.s.real != 0.0


def classify(modes: Iterable[Mode]) -> Equilibrium:
    """Classify the origin from ``modes`` (normally every mode of a spectrum)."""
    modes = list(modes)
    stable = sum(m.count for m in modes if side(m) < 0)
    unstable = sum(m.count for m in modes if side(m) > 0)
    center = sum(m.count for m in modes if side(m) == 0)
    n = stable + unstable + center
    uncertain = any(on_boundary_inexact(m) for m in modes)
    zero = [m for m in modes if side(m) == 0 and abs(m.s) <= m.uncertainty]
    repeated = [m for m in modes if m.multiplicity > 1]
    detail = ""
    if stable and unstable:
        kind = "saddle"
    elif zero:
        kind = "degenerate"
        detail = (f"zero eigenvalue ×{sum(m.count for m in zero)}: the equilibria form a "
                  "subspace, not an isolated point")
    elif center:
        if center == n and all(m.pair and not m.defective for m in modes):
            kind = "center"
        else:
            kind = "degenerate" if n <= 2 else "non-hyperbolic"
    else:
        sign = "stable" if stable else "unstable"
        if n == 2 and repeated:
            kind = "degenerate"
            m = repeated[0]
            detail = (f"repeated eigenvalue {m.eigenvalue.real:.6g}: "
                      + ("improper (defective) " if m.defective else "star (proper) ")
                      + f"{sign} node")
        elif any(m.pair for m in modes):
            kind = f"{sign}-focus"
        else:
            kind = f"{sign}-node"
    return Equilibrium(type=kind, stable=stable, unstable=unstable, center=center,
                       uncertain=uncertain, detail=detail)
