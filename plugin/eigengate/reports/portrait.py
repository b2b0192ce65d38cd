"""Phase portraits of two-state models: of a linear model, streamlines (or orbits) of
``x' = A x`` with its eigenvector lines; of a vector field, streamlines of ``f`` itself over
the equilibria search box (:class:`~eigengate.analysis.field_grid.FieldGrid`, the analysis's
grid) with every equilibrium found marked by its type.

Equilibrium marks (our own; docs/report.md): stable node or focus a filled teal circle,
unstable node or focus a hollow amber circle, saddle a filled amber cross, center a hollow
violet diamond, degenerate or non-hyperbolic a hollow violet square; the model's own
operating point a bold ink plus. The legend names each in words."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any, Sequence

from .figures import (_CRITICAL, _DISK_EDGE, _GAIN_MARK, _GRID, _INK, _MUTED, _PHASE_MARK,
                      _STABLE_DIR, _UNSTABLE_DIR, _fit_title, _new_figure, _png_bytes,
                      _require, _style)

if TYPE_CHECKING:  # pragma: no cover
    from ..rules.results import ModelResult

__all__ = ["can_draw_phase_portrait", "phase_portrait_figure", "phase_portrait_png",
           "field_portrait_figure", "EQUILIBRIUM_MARKS", "EQUILIBRIUM_GID"]

#: Equilibrium type → (marker, face colour or "none", edge colour, words for the legend).
EQUILIBRIUM_MARKS = {
    "stable-node": ("o", _GAIN_MARK, _GAIN_MARK, "stable node"),
    "stable-focus": ("o", _GAIN_MARK, _GAIN_MARK, "stable focus"),
    "unstable-node": ("o", "none", _PHASE_MARK, "unstable node"),
    "unstable-focus": ("o", "none", _PHASE_MARK, "unstable focus"),
    "saddle": ("X", _PHASE_MARK, _PHASE_MARK, "saddle"),
    "center": ("D", "none", _DISK_EDGE, "center"),
    "degenerate": ("s", "none", _DISK_EDGE, "degenerate"),
    "non-hyperbolic": ("s", "none", _DISK_EDGE, "non-hyperbolic"),
}
#: SVG id prefix of the equilibrium marks (``eg-equilibrium-<type>``).
EQUILIBRIUM_GID = "eg-equilibrium"


def _null_vector(a: Sequence[Sequence[float]], lam: complex) -> tuple[complex, complex] | None:
    """A unit vector with (A - λI) v = 0 for a 2×2 A and one of its eigenvalues λ (from the
    engine): a row of A - λI gives it directly. None when A = λI (every direction is one)."""
    (p, q), (r, s) = a
    rows = [(q, lam - p), (lam - s, r)]
    v = max(rows, key=lambda t: abs(t[0]) + abs(t[1]))
    norm = math.hypot(abs(v[0]), abs(v[1]))
    if norm <= 1e-12 * (abs(p) + abs(q) + abs(r) + abs(s) + abs(lam) + 1e-300):
        return None
    return (complex(v[0]) / norm, complex(v[1]) / norm)


def can_draw_phase_portrait(model: Any) -> bool:
    """Two states and no descriptor matrix: the models a phase portrait is drawn for."""
    return model.n_states == 2 and not model.descriptor


def phase_portrait_figure(result: "ModelResult", *, mpl: Any = None) -> Any:
    """Draw the phase portrait of a two-state model on a new Figure and return it.

    Continuous models: streamlines of ``x' = A x``; discrete models: orbits of
    ``x[k+1] = A x[k]``. The box is scaled to the eigenvectors (the portrait of a linear system
    is the same at every scale, only the shape of the box matters), and the eigenvector
    directions of real eigenvalues are drawn as lines.
    """
    import numpy as np

    mpl = mpl or _require("the phase portrait")
    model = result.model
    if not can_draw_phase_portrait(model):
        raise ValueError(f"{model.source}: {model.title}: a phase portrait needs a two-state "
                         f"model without a descriptor matrix, got {model.n_states} states"
                         + (" (descriptor)" if model.descriptor else ""))
    A = np.asarray(model.A, dtype=float)
    a = A.tolist()
    dirs = []  # (vector, eigenvalue, mode)
    hx = hy = 0.0
    for m in result.spectrum.modes:
        v = _null_vector(a, complex(m.eigenvalue))
        if v is None:
            continue
        hx = max(hx, abs(v[0].real), abs(v[0].imag))
        hy = max(hy, abs(v[1].real), abs(v[1].imag))
        if not m.pair:
            dirs.append(((v[0].real, v[1].real), m))
    if hx == 0.0 and hy == 0.0:
        hx = hy = 1.0
    big = max(hx, hy)
    hx, hy = max(hx, 0.15 * big), max(hy, 0.15 * big)
    hx, hy = 1.15 * hx, 1.15 * hy

    fig = _new_figure(mpl)
    ax = fig.add_axes((0.14, 0.2, 0.82, 0.7))
    ax.set_xlim(-hx, hx)
    ax.set_ylim(-hy, hy)
    names = model.states or ("x1", "x2")
    ax.set_xlabel(names[0])
    ax.set_ylabel(names[1])
    ax.axhline(0.0, color=_GRID, linewidth=0.6, zorder=0)
    ax.axvline(0.0, color=_GRID, linewidth=0.6, zorder=0)
    if model.discrete:
        kind = f"orbits of x[k+1] = A x[k], T = {model.sample_period:g} s"
        for k in range(12):
            phi = 2 * math.pi * (k + 0.5) / 12
            x = np.array([0.92 * hx * math.cos(phi), 0.92 * hy * math.sin(phi)])
            orbit = [x]
            for _ in range(60):
                x = A @ x
                if not np.all(np.isfinite(x)) or abs(x[0]) > 3 * hx or abs(x[1]) > 3 * hy \
                        or (abs(x[0]) < 1e-3 * hx and abs(x[1]) < 1e-3 * hy):
                    orbit.append(x)
                    break
                orbit.append(x)
            xs = np.array(orbit)
            ax.plot(xs[:, 0], xs[:, 1], color=_MUTED, linewidth=0.6, marker="o",
                    markersize=1.8, zorder=2)
    else:
        kind = "streamlines of x' = A x"
        if np.any(A != 0.0):
            # density and grid trade evenness for time: streamplot is the slowest step of a
            # report (a fifth of a second here)
            gx, gy = np.meshgrid(np.linspace(-hx, hx, 25), np.linspace(-hy, hy, 25))
            with np.errstate(all="ignore"):
                ax.streamplot(gx, gy, A[0, 0] * gx + A[0, 1] * gy,
                              A[1, 0] * gx + A[1, 1] * gy, density=0.8, color=_MUTED,
                              linewidth=0.6, arrowsize=0.7, zorder=2)
    from matplotlib.lines import Line2D

    handles = []
    for (vx, vy), m in dirs:
        stable = m.s.real < 0
        color = _STABLE_DIR if stable else _UNSTABLE_DIR
        style: Any = "-" if stable else (0.0, (4.0, 2.0))  # the line style says it too
        t = 3.0 * max(hx / max(abs(vx), 1e-300), hy / max(abs(vy), 1e-300))
        t = min(t, 1e6 * max(hx, hy))
        ax.plot([-t * vx, t * vx], [-t * vy, t * vy], color=color, linewidth=1.3,
                linestyle=style, zorder=3)
        word = "stable" if stable else ("unstable" if m.s.real > 0 else "boundary")
        handles.append(Line2D([], [], color=color, linewidth=1.3, linestyle=style,
                              label=f"λ = {m.eigenvalue.real:.4g} ({word} direction)"))
    ax.set_xlim(-hx, hx)
    ax.set_ylim(-hy, hy)
    ax.plot([0.0], [0.0], marker="o", markersize=4, color=_INK, zorder=4, linestyle="none")
    _fit_title(fig, ax, model.title, f" — phase portrait, {kind}")
    if handles:
        fig.legend(handles=handles, loc="lower center", ncol=min(2, len(handles)),
                   frameon=False, bbox_to_anchor=(0.5, 0.0))
    return fig


def phase_portrait_png(result: "ModelResult", *, dpi: int = 100) -> bytes:
    """The phase portrait of a two-state model as PNG bytes (``ValueError`` for other
    models)."""
    with _style() as mpl:
        return _png_bytes(phase_portrait_figure(result, mpl=mpl), dpi)


def field_portrait_figure(grid: Any, *, title: str, mpl: Any = None) -> Any:
    """Streamlines of a vector field over its box (:class:`FieldGrid`) with the equilibria
    found, each marked by its type, and the model's operating point."""
    import numpy as np
    from matplotlib.lines import Line2D

    mpl = mpl or _require("the phase portrait")
    fig = _new_figure(mpl)
    ax = fig.add_axes((0.14, 0.22, 0.82, 0.68))
    x0, x1, y0, y1 = grid.box
    dx, dy = np.array(grid.dx, dtype=float), np.array(grid.dy, dtype=float)
    speed = np.hypot(dx, dy)
    if np.any(np.isfinite(speed) & (speed > 0)):
        with np.errstate(all="ignore"):
            ax.streamplot(np.array(grid.xs), np.array(grid.ys), dx, dy, density=0.9,
                          color=_MUTED, linewidth=0.6, arrowsize=0.7, zorder=2)
    handles, seen = [], set()
    for (x, y), kind in zip(grid.equilibria, grid.types):
        marker, face, edge, words = EQUILIBRIUM_MARKS.get(kind, ("s", "none", _DISK_EDGE, kind))
        line = ax.plot([x], [y], marker=marker, markersize=7, markerfacecolor=face,
                       markeredgecolor=edge, markeredgewidth=1.5, linestyle="none", zorder=5)[0]
        line.set_gid(f"{EQUILIBRIUM_GID}-{kind}")
        if kind not in seen:
            seen.add(kind)
            handles.append(Line2D([], [], marker=marker, markersize=6, markerfacecolor=face,
                                  markeredgecolor=edge, markeredgewidth=1.5, linestyle="none",
                                  label=words))
    if len(grid.point) == 2:
        ax.plot([grid.point[0]], [grid.point[1]], marker="+", markersize=9, color=_CRITICAL,
                markeredgewidth=1.8, linestyle="none", zorder=6)[0].set_gid("eg-operating-point")
        handles.append(Line2D([], [], marker="+", markersize=8, color=_CRITICAL,
                              markeredgewidth=1.8, linestyle="none",
                              label="operating point (linearised here)"))
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.set_xlabel(grid.states[0])
    ax.set_ylabel(grid.states[1])
    _fit_title(fig, ax, title, f" — vector field, {grid.whence}")
    if handles:
        fig.legend(handles=handles, loc="lower center", ncol=3, frameon=False,
                   handlelength=1.2, columnspacing=1.0, bbox_to_anchor=(0.5, 0.0))
    return fig
