"""Plot data of a two-state vector field: ``f(x, u)`` itself on a grid over the equilibria
search box, with the equilibria found there and their types.

The linearisation of a nonlinear model describes it near one point only; the picture a
reviewer needs is the field over the region the search covered, with every equilibrium in
it. The grid is the field evaluated at ``GRID_SIDE × GRID_SIDE`` points of the box (at the
box's input ``u``); the equilibria are those of the box's search
(:meth:`eigengate.analysis.nonlinear.FieldPoint.search`), so the picture marks exactly what
the equilibrium rules judged. A model without a box gets a box around its operating point
(half a side ``max(1, |x_i|/2)``) and the operating point as its only mark. A point where
the user's function fails is left out of the grid (NaN), and the count says so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

__all__ = ["FieldGrid", "field_grid", "GRID_SIDE"]

#: Grid points per side of the box.
GRID_SIDE = 21


@dataclass(frozen=True)
class FieldGrid:
    """``f`` over a box of two states: ``dx[j][i]``, ``dy[j][i]`` at ``(xs[i], ys[j])``.

    ``states`` names the axes; ``box`` is ``(x_low, x_high, y_low, y_high)``; ``whence`` says
    where the box came from (``search box`` or ``around the operating point``). The marks:
    ``equilibria`` as ``(x, y)`` with ``types`` (an :data:`EQUILIBRIUM_TYPES` word each),
    and ``point``, the model's own operating point. ``failed`` counts the grid points where
    the function raised or returned no finite value (left NaN).
    """

    states: tuple[str, ...]
    box: tuple[float, ...]
    whence: str
    xs: tuple[float, ...]
    ys: tuple[float, ...]
    dx: tuple[tuple[float, ...], ...]
    dy: tuple[tuple[float, ...], ...]
    equilibria: tuple[tuple[float, ...], ...]
    types: tuple[str, ...]
    point: tuple[float, ...]
    failed: int = 0


def field_grid(info: Any, names: tuple[str, ...] = ()) -> FieldGrid | None:
    """The grid of the vector field behind a linearised model (``Model.nonlinear``), or None
    when there is no field (a cached result) or it does not have exactly two states."""
    import numpy as np

    from ..errors import ModelError

    vf = getattr(info, "field", None)
    if vf is None or len(vf.states) != 2:
        return None
    if info.box is not None:
        lo, hi, u = info.box[0], info.box[1], info.box[2]
        whence = "search box"
    else:
        half = [max(1.0, abs(v) / 2) for v in info.x]
        lo = tuple(v - h for v, h in zip(info.x, half))
        hi = tuple(v + h for v, h in zip(info.x, half))
        u, whence = info.u, "around the operating point"
    key = ("field_grid", tuple(lo), tuple(hi), tuple(u))
    memo = info.shared.get(key)
    xs = np.linspace(lo[0], hi[0], GRID_SIDE)
    ys = np.linspace(lo[1], hi[1], GRID_SIDE)
    if memo is None:
        ua = np.asarray(u, dtype=float)
        dx = np.full((GRID_SIDE, GRID_SIDE), math.nan)
        dy = np.full((GRID_SIDE, GRID_SIDE), math.nan)
        for j, y in enumerate(ys):
            for i, x in enumerate(xs):
                try:
                    f = vf(np.array([x, y]), ua)
                except ModelError:
                    continue
                dx[j, i], dy[j, i] = float(f[0]), float(f[1])
        memo = info.shared[key] = (dx, dy)
    dx, dy = memo
    search = info.search() if info.box is not None else None
    found = () if search is None else search.equilibria
    return FieldGrid(
        states=tuple(names or vf.states), box=(float(lo[0]), float(hi[0]), float(lo[1]),
                                               float(hi[1])),
        whence=whence, xs=tuple(float(v) for v in xs), ys=tuple(float(v) for v in ys),
        dx=tuple(tuple(float(v) for v in row) for row in dx),
        dy=tuple(tuple(float(v) for v in row) for row in dy),
        equilibria=tuple((float(e.x[0]), float(e.x[1])) for e in found),
        types=tuple(str(e.equilibrium.type) for e in found),
        point=tuple(float(v) for v in info.x) if info.x else (),
        failed=int(np.count_nonzero(~(np.isfinite(dx) & np.isfinite(dy)))))
