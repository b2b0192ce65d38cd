"""Heat maps of an operating-point grid: the smallest requirement margin of every grid point
over two scheduling variables (:class:`eigengate.rules.grid_summary.GridSummary`).

The colour is the margin on the ``cividis`` scale (ordered in lightness, and readable with the
common forms of colour blindness); a failing point is also marked by its shape, a hatched cell
with a cross, so the map never relies on colour alone. A grid of more than two axes gets one
map per combination of the other axes' values, the slices holding the worst points first. A
grid of one axis is a single row. Plot data lives on the figure's artists (the image's array),
so tests read the numbers instead of pixels.
"""

from __future__ import annotations

import itertools
import math
from typing import TYPE_CHECKING, Any

from .figures import _INK, _new_figure

if TYPE_CHECKING:  # pragma: no cover
    from ..rules.grid_summary import GridPoint, GridSummary

__all__ = ["HEATMAP_GID", "FAIL_MARK_GID", "MAX_SLICES", "grid_slices", "heatmap_figure",
           "heatmap_alt"]

HEATMAP_GID = "eg-grid-margins"
FAIL_MARK_GID = "eg-grid-failing"
#: Maps drawn per grid (slices of a grid of more than two axes, worst first).
MAX_SLICES = 6


def grid_slices(summary: "GridSummary") -> list[tuple[tuple[tuple[str, float], ...],
                                                       list["GridPoint"]]]:
    """The grid cut into maps over its first two axes: ``(the other axes' fixed values, the
    points of that map)``, the slice with the worst point first, at most :data:`MAX_SLICES`."""
    rest = summary.axes[2:]
    order = {p.ident: k for k, p in enumerate(summary.points)}  # worst first
    out = []
    for place in itertools.product(*(range(len(v)) for _, v in rest)):
        fixed = tuple((n, v[i]) for (n, v), i in zip(rest, place))
        pts = [p for p in summary.points if p.position[2:] == place]
        out.append((fixed, pts))
    out.sort(key=lambda s: min(order[p.ident] for p in s[1]))
    return out[:MAX_SLICES]


def heatmap_alt(summary: "GridSummary", fixed: tuple = ()) -> str:
    """Alternative text: what the map shows and which points fail."""
    where = "".join(f", {n} = {v:g}" for n, v in fixed)
    failing = [p.ident for p in summary.failing]
    tail = (f"; {len(failing)} failing: {', '.join(failing[:8])}"
            + (" …" if len(failing) > 8 else "") if failing else "; every point passes")
    return (f"Heat map of the smallest requirement margin at each point of the "
            f"{summary.shape_text()} grid of {summary.name}{where}{tail}.")


def heatmap_figure(summary: "GridSummary", fixed: tuple = (), *, mpl: Any = None) -> Any:
    """A heat map of the points of ``summary`` whose other axes have the values ``fixed``
    (rows: the first axis, columns: the second). Cells without a margin (no requirement with
    one) are left blank and say so."""
    import numpy as np
    from matplotlib.patches import Rectangle

    names = [n for n, _ in summary.axes]
    place = tuple(summary.axes[2 + k][1].index(v) for k, (_, v) in enumerate(fixed))
    pts = [p for p in summary.points if p.position[2:] == place]
    rows = summary.axes[0][1]
    cols = summary.axes[1][1] if len(names) > 1 else (0.0,)
    values = np.full((len(rows), len(cols)), np.nan)
    for p in pts:
        i, j = p.position[0], p.position[1] if len(names) > 1 else 0
        values[i, j] = np.nan if p.margin is None else p.margin
    fig = _new_figure(mpl)
    ax = fig.add_axes((0.16, 0.16, 0.62, 0.72))
    finite = values[np.isfinite(values)]
    span = float(np.max(np.abs(finite))) if finite.size else 1.0
    span = span if span > 0 and math.isfinite(span) else 1.0
    image = ax.imshow(values, cmap="cividis", vmin=-span, vmax=span, origin="lower",
                      aspect="auto", interpolation="nearest")
    image.set_gid(HEATMAP_GID)
    bar = fig.colorbar(image, cax=fig.add_axes((0.82, 0.16, 0.03, 0.72)))
    bar.set_label("smallest margin (< 0: violated)")
    for p in pts:
        i, j = p.position[0], p.position[1] if len(names) > 1 else 0
        v = values[i, j]
        text = "—" if not np.isfinite(v) else f"{v:.2g}"
        if p.status == "fail":
            cell = Rectangle((j - 0.5, i - 0.5), 1, 1, fill=False, hatch="x",
                             edgecolor="white", linewidth=1.6)
            cell.set_gid(FAIL_MARK_GID)
            ax.add_patch(cell)
        ax.text(j, i, text + (" ✕" if p.status == "fail" else ""), ha="center", va="center",
                fontsize=6.5, color=_INK,
                bbox={"boxstyle": "round,pad=0.2", "facecolor": "white", "alpha": 0.85,
                      "linewidth": 0})
    ax.set_yticks(range(len(rows)), [f"{v:g}" for v in rows])
    ax.set_ylabel(names[0])
    if len(names) > 1:
        ax.set_xticks(range(len(cols)), [f"{v:g}" for v in cols])
        ax.set_xlabel(names[1])
    else:
        ax.set_xticks([])
    where = ", ".join(f"{n} = {v:g}" for n, v in fixed)
    ax.set_title(f"{summary.name}: smallest margin per point" + (f" ({where})" if where else ""),
                 color=_INK)
    return fig
