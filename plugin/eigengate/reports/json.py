"""JSON report, format version 1: the whole check as data, for scripts and dashboards.

The layout is described in ``docs/report-formats.md`` and by the JSON Schema
``schema/report-v1.schema.json``. The same results always give the same bytes: keys are
sorted, floats use ``repr`` precision, infinities and NaN are the strings ``"inf"``,
``"-inf"`` and ``"nan"``, and nothing depends on the clock or the machine.
"""

from __future__ import annotations

import json
from typing import Any, Iterable

from .render import (figure_data, finding_data, json_number, json_value, own_findings, status_of,
                     tally)

__all__ = ["render_json", "REPORT_FORMAT"]

#: Version of the report layout; it changes when a key is removed, renamed or changes meaning.
REPORT_FORMAT = 1


def _error_data(error: Any) -> dict[str, Any] | None:
    if error is None:
        return None
    return {"field": error.field, "problem": error.problem, "line": error.line,
            "hint": error.hint, "message": error.render()}


def _model_data(r: Any) -> dict[str, Any]:
    m, sp, eq = r.model, r.spectrum, r.equilibrium
    return {
        "title": m.title, "name": m.name, "label": m.label, "structure": m.structure,
        "domain": "discrete" if m.discrete else "continuous",
        "sample_period": json_number(m.sample_period),
        "state_count": int(m.n_states),
        "status": status_of(r.findings),
        "figures": {
            "spectral_abscissa": json_number(sp.spectral_abscissa),
            "spectral_radius": json_number(sp.spectral_radius),
            "min_damping": json_number(sp.min_damping),
            "eigenvalue_count": int(sp.n_eigenvalues),
            "mode_count": len(sp.modes),
            "infinite_eigenvalues": int(sp.infinite),
        },
        "equilibrium": {"type": eq.type, "stable": int(eq.stable), "unstable": int(eq.unstable),
                        "center": int(eq.center), "uncertain": bool(eq.uncertain),
                        "detail": eq.detail},
        "verdicts": [
            {"rule": v.rule, "name": v.name, "requirement": v.requirement,
             "passed": bool(v.passed), "uncertain": bool(v.uncertain),
             "measured": json_value(v.measured), "threshold": json_value(v.threshold),
             "margin": json_number(v.margin), "unit": v.unit, "message": v.message,
             "decided_by": v.decided_by, "figure": figure_data(v.figure)}
            for v in r.verdicts],
        "findings": [finding_data(f) for f in r.findings],
        "waived": [finding_data(f) for f in getattr(r, "waived", ())],
        **({} if getattr(m, "grid", None) is None
           else {"grid": {a: json_number(v) for a, v in m.grid}}),
    }


def _grid_data(grid: Any) -> dict[str, Any]:
    status = {"fail": "failed", "warn": "warning", "pass": "passed"}
    return {"headline": grid.headline(), "figure": grid.figure_name,
            "axes": [{"name": n, "values": [json_number(v) for v in vs]} for n, vs in grid.axes],
            "points": [{"id": p.ident, "title": p.title, "status": status[p.status],
                        "coordinates": {a: json_number(v) for a, v in p.coords},
                        "errors": p.errors, "warnings": p.warnings, "rules": list(p.rules),
                        "worst": p.worst, "regressed": p.regressed,
                        "margin": json_number(p.margin), "margin_of": p.margin_of,
                        "figure": json_number(p.figure),
                        "min_damping": json_number(p.min_damping)} for p in grid.points]}


def _file_data(fr: Any) -> dict[str, Any]:
    status = "invalid" if fr.error is not None else status_of(fr.findings)
    out = {"source": fr.source, "status": status, "error": _error_data(fr.error),
           "models": [_model_data(r) for r in fr.results],
           "findings": [finding_data(f) for f in own_findings(fr)]}
    if fr.grid is not None:  # only for a grid, so other files' reports keep their bytes
        out["grid"] = _grid_data(fr.grid)
    return out


def render_json(results: Iterable[Any], *, tool_version: str) -> str:
    """Render :class:`~eigengate.scan.engine.FileResult` objects as a version-1 JSON report.

    Parameters
    ----------
    results
        The checked files, in the order they are to appear.
    tool_version
        The eigengate version that produced them (``tool.version``).

    Returns
    -------
    str
        Indented JSON text with sorted keys, ending in a newline.
    """
    results = list(results)
    counts = tally(results)
    summary = {**counts, "passed": all(fr.passed for fr in results)}
    doc = {"report_format": REPORT_FORMAT,
           "tool": {"name": "eigengate", "version": tool_version},
           "summary": summary,
           "files": [_file_data(fr) for fr in results]}
    return json.dumps(doc, indent=2, sort_keys=True, ensure_ascii=False, allow_nan=False) + "\n"
