"""Bode and Nyquist plots of a loop channel, drawn from its
:class:`~eigengate.analysis.loop_curves.LoopCurve` (the analysis's numbers; nothing here
computes a margin).

Marks (our own code; docs/report.md describes them): the response is a solid ink line;
gain crossovers are downward triangles on a dashed teal line at 0 dB; phase crossovers are
squares on a dash-dot amber line at −180°; the gain margin is a capped teal bar from
the curve up to 0 dB at the phase crossover, the phase margin a capped amber bar from
−180° to the curve at the gain crossover. A margin whose requirement failed is drawn in the
failure colour, thicker, and its legend entry says "fails". On the Nyquist plot the
critical point −1 is a large bold plus, the disk the disk margin keeps the curve out of is a
violet, dotted, lightly filled circle, and the point where the curve touches it a violet
diamond. Every artist of a margin carries an SVG id (``gid``) and, in its ``url``, the number
it marks, so tests and tools read the marks without reading pixels.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any, Collection

from .figures import (FIGSIZE, _CRITICAL, _DISK_EDGE, _DISK_FILL, _GAIN_MARK, _GRID, _INK,
                      _MARK_FAIL, _MUTED, _PHASE_MARK, _fit_title, _new_figure, _require)

if TYPE_CHECKING:  # pragma: no cover
    from ..analysis.loop_curves import LoopCurve

__all__ = ["bode_figure", "nyquist_figure", "GIDS"]

#: SVG ids of the marks (each id is unique within a figure).
GIDS = {
    "magnitude": "eg-bode-magnitude", "phase": "eg-bode-phase",
    "gain_crossover": "eg-gain-crossover", "phase_crossover": "eg-phase-crossover",
    "gain_margin": "eg-gain-margin", "phase_margin": "eg-phase-margin",
    "nyquist": "eg-nyquist-curve", "critical": "eg-critical-point",
    "disk": "eg-disk-margin-disk", "touch": "eg-disk-touch",
}
_FAILS = " — fails"
_NYQUIST_AXES = (0.14, 0.2, 0.82, 0.7)
#: Height over width of the Nyquist axes in inches, so that one unit is as long on both.
_ASPECT = (_NYQUIST_AXES[3] * FIGSIZE[1]) / (_NYQUIST_AXES[2] * FIGSIZE[0])


def _mark(artist: Any, gid: str, value: float) -> Any:
    """Give an artist its SVG id and the number it marks (as ``url``: matplotlib writes it
    as a link around the element, which a test can read back)."""
    artist.set_gid(gid)
    artist.set_url(f"#eg-value={value!r}")
    return artist


def _tail(what: str, channel: str, channels: int) -> str:
    return f" — {what}" + (f", {channel}" if channels > 1 else "")


def bode_figure(curve: "LoopCurve", *, title: str, failed: Collection[str] = (),
                channels: int = 1, mpl: Any = None) -> Any:
    """Magnitude (dB) and phase (deg) of ``curve`` against ω with its crossovers and margins;
    ``failed`` names the rule ids whose verdicts failed (EG301 gain, EG302 phase)."""
    mpl = mpl or _require("the Bode plot")
    fig = _new_figure(mpl)
    top = fig.add_axes((0.14, 0.56, 0.82, 0.34))
    bottom = fig.add_axes((0.14, 0.17, 0.82, 0.34), sharex=top)
    for ax in (top, bottom):
        ax.set_xscale("log")
        ax.grid(True, which="major", color=_GRID, linewidth=0.5)
        ax.set_axisbelow(True)
    w = curve.omega
    top.plot(w, curve.magnitude_db, color=_INK, linewidth=1.1, zorder=3)[0].set_gid(
        GIDS["magnitude"])
    bottom.plot(w, curve.phase_deg, color=_INK, linewidth=1.1, zorder=3)[0].set_gid(
        GIDS["phase"])
    top.axhline(0.0, color=_GAIN_MARK, linewidth=0.7, linestyle=(0, (4, 2)), zorder=2)
    lo = min(curve.phase_deg, default=-180.0)
    hi = max(curve.phase_deg, default=-180.0)
    lines = [-180.0 + 360.0 * k for k in range(math.floor((lo - 90.0) / 360.0),
                                                 math.ceil((hi + 270.0) / 360.0) + 1)
             if lo - 90.0 <= -180.0 + 360.0 * k <= hi + 90.0] or [-180.0]
    for y in lines:  # the −180° lines the phase comes near
        bottom.axhline(y, color=_PHASE_MARK, linewidth=0.7, linestyle=(0, (5, 2, 1, 2)),
                       zorder=2)
    bottom.set_ylim(min(lo, *lines) - 20.0, max(hi, *lines) + 20.0)
    for x, ph in zip(curve.gain_crossovers, curve.gain_crossover_phase_deg):
        _mark(top.plot([x], [0.0], marker="v", markersize=5, color=_GAIN_MARK,
                       linestyle="none", zorder=5)[0], GIDS["gain_crossover"], x)
    for x, mg in zip(curve.phase_crossovers, curve.phase_crossover_magnitude_db):
        _mark(bottom.plot([x], [_phase_line(curve, x)], marker="s", markersize=4,
                          color=_PHASE_MARK, linestyle="none", zorder=5)[0],
              GIDS["phase_crossover"], x)
    handles = [mpl.lines.Line2D([], [], color=_INK, linewidth=1.1, label="loop L(jω)")]
    gm_fail, pm_fail = "EG301" in failed, "EG302" in failed
    wg = curve.gain_margin_frequency
    if math.isfinite(curve.gain_margin_db) and math.isfinite(wg) and wg > 0:
        color = _MARK_FAIL if gm_fail else _GAIN_MARK
        _mark(_bar(top, wg, -curve.gain_margin_db, 0.0, color, gm_fail),
              GIDS["gain_margin"], curve.gain_margin_db)
        handles.append(mpl.lines.Line2D(
            [], [], color=color, linewidth=1.8 if gm_fail else 1.1, marker="v",
            markersize=4, label=f"gain margin {curve.gain_margin_db:.3g} dB"
                                + (_FAILS if gm_fail else "")))
    wp = curve.phase_margin_frequency
    if math.isfinite(curve.phase_margin_deg) and math.isfinite(wp) and wp > 0:
        color = _MARK_FAIL if pm_fail else _PHASE_MARK
        _mark(_bar(bottom, wp, curve.pm_reference_deg,
                   curve.pm_reference_deg + curve.phase_margin_deg, color, pm_fail),
              GIDS["phase_margin"], curve.phase_margin_deg)
        handles.append(mpl.lines.Line2D(
            [], [], color=color, linewidth=1.8 if pm_fail else 1.1, marker="s",
            markersize=3.5, linestyle=(0, (5, 2, 1, 2)),
            label=f"phase margin {curve.phase_margin_deg:.3g}°" + (_FAILS if pm_fail else "")))
    top.set_ylabel("|L|  [dB]")
    bottom.set_ylabel("phase  [deg]")
    bottom.set_xlabel("ω  [rad/s]")
    top.tick_params(labelbottom=False)
    if curve.sample_period:
        bottom.axvline(math.pi / curve.sample_period, color=_MUTED, linewidth=0.6)
    _fit_title(fig, top, title, _tail("Bode plot of the loop", curve.channel, channels))
    fig.legend(handles=handles, loc="lower center", ncol=3, frameon=False, handlelength=1.8,
               columnspacing=1.0, bbox_to_anchor=(0.5, 0.0))
    return fig


def _bar(ax: Any, x: float, y0: float, y1: float, color: str, failing: bool) -> Any:
    """A margin: a vertical bar from ``y0`` to ``y1`` at ``x`` with a cap at each end (its
    data are the two ends, so the margin is ``y1 − y0``)."""
    return ax.plot([x, x], [y0, y1], color=color, linewidth=2.2 if failing else 1.4,
                   marker="_", markersize=7, markeredgewidth=1.4, zorder=6)[0]


def _phase_line(curve: "LoopCurve", x: float) -> float:
    """The −180° line (of the curve's branch) nearest the phase at ``x``."""
    import numpy as np

    near = float(np.interp(x, curve.omega, curve.phase_deg))
    return -180.0 + 360.0 * round((near + 180.0) / 360.0)


def nyquist_figure(curve: "LoopCurve", *, title: str, failed: Collection[str] = (),
                   channels: int = 1, mpl: Any = None) -> Any:
    """The Nyquist curve of ``curve`` (ω ≥ 0 solid, its mirror ω ≤ 0 thin), the critical point
    and the disk the disk margin excludes; ``failed``: EG305 draws the disk as failing."""
    mpl = mpl or _require("the Nyquist plot")
    from matplotlib.patches import Circle

    fig = _new_figure(mpl)
    ax = fig.add_axes(_NYQUIST_AXES)
    ax.grid(True, color=_GRID, linewidth=0.5)
    ax.set_axisbelow(True)
    re, im = curve.real, curve.imag
    ax.plot(re, im, color=_INK, linewidth=1.1, zorder=3)[0].set_gid(GIDS["nyquist"])
    ax.plot(re, [-y for y in im], color=_INK, linewidth=0.6, linestyle=(0, (1, 1.5)),
            zorder=3)
    handles = [mpl.lines.Line2D([], [], color=_INK, linewidth=1.1, label="L(jω), ω ≥ 0"),
               mpl.lines.Line2D([], [], color=_INK, linewidth=0.6, linestyle=(0, (1, 1.5)),
                                label="ω ≤ 0")]
    dk_fail = "EG305" in failed
    edge = _MARK_FAIL if dk_fail else _DISK_EDGE
    # the view: the critical point, the disk and the part of the curve near them
    view = 2.5
    if curve.disk_kind == "disk" and math.isfinite(curve.disk_radius):
        circle = Circle((curve.disk_center, 0.0), curve.disk_radius, facecolor=_DISK_FILL,
                        edgecolor=edge, linewidth=1.6 if dk_fail else 1.0,
                        linestyle=(0, (1.5, 1.5)), zorder=1)
        ax.add_patch(_mark(circle, GIDS["disk"], curve.disk_margin))
        view = max(view, abs(curve.disk_center) + curve.disk_radius + 0.5)
        handles.append(mpl.patches.Patch(facecolor=_DISK_FILL, edgecolor=edge,
                                         linestyle=(0, (1.5, 1.5)),
                                         label=f"disk margin α = {curve.disk_margin:.3g}"
                                               + (_FAILS if dk_fail else "")))
    if len(curve.disk_touch) == 2:
        _mark(ax.plot([curve.disk_touch[0]], [curve.disk_touch[1]], marker="D", markersize=4.5,
                      color=edge, markeredgecolor="white", linestyle="none", zorder=5)[0],
              GIDS["touch"], curve.disk_margin_frequency)
        handles.append(mpl.lines.Line2D([], [], marker="D", markersize=4.5, color=edge,
                                        linestyle="none", label="nearest point to the disk"))
    _mark(ax.plot([-1.0], [0.0], marker="P", markersize=8, color=_CRITICAL,
                  markeredgecolor="white", linestyle="none", zorder=6)[0], GIDS["critical"], -1.0)
    handles.append(mpl.lines.Line2D([], [], marker="P", markersize=7, color=_CRITICAL,
                                    linestyle="none", label="critical point −1"))
    ax.axhline(0.0, color=_MUTED, linewidth=0.5, zorder=0)
    ax.axvline(0.0, color=_MUTED, linewidth=0.5, zorder=0)
    ax.set_xlim(-view, view)
    ax.set_ylim(-view * _ASPECT, view * _ASPECT)  # equal scales: the disk stays round
    ax.set_xlabel("Re L")
    ax.set_ylabel("Im L")
    _fit_title(fig, ax, title, _tail("Nyquist plot", curve.channel, channels))
    fig.legend(handles=handles, loc="lower center", ncol=3, frameon=False, handlelength=1.6,
               columnspacing=1.0, bbox_to_anchor=(0.5, 0.0))
    return fig
