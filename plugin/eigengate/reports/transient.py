"""The transient-growth plot: ‖e^{At}‖₂ against t (discrete: ‖A^k‖₂ against k), with the peak,
its bracket and the limit of the requirement. The curve is the analysis's
(:attr:`eigengate.rules.catalogue.Figure.curve`); this module only draws it."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from .figures import _ERROR, _GRID, _INK, _MUTED, _REGION_EDGE, _new_figure, _require

if TYPE_CHECKING:  # pragma: no cover
    from ..rules.results import ModelResult

__all__ = ["growth_verdict", "transient_figure", "TRANSIENT_GID", "LIMIT_GID"]

TRANSIENT_GID = "eg-transient-curve"
LIMIT_GID = "eg-transient-limit"


def growth_verdict(result: "ModelResult") -> Any:
    """The transient-growth verdict whose figure carries a curve, or None."""
    for v in result.verdicts:
        f = v.figure
        if f is not None and f.name == "transient_growth" and f.curve:
            return v
    return None


def transient_figure(result: "ModelResult", *, mpl: Any = None) -> Any:
    """Draw the transient-growth curve of one model on a new Figure and return it."""
    mpl = mpl or _require("the transient-growth plot")
    v = growth_verdict(result)
    if v is None:
        raise ValueError(f"{result.model.source}: {result.model.title}: no transient-growth "
                         "figure with a curve to draw")
    f = v.figure
    discrete = result.model.discrete
    fig = _new_figure(mpl)
    ax = fig.add_axes((0.13, 0.2, 0.83, 0.7))
    ax.grid(True, color=_GRID, linewidth=0.5, zorder=0)
    ax.set_axisbelow(True)
    ts = [p[0] for p in f.curve]
    gs = [p[1] for p in f.curve]
    if discrete:
        line = ax.plot(ts, gs, color=_INK, linewidth=0.9, marker="o", markersize=2.2,
                       zorder=3, label="‖A^k‖₂")[0]
        ax.set_xlabel("k  [steps]")
    else:
        line = ax.plot(ts, gs, color=_INK, linewidth=1.1, zorder=3, label="‖e^{At}‖₂")[0]
        ax.set_xlabel("t  [s]")
    line.set_gid(TRANSIENT_GID)
    ax.set_ylabel("amplification")
    failed = not v.passed
    peak_t = f.at[0] if f.at else 0.0
    ax.plot([peak_t], [f.value], marker="D", markersize=5, color=_ERROR if failed else _INK,
            markeredgecolor="white", linestyle="none", zorder=5, label="peak")
    if f.upper > f.value:
        ax.plot([peak_t, peak_t], [f.lower, f.upper], color=_MUTED, linewidth=2.0, zorder=4,
                label="peak bracket")
    limit = ax.axhline(float(v.threshold), color=_ERROR if failed else _REGION_EDGE,
                       linewidth=0.9, linestyle=(0, (4, 2.5)), zorder=2,
                       label=f"limit {float(v.threshold):.4g}")
    limit.set_gid(LIMIT_GID)
    ax.axhline(1.0, color=_MUTED, linewidth=0.5, zorder=1)
    ax.set_xlim(min(ts), max(ts))
    ax.set_ylim(0.0, max(max(gs), f.upper, float(v.threshold)) * 1.12)
    ax.set_title(f"{result.model.title} — transient growth, peak {f.value:.4g}", color=_INK,
                 loc="left")
    fig.legend(loc="lower center", ncol=4, frameon=False, handlelength=1.4,
               columnspacing=1.2, bbox_to_anchor=(0.5, 0.0))
    return fig
