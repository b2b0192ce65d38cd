"""What the pipeline returns: a :class:`ModelResult` per analysed model, a :class:`FileResult`
per model file (made by :mod:`eigengate.scan.engine`, read by every report)."""

from __future__ import annotations

import functools
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from ..errors import ModelError
from ..model.core import Model
from .findings import Finding

if TYPE_CHECKING:  # pragma: no cover
    from .grid_summary import GridSummary
    from ..analysis.equilibrium import Equilibrium
    from ..analysis.modes import Spectrum
    from .catalogue import Verdict
    from .waivers import Waiver

__all__ = ["ModelResult", "FileResult"]


@dataclass(frozen=True, eq=False)
class ModelResult:
    """Analysis of one model (one operating point)."""

    model: Model
    spectrum: Spectrum
    equilibrium: Equilibrium
    verdicts: tuple[Verdict, ...]
    findings: tuple[Finding, ...]
    waived: tuple[Finding, ...] = ()
    used_waivers: tuple[Waiver, ...] = ()
    #: Plot data for the reports (:func:`eigengate.rules.pictures.pictures_of`).
    pictures: tuple = ()

    @property
    def passed(self) -> bool:
        """No finding of severity error (waived findings do not count)."""
        return not any(f.severity == "error" for f in self.findings)


@dataclass(frozen=True, eq=False)
class FileResult:
    """Everything learnt from one model file: a result per operating point, or an error.

    ``findings`` holds the findings of every operating point plus the file's own (invalid
    file, expired or unused waivers of the file).
    """

    source: str
    results: tuple[ModelResult, ...] = ()
    error: ModelError | None = None
    findings: tuple[Finding, ...] = field(default=())

    @property
    def passed(self) -> bool:
        return not any(f.severity == "error" for f in self.findings)

    @property
    def used_waivers(self) -> tuple[Waiver, ...]:
        return tuple(w for r in self.results for w in r.used_waivers)

    @functools.cached_property
    def grid(self) -> GridSummary | None:
        """The summary of an operating-point grid (every point, worst first), or None when
        the file is not a grid (:func:`eigengate.rules.grid_summary.summarise_grid`; not
        imported for a file whose models are no grid's points, which it would say too)."""
        if self.error is not None or not self.results \
                or any(r.model.grid is None for r in self.results):
            return None
        from .grid_summary import summarise_grid

        return summarise_grid(self)
