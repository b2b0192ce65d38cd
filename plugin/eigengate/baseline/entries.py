"""The records of a baseline: one :class:`Entry` per model, one :class:`BaselineMode` per mode
(shared by the store and its file format)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from ..analysis.modes import ModeFigures

__all__ = ["BaselineMode", "Entry", "Key"]

Key = tuple[str, str]  # (source, title)


@dataclass(frozen=True)
class BaselineMode(ModeFigures):
    """One accepted mode; the attribute names match :class:`~eigengate.analysis.modes.Mode`."""

    eigenvalue: complex
    s: complex
    multiplicity: int
    pair: bool
    defective: bool
    damping_ratio: float
    natural_frequency: float
    time_constant: float
    uncertainty: float
    condition: float
    states: tuple[tuple[str, float], ...]

    def row(self, index: int) -> Any:
        """This mode as a :class:`~eigengate.rules.findings.ModeRow` (``index`` is 1-based)."""
        from ..analysis.naming import mode_name
        from ..rules.findings import ModeRow

        return ModeRow(index=index, eigenvalue=self.eigenvalue, s=self.s, pair=self.pair,
                       multiplicity=self.multiplicity, defective=self.defective,
                       damping_ratio=self.damping_ratio,
                       natural_frequency=self.natural_frequency,
                       time_constant=self.time_constant, uncertainty=self.uncertainty,
                       condition=self.condition, top_states=self.states,
                       name=mode_name(self.states))


@dataclass(frozen=True)
class Entry:
    """The accepted state of one model (one operating point)."""

    source: str
    title: str
    domain: str
    sample_period: float | None
    modes: tuple[BaselineMode, ...]
    spectral_abscissa: float
    spectral_radius: float
    min_damping: float
    equilibrium: str
    stable: int
    unstable: int
    center: int
    written_by: str
    #: The operating point's identity in its file (``Model.point_id``), None for a file of
    #: one model or an entry written before identities were stored.
    point: str | None = None
    #: Robustness figures of the requirements the model had when accepted
    #: (``rules.robustness.figures_of``), sorted by name; empty when it had none.
    robustness: tuple[tuple[str, float], ...] = ()
    #: The model's input blocks as accepted (:class:`~eigengate.baseline.inputs.InputBlock`:
    #: digest, shape and, up to a size limit, values), sorted by name; empty in an entry
    #: written before they were recorded.
    inputs: tuple[Any, ...] = ()

    @property
    def key(self) -> Key:
        return (self.source, self.title)

    @property
    def name(self) -> str:
        return self.title.split("[", 1)[0] if self.title.endswith("]") else self.title

    @property
    def label(self) -> str | None:
        return self.title.split("[", 1)[1][:-1] if self.title.endswith("]") and "[" in \
            self.title else None
