"""The phase portrait of a two-state model: streamlines or orbits and its eigenvector lines."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any, Sequence

from .figures import (_GRID, _INK, _MUTED, _STABLE_DIR, _UNSTABLE_DIR, _new_figure, _png_bytes,
                       _require, _style)

if TYPE_CHECKING:  # pragma: no cover
    from ..rules.results import ModelResult

__all__ = ["can_draw_phase_portrait", "phase_portrait_figure", "phase_portrait_png"]


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
        t = 3.0 * max(hx / max(abs(vx), 1e-300), hy / max(abs(vy), 1e-300))
        t = min(t, 1e6 * max(hx, hy))
        ax.plot([-t * vx, t * vx], [-t * vy, t * vy], color=color, linewidth=1.3, zorder=3)
        word = "stable" if stable else ("unstable" if m.s.real > 0 else "boundary")
        handles.append(Line2D([], [], color=color, linewidth=1.3,
                              label=f"λ = {m.eigenvalue.real:.4g} ({word} direction)"))
    ax.set_xlim(-hx, hx)
    ax.set_ylim(-hy, hy)
    ax.plot([0.0], [0.0], marker="o", markersize=4, color=_INK, zorder=4, linestyle="none")
    ax.set_title(f"{model.title} — phase portrait, {kind}", color=_INK, loc="left")
    if handles:
        fig.legend(handles=handles, loc="lower center", ncol=min(2, len(handles)),
                   frameon=False, bbox_to_anchor=(0.5, 0.0))
    return fig


def phase_portrait_png(result: "ModelResult", *, dpi: int = 100) -> bytes:
    """The phase portrait of a two-state model as PNG bytes (``ValueError`` for other
    models)."""
    with _style() as mpl:
        return _png_bytes(phase_portrait_figure(result, mpl=mpl), dpi)
