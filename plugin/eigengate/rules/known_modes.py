"""Known modes: integrators, rigid-body modes and conserved quantities a model declares.

They are taken out of the spectrum before the other requirements run (the type of the origin
says so; when they are all the modes, it is classified from them, see
``origin_requirements.origin``), and a declaration that no longer matches the model is itself
a failing verdict (EG109), so a stale declaration cannot hide a real change.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Sequence

from ..analysis.equilibrium import side
from .catalogue import RULES, Verdict

if TYPE_CHECKING:  # pragma: no cover
    from ..analysis.modes import Mode, Spectrum

__all__ = ["KnownMode", "split_known_modes", "known_modes_verdict"]


@dataclass(frozen=True)
class KnownMode:
    """A mode the model is expected to have and the requirements leave out.

    Selected by ``eigenvalue`` (in the model's own plane, within ``tolerance`` or the mode's
    error bound), by participating ``states`` (their participation factors sum to at least
    one half), or, with neither, as modes on the stability boundary. ``count`` counts
    eigenvalues (a conjugate pair is two).
    """

    count: int = 1
    eigenvalue: complex | None = None
    tolerance: float = 1e-8
    states: tuple[str, ...] = ()
    reason: str = ""

    def describe(self) -> str:
        sel = (f"{self.eigenvalue}" if self.eigenvalue is not None else
               f"the states {', '.join(self.states)}" if self.states else
               "the stability boundary")
        from ..errors import counted

        return f"{counted(self.count, 'eigenvalue')} at {sel}" + (
            f" ({self.reason})" if self.reason else "")

    def matches(self, mode: Mode, spectrum: Spectrum) -> bool:
        if self.eigenvalue is not None:
            native_err = mode.uncertainty
            if spectrum.model.sample_period is not None:  # the model is discrete
                native_err *= abs(mode.eigenvalue) * spectrum.model.sample_period
            ev = self.eigenvalue
            near = min(abs(mode.eigenvalue - ev), abs(mode.eigenvalue.conjugate() - ev))
            if near > max(self.tolerance * max(1.0, abs(ev)), 4.0 * native_err):
                return False
        if self.states:
            names = spectrum.model.states
            idx = [names.index(s) for s in self.states if s in names]
            if not idx or float(mode.participation[idx].sum()) < 0.5:
                return False
        if self.eigenvalue is None and not self.states:
            return side(mode) == 0
        return True


def split_known_modes(spectrum: Spectrum, known: Sequence[KnownMode]
                      ) -> tuple[list[Mode], list[tuple[KnownMode, list[Mode]]]]:
    """Remove the declared known modes; return the rest and what each declaration took."""
    remaining = list(spectrum.modes)
    taken: list[tuple[KnownMode, list[Mode]]] = []
    for k in known:
        got: list[Mode] = []
        total = 0
        for m in list(remaining):
            if total >= k.count:
                break
            if k.matches(m, spectrum):
                got.append(m)
                total += m.count
                remaining.remove(m)
        taken.append((k, got))
    return remaining, taken


def known_modes_verdict(taken: list[tuple[KnownMode, list[Mode]]]) -> Verdict:
    wrong = [(k, got) for k, got in taken if sum(m.count for m in got) != k.count]
    parts = []
    for k, got in wrong:
        found = sum(m.count for m in got)
        parts.append(f"declared {k.describe()}, found {found}")
    ok = not wrong
    message = ("; ".join(parts) if parts else
               "all declared known modes present: " + "; ".join(k.describe() for k, _ in taken))
    rule = RULES["EG109"]
    return Verdict(rule=rule.id, name=rule.name, requirement="known_modes",
                   passed=ok, uncertain=False, measured=str(sum(sum(m.count for m in g)
                                                                for _, g in taken)),
                   threshold=str(sum(k.count for k, _ in taken)), margin=None, unit="",
                   offending=tuple(m for _, got in wrong for m in got), message=message,
                   suggestion=None if ok else "update known_modes to what the model has, or "
                   "find why the mode moved")


