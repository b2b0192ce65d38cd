"""Requirements on the type of the origin: its expected type (node, saddle, focus, ...), no
saddle, and the numbers of stable, unstable and center directions. Each classifies the
origin from the modes (:func:`origin`, declared known modes set aside) and says how the type
is decided."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

from ..analysis.equilibrium import classify, side
from ..analysis.modes import Mode, Spectrum
from .requirements import Requirement, side_level

__all__ = ["origin", "EquilibriumType", "NoSaddle", "DirectionCounts"]


def _type_level(eq, seen: Sequence[Mode]) -> str:
    """How an equilibrium type (and its direction counts) is decided: certified when every
    mode is a single eigenvalue (or pair) with its own enclosure off the boundary, which
    also certifies it real or non-real (a real matrix: a disc holding one eigenvalue holds
    its conjugate only when it is real)."""
    if eq.uncertain:
        return "uncertain"
    ok = all(m.multiplicity == 1 and math.isfinite(m.enclosure)
             and side_level(m) == "certified" for m in seen)
    return "certified" if ok and seen else "estimated"


def origin(modes: Sequence[Mode], spectrum: Spectrum):
    """The type of the origin and the modes it was classified from.

    Declared known modes (the difference between ``modes`` and the spectrum) are set aside,
    and the description says so; when they are all the modes, there is nothing else to
    classify, so the origin is classified from all of them (a declared double zero stays a
    degenerate origin, never a node with no directions)."""
    every = spectrum.modes
    same = len(modes) == len(every) and all(a is b for a, b in zip(modes, every))
    declared = 0 if same else spectrum.n_eigenvalues - sum(m.count for m in modes)
    seen = tuple(modes) if modes or not declared else spectrum.modes
    return classify(seen, declared=declared, set_aside=bool(modes)), seen


@dataclass(frozen=True)
class EquilibriumType(Requirement):
    """The origin has the expected type."""

    expected: str
    rule = "EG106"

    def spec(self):
        return f"equilibrium: {self.expected}"

    def check(self, modes, spectrum, on_uncertain):
        eq, seen = origin(modes, spectrum)
        ok = eq.type == self.expected
        passed = ok and (not eq.uncertain or on_uncertain == "pass")
        message = f"expected {self.expected}, found {eq.describe()}"
        return self._verdict(passed=passed, uncertain=eq.uncertain, measured=eq.type,
                             decided_by=_type_level(eq, seen),
                             threshold=self.expected, margin=None,
                             offending=() if ok else seen, message=message,
                             suggestion=None if passed else f"equilibrium: {eq.type} matches "
                             "the current model")


@dataclass(frozen=True)
class NoSaddle(Requirement):
    """Not both stable and unstable directions."""

    rule = "EG107"

    def spec(self):
        return "no_saddle: true"

    def check(self, modes, spectrum, on_uncertain):
        eq, seen = origin(modes, spectrum)
        saddle = eq.stable > 0 and eq.unstable > 0
        passed = not saddle and (not eq.uncertain or on_uncertain == "pass")
        offending = tuple(m for m in seen if side(m) > 0) if saddle else ()
        return self._verdict(passed=passed, uncertain=eq.uncertain, measured=eq.type,
                             decided_by=_type_level(eq, seen),
                             threshold="not saddle", margin=None, offending=offending,
                             message=("saddle: " if saddle else "no saddle: ") + eq.describe())


@dataclass(frozen=True)
class DirectionCounts(Requirement):
    """Numbers of stable, unstable and center directions (any subset)."""

    stable: int | None = None
    unstable: int | None = None
    center: int | None = None
    rule = "EG108"

    def spec(self):
        parts = [f"{k}: {v}" for k, v in (("stable", self.stable), ("unstable", self.unstable),
                                          ("center", self.center)) if v is not None]
        return "directions: {" + ", ".join(parts) + "}"

    def check(self, modes, spectrum, on_uncertain):
        eq, seen = origin(modes, spectrum)
        found = {"stable": eq.stable, "unstable": eq.unstable, "center": eq.center}
        wrong = [f"{k} {found[k]} (expected {v})" for k, v in
                 (("stable", self.stable), ("unstable", self.unstable), ("center", self.center))
                 if v is not None and found[k] != v]
        passed = not wrong and (not eq.uncertain or on_uncertain == "pass")
        message = ("direction counts differ: " + ", ".join(wrong) if wrong else
                   "direction counts as expected") + f"; {eq.describe()}"
        return self._verdict(passed=passed, uncertain=eq.uncertain,
                             decided_by=_type_level(eq, seen),
                             measured=f"{eq.stable}/{eq.unstable}/{eq.center}",
                             threshold=self.spec(), margin=None,
                             offending=seen if wrong else (), message=message)
