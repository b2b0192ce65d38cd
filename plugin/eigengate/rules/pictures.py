"""The plot data of a checked model, made once by the engine and carried by its result
(:attr:`eigengate.rules.results.ModelResult.pictures`) through the cache to the reports:

- :class:`~eigengate.analysis.loop_curves.LoopCurve`, one per channel, for every model with
  a loop-margin requirement whose closed loop is stable (Bode and Nyquist plots, with the
  margins the verdicts quote);
- :class:`~eigengate.analysis.field_grid.FieldGrid` for every linearised two-state vector
  field (the phase portrait drawn from the field itself, with the equilibria found).

The reports draw these records and compute nothing; a cached result carries them, so a warm
run draws the same pictures byte for byte.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Sequence

if TYPE_CHECKING:  # pragma: no cover
    from .catalogue import Verdict

__all__ = ["pictures_of", "loop_curves_of", "field_grid_of", "PICTURE_CLASSES"]

#: The record classes a result's pictures may hold, by name (the cache rebuilds them).
PICTURE_CLASSES = ("LoopCurve", "FieldGrid")


def pictures_of(model: Any, verdicts: Sequence["Verdict"]) -> tuple:
    """The plot data of one analysed model (an empty tuple when it has nothing to draw)."""
    out: list = []
    parts = getattr(model, "loop_parts", None)
    if parts is not None:  # a model with a loop (whose requirements import these rules)
        from .loop_requirements import LOOP_RULES
    if parts is not None and any(v.rule in LOOP_RULES and v.measured not in ("unstable", "n/a")
                                 for v in verdicts):
        from ..analysis.loop_curves import loop_curves

        out.extend(loop_curves(parts))
    info = getattr(model, "nonlinear", None)
    if info is not None and model.n_states == 2:
        from ..analysis.field_grid import field_grid

        grid = field_grid(info, tuple(model.states))
        if grid is not None:
            out.append(grid)
    return tuple(out)


def loop_curves_of(result: Any) -> tuple:
    """The :class:`~eigengate.analysis.loop_curves.LoopCurve` records of a result."""
    return tuple(p for p in getattr(result, "pictures", ()) if type(p).__name__ == "LoopCurve")


def field_grid_of(result: Any) -> Any:
    """The :class:`~eigengate.analysis.field_grid.FieldGrid` of a result, or None."""
    return next((p for p in getattr(result, "pictures", ())
                 if type(p).__name__ == "FieldGrid"), None)
