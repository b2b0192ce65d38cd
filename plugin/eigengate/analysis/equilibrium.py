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
from typing import TYPE_CHECKING, Iterable

from ..errors import counted

if TYPE_CHECKING:  # pragma: no cover - the names of equilibria are read without numpy
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
            text += " [type not decided: it depends on eigenvalues within their numerical " \
                    "uncertainty]"
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


def classify(modes: Iterable[Mode], *, declared: int = 0, set_aside: bool = True
             ) -> Equilibrium:
    """Classify the origin from ``modes`` (normally every mode of a spectrum). ``declared``
    counts the eigenvalues of declared known modes, for the description: set aside (not in
    ``modes``) or, with ``set_aside=False``, all the modes there are and classified.

    The type is *uncertain* when it depends on an eigenvalue within its error bound of the
    boundary (Re s = 0 but not computed exactly there), or on a cluster (a mode of
    multiplicity > 1: eigenvalues within their bounds of each other or of the real axis),
    whose members might be distinct, or a complex pair, in the exact matrix.
    """
    modes = list(modes)
    stable = unstable = center = 0
    boundary, repeated = [], []
    for m in modes:  # side(m), m.count and the repeated modes in one pass
        re, u = m.s.real, m.uncertainty
        count = m.count
        if re < -u:
            stable += count
        elif re > u:
            unstable += count
        else:
            boundary.append(m)
            center += count
        if m.multiplicity > 1:
            repeated.append(m)
    n = stable + unstable + center
    reasons = []
    if any(m.s.real != 0.0 for m in boundary):  # on_boundary_inexact
        reasons.append("an eigenvalue lies within its numerical uncertainty of the boundary")
    zero = [m for m in boundary if abs(m.s) <= m.uncertainty]
    real_repeated = [m for m in repeated if not m.pair]
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
        # A repeated eigenvalue splits under any perturbation into distinct real eigenvalues
        # (a node) or a complex pair (a focus): the degenerate or node label is not decided.
        if kind == "degenerate" or (kind.endswith("-node") and real_repeated):
            reasons.append("eigenvalues within their numerical uncertainty of each other "
                           f"({real_repeated[0].eigenvalue.real:.6g} ×"
                           f"{real_repeated[0].multiplicity}) could be distinct or a complex "
                           "pair")
    if declared:
        detail += ("; " if detail else "") + (
            f"{counted(declared, 'declared known eigenvalue')} set aside" if set_aside else
            "every eigenvalue is a declared known mode, so the type is theirs")
    if reasons:
        detail += ("; " if detail else "") + "; ".join(reasons)
    eq = object.__new__(Equilibrium)  # Equilibrium(...) without the frozen __init__'s cost
    eq.__dict__.update(type=kind, stable=stable, unstable=unstable, center=center,
                       uncertain=bool(reasons), detail=detail)
    return eq
