"""The cells of a grid summary's table (:class:`eigengate.rules.grid_summary.GridSummary`),
shared by the text, Markdown and HTML writers, which escape and lay them out."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # pragma: no cover
    from ..rules.grid_summary import GridPoint, GridSummary

__all__ = ["grid_head", "grid_cells", "STATUS_WORDS", "rest_line"]

#: How a point's status is written in the tables.
STATUS_WORDS = {"fail": "FAILED", "warn": "warned", "pass": "ok"}


def _num(x: float) -> str:
    if math.isinf(x):
        return ("-" if x < 0 else "") + "∞"
    return f"{x:.4g}"


def grid_head(summary: "GridSummary") -> list[str]:
    """Column heads: the point, its status, its smallest margin and the requirement it
    belongs to, the spectral figure, min ζ, and the rules of its findings."""
    unit = "" if summary.discrete else " [1/s]"
    return ["point", "status", "smallest margin", "of requirement",
            f"{summary.figure_name}{unit}", "min ζ", "findings"]


def grid_cells(p: "GridPoint") -> list[str]:
    """One row of the table, plain text."""
    status = STATUS_WORDS[p.status] + (" (regressed)" if p.regressed else "")
    margin = "—" if p.margin is None else _num(p.margin)
    return [p.ident, status, margin, p.margin_of or "—", _num(p.figure), _num(p.min_damping),
            ", ".join(p.rules) or "—"]


def rest_line(summary: "GridSummary", left_out: int) -> str:
    """The line under a short table: how many points it does not list, of which failing or
    warned."""
    bad = sum(1 for p in summary.points if p.status != "pass")
    bad_left = bad - min(bad, len([p for p in summary.shown()[0] if p.status != "pass"]))
    what = f"{left_out} more point{'s' if left_out != 1 else ''}"
    what += f" ({bad_left} of them with findings)" if bad_left else " (all passing)"
    return f"… and {what}; the JSON report lists every point"
