"""The pole map of the report: poles over the allowed region of the s- or z-plane."""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Sequence

# Re-exported: eigengate.reports.plots is where the report's figure API has always been imported from.
from .figures import (_BASELINE, _ERROR, _GRID, _INK, _MUTED, _RC,  # noqa: F401
                       _REGION_EDGE, _REGION_FILL, _STABLE_DIR, _UNSTABLE_DIR, _WARNING, FIGSIZE,
                       HTML_DPI, PNG_COLORS, ReportDependencyError, _new_figure, _png_bytes,
                       _require, _style, _svg_text)
from .portrait import (_null_vector, can_draw_phase_portrait, phase_portrait_figure,  # noqa: F401
                       phase_portrait_png)

if TYPE_CHECKING:  # pragma: no cover
    from ..rules.results import ModelResult

__all__ = ["ReportDependencyError", "AllowedRegion", "allowed_region", "pole_map_png",
           "pole_map_svg", "phase_portrait_png", "pole_map_figure", "phase_portrait_figure",
           "nearest_pairs", "marked_modes", "region_pieces", "can_draw_phase_portrait",
           "POLE_GID", "BASELINE_GID", "ARROW_GID", "UNIT_CIRCLE_GID", "REGION_GID", "FIGSIZE",
           "PSEUDOSPECTRA_GID", "pseudospectral_grid"]

# Stable SVG ids: tests and PR-comment tooling can find the artists by them.
POLE_GID = "eg-poles"
BASELINE_GID = "eg-baseline-poles"
ARROW_GID = "eg-pole-move"
UNIT_CIRCLE_GID = "eg-unit-circle"
REGION_GID = "eg-allowed-region"
PSEUDOSPECTRA_GID = "eg-pseudospectra"
#: log10 ε of the pseudospectral level curves drawn around the poles.
PSEUDO_LEVELS = (-4.0, -3.0, -2.0, -1.0)


def pseudospectral_grid(result: Any) -> tuple | None:
    """``(xs, ys, σ_min rows)`` of the model's pseudospectral-abscissa figure, or None."""
    for v in result.verdicts:
        f = v.figure
        if f is not None and f.name == "pseudospectral_abscissa" and len(f.grid) > 2:
            return f.grid[0], f.grid[1], f.grid[2:]
    return None


# -- the allowed region ----------------------------------------------------------------------

@dataclass(frozen=True)
class AllowedRegion:
    """The s-plane region a model's requirements allow: ``Re s ≤ -alpha``, ``ζ ≥ zeta``,
    ``|s| ≤ omega`` (None: no such bound). ``alpha`` is 0 when only stability is required."""

    alpha: float | None = None
    zeta: float | None = None
    omega: float | None = None

    def describe(self) -> str:
        parts = []
        if self.alpha is not None:
            parts.append("Re s ≤ 0" if self.alpha == 0 else f"Re s ≤ {-self.alpha:.4g}")
        if self.zeta is not None:
            parts.append(f"ζ ≥ {self.zeta:.4g}")
        if self.omega is not None:
            parts.append(f"ωn ≤ {self.omega:.4g} rad/s")
        return ", ".join(parts)


def allowed_region(model: Any) -> AllowedRegion | None:
    """The region given by the model's stability, decay-rate, damping, frequency and
    pole-region requirements (the tightest of each kind); None when it has none of them."""
    from ..rules.requirements import MaxFrequency, MinDamping, MinDecayRate, PoleRegion, Stability

    alphas, zetas, omegas = [], [], []
    for r in getattr(model, "requirements", ()):
        if isinstance(r, Stability):
            alphas.append(0.0)
        elif isinstance(r, MinDecayRate):
            alphas.append(r.alpha)
        elif isinstance(r, MinDamping):
            zetas.append(r.zeta)
        elif isinstance(r, MaxFrequency):
            omegas.append(r.omega)
        elif isinstance(r, PoleRegion):
            if r.alpha is not None:
                alphas.append(r.alpha)
            if r.zeta is not None:
                zetas.append(r.zeta)
            if r.omega is not None:
                omegas.append(r.omega)
    if not (alphas or zetas or omegas):
        return None
    return AllowedRegion(alpha=max(alphas) if alphas else None,
                         zeta=max(zetas) if zetas else None,
                         omega=min(omegas) if omegas else None)


Polygon = list  # list[tuple[float, float]]


def _clip(poly: Polygon, a: float, b: float, c: float) -> Polygon:
    """Sutherland–Hodgman: the part of a convex polygon where ``a·x + b·y ≤ c``."""
    out: Polygon = []
    n = len(poly)
    for i in range(n):
        p, q = poly[i], poly[(i + 1) % n]
        fp, fq = a * p[0] + b * p[1] - c, a * q[0] + b * q[1] - c
        if fp <= 0:
            out.append(p)
        if (fp < 0 < fq) or (fq < 0 < fp):
            t = fp / (fp - fq)
            out.append((p[0] + t * (q[0] - p[0]), p[1] + t * (q[1] - p[1])))
    return out


def region_pieces(region: AllowedRegion, box: tuple[float, float, float, float]) -> list[Polygon]:
    """The allowed region inside ``box = (x0, x1, y0, y1)`` of the s-plane, as convex polygons.

    The damping sector ``|arg(-s)| ≤ acos ζ`` is convex only for ζ ≥ 0, but its upper and
    lower halves are convex for every ζ in [-1, 1], so the region is (at most) two convex
    pieces.
    """
    x0, x1, y0, y1 = box
    base = [(x0, y0), (x1, y0), (x1, y1), (x0, y1)]
    if region.alpha is not None:
        base = _clip(base, 1.0, 0.0, -region.alpha)
    if region.omega is not None:
        sides = 256  # inscribed polygon: off the circle by ω·(1 - cos(π/256)) ≈ 8e-5·ω
        for k in range(sides):
            phi = 2 * math.pi * (k + 0.5) / sides
            base = _clip(base, math.cos(phi), math.sin(phi),
                         region.omega * math.cos(math.pi / sides))
    if region.zeta is None:
        return [base] if len(base) >= 3 else []
    theta = math.acos(max(-1.0, min(1.0, region.zeta)))
    pieces = []
    for sign in (1.0, -1.0):  # upper half, then its mirror image
        piece = _clip(base, 0.0, -sign, 0.0)  # sign·y ≥ 0
        # On the side of the ray at angle θ from the negative real axis that holds that axis:
        # sin θ·x + cos θ·(sign·y) ≤ 0.
        piece = _clip(piece, math.sin(theta), sign * math.cos(theta), 0.0)
        if len(piece) >= 3:
            pieces.append(piece)
    return pieces


def _map_path(points: Polygon, T: float, closed: bool, tol: float = 1.5e-3) -> Polygon:
    """Map an s-plane polyline (or polygon) to the z-plane, z = e^{sT}, subdividing each edge
    until the image lies within ``tol`` of its chords: edges of constant Im s stay straight
    (rays), others become arcs and spirals that need the extra points."""
    def f(p: tuple[float, float]) -> tuple[float, float]:
        z = cmath.exp(complex(p[0], p[1]) * T)
        return (z.real, z.imag)

    def edge(p, q, zp, zq, depth):
        m = ((p[0] + q[0]) / 2, (p[1] + q[1]) / 2)
        zm = f(m)
        if depth >= 14 or math.hypot(zm[0] - (zp[0] + zq[0]) / 2,
                                     zm[1] - (zp[1] + zq[1]) / 2) <= tol:
            # the chord test can be fooled by an edge whose image is symmetric about its
            # midpoint; edges of more than a quarter turn are split regardless
            if depth >= 14 or abs(q[1] - p[1]) * T <= math.pi / 2:
                return [zp]
        return edge(p, m, zp, zm, depth + 1) + edge(m, q, zm, zq, depth + 1)

    out: Polygon = []
    n = len(points)
    for i in range(n if closed else n - 1):
        p, q = points[i], points[(i + 1) % n]
        out.extend(edge(p, q, f(p), f(q), 0))
    if not closed and points:
        out.append(f(points[-1]))
    return out


def _boundary_curves(region: AllowedRegion, box: tuple[float, float, float, float],
                     T: float | None) -> list[Polygon]:
    """Each requirement's own boundary (decay line, sector rays, frequency circle) in the
    model's plane, as polylines: drawn dashed, so the reader sees which bound shapes the
    region."""
    x0, x1, y0, y1 = box
    curves: list[Polygon] = []
    if region.alpha is not None:
        curves.append([(-region.alpha, y0), (-region.alpha, y1)])
    if region.zeta is not None:
        theta = math.acos(max(-1.0, min(1.0, region.zeta)))
        reach = math.hypot(max(abs(x0), abs(x1)), max(abs(y0), abs(y1)))
        if T is not None and math.sin(theta) > 0:
            reach = min(reach, math.pi / T / math.sin(theta))
        for sign in (1.0, -1.0):
            curves.append([(0.0, 0.0), (-math.cos(theta) * reach,
                                        sign * math.sin(theta) * reach)])
    if region.omega is not None:
        w, n = region.omega, 256
        circle = [(w * math.cos(2 * math.pi * k / n), w * math.sin(2 * math.pi * k / n))
                  for k in range(n + 1)]
        if T is None:
            curves.append(circle)
        else:  # only the arcs inside the primary strip have an image
            arc: Polygon = []
            for p in circle:
                if abs(p[1]) <= math.pi / T:
                    arc.append(p)
                elif arc:
                    curves.append(arc)
                    arc = []
            if len(arc) > 1:
                curves.append(arc)
    curves = [c for c in curves if len(c) > 1]
    return curves if T is None else [_map_path(c, T, closed=False) for c in curves]


# -- poles -----------------------------------------------------------------------------------

def marked_modes(result: Any) -> dict[int, str]:
    """Mode index → worst severity of the findings that list the mode (same index and
    eigenvalue: a regression's disappeared mode is the baseline's and is not marked)."""
    rank = {"warning": 1, "error": 2}
    by_mode = {m.index: m.eigenvalue for m in result.spectrum.modes}
    out: dict[int, str] = {}
    for f in getattr(result, "findings", ()):
        for row in f.modes:
            if by_mode.get(row.index) == row.eigenvalue and \
                    rank.get(f.severity, 0) > rank.get(out.get(row.index, ""), 0):
                out[row.index] = f.severity
    return out


def _pole_points(result: Any) -> list[tuple[complex, int, int]]:
    """(eigenvalue, mode index, multiplicity): one row per eigenvalue, conjugates included."""
    pts = []
    for m in result.spectrum.modes:
        for _ in range(m.multiplicity):
            pts.append((complex(m.eigenvalue), m.index, m.multiplicity))
            if m.pair:
                pts.append((complex(m.eigenvalue).conjugate(), m.index, m.multiplicity))
    return pts


def _with_conjugates(poles: Sequence[complex]) -> list[complex]:
    """Baseline poles as given, plus the missing member of any complex pair given by one."""
    poles = [complex(p) for p in poles]
    out = list(poles)
    pool = list(poles)
    for p in poles:
        if p.imag == 0:
            continue
        twin = next((i for i, q in enumerate(pool) if q == p.conjugate()), None)
        if twin is None:
            out.append(p.conjugate())
        else:
            pool.pop(twin)
    return out


def nearest_pairs(current: Sequence[complex], baseline: Sequence[complex]
                  ) -> list[tuple[int, int]]:
    """Greedy one-to-one pairing of current and baseline poles by distance, closest first.

    Only for drawing the arrows: the engine's optimal matching (eigengate.analysis.matching) is the
    source of truth for which mode became which, and the findings report it.
    """
    cand = sorted((abs(c - b), i, j) for i, c in enumerate(current)
                  for j, b in enumerate(baseline))
    used_c: set[int] = set()
    used_b: set[int] = set()
    out = []
    for _, i, j in cand:
        if i not in used_c and j not in used_b:
            used_c.add(i)
            used_b.add(j)
            out.append((i, j))
    return sorted(out)


def _fit_aspect(x0: float, x1: float, y0: float, y1: float, ratio: float
                ) -> tuple[float, float, float, float]:
    """Widen the shorter side so one unit is as long on both axes (angles of the damping
    sector read true)."""
    w, h = x1 - x0, y1 - y0
    if w / h < ratio:
        extra = (h * ratio - w) / 2
        x0, x1 = x0 - extra, x1 + extra
    else:
        extra = (w / ratio - h) / 2
        y0, y1 = y0 - extra, y1 + extra
    return x0, x1, y0, y1


_AXES_RECT = (0.13, 0.2, 0.83, 0.7)  # left, bottom, width, height (figure fraction)


def _view(points: Sequence[complex], region: AllowedRegion | None, discrete: bool
          ) -> tuple[float, float, float, float]:
    ratio = (_AXES_RECT[2] * FIGSIZE[0]) / (_AXES_RECT[3] * FIGSIZE[1])
    finite = [p for p in points if math.isfinite(p.real) and math.isfinite(p.imag)]
    if discrete:
        r = max([1.0] + [abs(p) for p in finite])
        r *= 1.12
        return _fit_aspect(-r, r, -r, r, ratio)
    span = max([abs(p) for p in finite] + [0.0]) or 1.0
    xs = [p.real for p in finite] + [0.0]
    ys = [abs(p.imag) for p in finite] + [0.0]
    if region is not None:
        # Bounds far outside the poles would shrink them to a dot: those are left off-view
        # (the caption still states the region).
        if region.alpha is not None and region.alpha <= 4 * span:
            xs.append(-region.alpha)
        if region.omega is not None and region.omega <= 4 * span:
            xs.append(-region.omega)
            ys.append(region.omega)
    x0, x1 = min(xs), max(xs)
    ymax = max(ys)
    pad = 0.12 * max(x1 - x0, 2 * ymax, span)
    x0, x1 = x0 - pad, x1 + pad
    y1 = ymax + pad
    return _fit_aspect(x0, x1, -y1, y1, ratio)


def pole_map_figure(result: "ModelResult", *, baseline_poles: Sequence[complex] | None = None,
                    mpl: Any = None) -> Any:
    """Draw the pole map of one model on a new matplotlib Figure (Agg canvas) and return it.

    Call inside the report style (the public ``pole_map_*`` functions do).
    """
    mpl = mpl or _require("the pole map")
    model = result.model
    discrete = model.discrete
    T = model.sample_period
    pts = _pole_points(result)
    marks = marked_modes(result)
    base = _with_conjugates(baseline_poles) if baseline_poles else []
    region = allowed_region(model)

    fig = _new_figure(mpl)
    ax = fig.add_axes(_AXES_RECT)
    x0, x1, y0, y1 = _view([p for p, _, _ in pts] + base, region, discrete)
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.grid(True, color=_GRID, linewidth=0.5, zorder=0)
    ax.set_axisbelow(True)
    handles: list[Any] = []  # legend entries: patches and lines
    from matplotlib.lines import Line2D

    if region is not None:
        from matplotlib.patches import Patch, Polygon as PolygonPatch

        if T is not None:  # discrete
            # The primary strip |Im s| ≤ π/T maps one-to-one onto the z-plane (less 0);
            # its left end is pushed far enough that the hole left at z = 0 is invisible.
            r_view = math.hypot(max(abs(x0), abs(x1)), max(abs(y0), abs(y1)))
            sbox = (math.log(1e-4) / T, math.log(2 * r_view) / T, -math.pi / T, math.pi / T)
        else:
            w, h = x1 - x0, y1 - y0
            sbox = (x0 - w, x1 + w, y0 - h, y1 + h)
        for k, piece in enumerate(region_pieces(region, sbox)):
            poly = _map_path(piece, T, closed=True) if T is not None else piece
            patch = PolygonPatch(poly, closed=True, facecolor=_REGION_FILL, edgecolor="none",
                                 zorder=1)
            patch.set_gid(REGION_GID if k == 0 else f"{REGION_GID}-{k + 1}")
            ax.add_patch(patch)
        for curve in _boundary_curves(region, sbox, T):
            ax.plot([p[0] for p in curve], [p[1] for p in curve], color=_REGION_EDGE,
                    linewidth=0.8, linestyle=(0, (4, 2.5)), zorder=2)
        handles.append(Patch(facecolor=_REGION_FILL, edgecolor=_REGION_EDGE, linewidth=0.6,
                             label="allowed region"))

    # The stability boundary: the imaginary axis, or the unit circle.
    if discrete:
        from matplotlib.patches import Circle

        circle = Circle((0.0, 0.0), 1.0, fill=False, edgecolor=_INK, linewidth=0.9, zorder=3)
        circle.set_gid(UNIT_CIRCLE_GID)
        ax.add_patch(circle)
        ax.axhline(0.0, color=_MUTED, linewidth=0.5, zorder=2)
        ax.axvline(0.0, color=_MUTED, linewidth=0.5, zorder=2)
        ax.set_xlabel("Re z")
        ax.set_ylabel("Im z")
        plane = f"z-plane, T = {T:g} s"
    else:
        ax.axvline(0.0, color=_INK, linewidth=0.9, zorder=3)
        ax.axhline(0.0, color=_MUTED, linewidth=0.5, zorder=2)
        ax.set_xlabel("Re s  [1/s]")
        ax.set_ylabel("Im s  [rad/s]")
        plane = "s-plane"
    ax.set_title(f"{model.title} — poles, {plane}", color=_INK, loc="left")

    # Pseudospectral level curves from the analysis's σ_min grid (EG112), under the poles.
    grid = pseudospectral_grid(result)
    if grid is not None:
        import numpy as np

        xs, ys, rows = grid
        logs = np.log10(np.maximum(np.array(rows, dtype=float), 1e-300))
        cs = ax.contour(np.array(xs), np.array(ys), logs, levels=list(PSEUDO_LEVELS),
                        colors=[_MUTED], linewidths=0.6, linestyles="solid", zorder=2)
        cs.set_gid(PSEUDOSPECTRA_GID)
        ax.clabel(cs, fmt={lv: f"1e{int(lv)}" for lv in PSEUDO_LEVELS}, fontsize=5.5,
                  inline=True)
        handles.append(Line2D([], [], color=_MUTED, linewidth=0.6,
                              label="ε-pseudospectra"))

    # Baseline poles and the moves, under the current poles.
    if base:
        bx = [b.real for b in base]
        by = [b.imag for b in base]
        h = ax.scatter(bx, by, s=26, marker="o", facecolors="none", edgecolors=_BASELINE,
                       linewidths=0.9, zorder=4, label="baseline pole")
        h.set_gid(BASELINE_GID)
        handles.append(h)
        current = [p for p, _, _ in pts]
        tol = 0.005 * max(x1 - x0, y1 - y0)
        k = 0
        for i, j in nearest_pairs(current, base):
            if abs(current[i] - base[j]) > tol:
                k += 1
                arrow = ax.annotate("", xy=(current[i].real, current[i].imag),
                                    xytext=(base[j].real, base[j].imag),
                                    arrowprops=dict(arrowstyle="-|>", color=_BASELINE,
                                                    linewidth=0.8, shrinkA=3, shrinkB=4,
                                                    mutation_scale=7), zorder=4)
                arrow.arrow_patch.set_gid(f"{ARROW_GID}-{k}")

    # Current poles: one marker per eigenvalue, coloured by the findings naming its mode.
    colors = {"error": _ERROR, "warning": _WARNING}
    face = [colors.get(marks.get(i, ""), _INK) for _, i, _ in pts]
    size = 34.0 if len(pts) <= 40 else max(9.0, 34.0 * math.sqrt(40 / len(pts)))
    h = ax.scatter([p.real for p, _, _ in pts], [p.imag for p, _, _ in pts], s=size,
                   marker="D", c=face, edgecolors="white", linewidths=0.5, zorder=5)
    h.set_gid(POLE_GID)
    # A shape as well as a colour (colour is never the only cue): a ring round a pole named
    # by a failed check, a square frame round one named by a warning.
    rings = {"error": ("o", "eg-poles-failed"), "warning": ("s", "eg-poles-warned")}
    for kind, (shape, gid) in rings.items():
        hit = [p for p, i, _ in pts if marks.get(i) == kind]
        if hit:
            ax.scatter([p.real for p in hit], [p.imag for p in hit], s=size * 3.4,
                       marker=shape, facecolors="none", edgecolors=colors[kind],
                       linewidths=1.1, zorder=5).set_gid(gid)

    handles.append(Line2D([], [], linestyle="none", marker="D", markersize=5,
                          markerfacecolor=_INK, markeredgecolor="white", label="pole"))
    if any(v == "error" for v in marks.values()):
        handles.append(Line2D([], [], linestyle="none", marker="o", markersize=8,
                              markerfacecolor="none", markeredgecolor=_ERROR,
                              label="pole in a failed check"))
    if any(v == "warning" for v in marks.values()):
        handles.append(Line2D([], [], linestyle="none", marker="s", markersize=7,
                              markerfacecolor="none", markeredgecolor=_WARNING,
                              label="pole in a warning"))
    labelled: set[complex] = set()
    for p, _, mult in pts:
        if mult > 1 and p not in labelled:
            labelled.add(p)
            ax.annotate(f"×{mult}", (p.real, p.imag), xytext=(5, 4),
                        textcoords="offset points", fontsize=7, color=_INK, zorder=6)
    fig.legend(handles=handles, loc="lower center", ncol=min(4, len(handles)), frameon=False,
               handlelength=1.4, columnspacing=1.2, bbox_to_anchor=(0.5, 0.0))
    return fig


# -- the files -------------------------------------------------------------------------------

def pole_map_png(result: "ModelResult", *, baseline_poles: Sequence[complex] | None = None,
                 dpi: int = 100) -> bytes:
    """The pole map of one model as PNG bytes.

    Parameters
    ----------
    result
        An analysed :class:`~eigengate.scan.engine.ModelResult`.
    baseline_poles
        Baseline eigenvalues in the model's own plane (conjugates included; a pair given by one
        member gets the other), drawn hollow with an arrow to each pole that moved.
    dpi
        Resolution; the figure is 4.5×3.6 in.

    Raises
    ------
    ReportDependencyError
        matplotlib is not installed.
    """
    with _style() as mpl:
        return _png_bytes(pole_map_figure(result, baseline_poles=baseline_poles, mpl=mpl), dpi)


def pole_map_svg(result: "ModelResult", *, baseline_poles: Sequence[complex] | None = None
                 ) -> str:
    """The pole map as SVG text (for pull-request comments). The current poles are the
    ``<use>`` elements of the group with id :data:`POLE_GID`; the unit circle of a discrete
    model has id :data:`UNIT_CIRCLE_GID`."""
    with _style() as mpl:
        return _svg_text(pole_map_figure(result, baseline_poles=baseline_poles, mpl=mpl))
