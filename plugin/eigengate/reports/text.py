"""Plain-text rendering of check results: grouped by file, one block per model, mode tables."""

from __future__ import annotations

from typing import TYPE_CHECKING, Callable, Iterable, Sequence

from ..rules.findings import DECIDED_NOTES, UNCERTAIN_NOTE, Finding, ModeRow
from .escape import printable as _p
from .grid_table import grid_cells, grid_head, rest_line
from .render import (ModeGroup, cause_lines, figure_line, finding_figure, mode_detail,
                     mode_figures, mode_groups, mode_name, pairs_text, plural, summary_line,
                     waiver_text)
from .render import format_eigenvalue  # shared by every writer; re-exported

if TYPE_CHECKING:  # pragma: no cover
    from ..rules.results import FileResult, ModelResult

__all__ = ["render_results", "render_model", "model_lines", "finding_lines", "mode_table",
           "findings_lines", "mode_block", "waived_lines",
           "format_eigenvalue", "grid_lines"]

_COLORS = {"FAIL": "\x1b[1;31m", "warn": "\x1b[33m", "ok": "\x1b[32m", "FAILED": "\x1b[1;31m",
           "pass": "\x1b[32m"}


def _paint(word: str, color: bool) -> str:
    return f"{_COLORS[word]}{word}\x1b[0m" if color and word in _COLORS else word


def mode_table(rows: Sequence[ModeRow], discrete: bool = False, indent: str = "    ",
               detail: bool = False) -> list[str]:
    """One line per mode: its name, then eigenvalue, ωn, ζ, τ and participating states (and,
    with ``detail``, an indented line with the error bound and condition number)."""
    out = []
    for r in rows:
        out.append(f"{indent}{_p(mode_name(r))}: {_p(pairs_text(mode_figures(r, discrete)))}")
        if detail:
            out.append(f"{indent}    detail: {pairs_text(mode_detail(r))}")
    return out


def mode_block(group: ModeGroup, discrete: bool, indent: str = "        ") -> list[str]:
    """One mode and what was found on it: the name, the figure of each finding that names it
    (threshold, margin), the mode's figures, then detail lines (the baseline's mode, bounds)."""
    row = group.row
    out = [f"{indent}{_p(group.title)}"]
    out += [f"{indent}  {_p(finding_figure(f))}" for f in group.findings]
    out.append(f"{indent}  {_p(pairs_text(mode_figures(row, discrete)))}")
    if group.before is not None:
        out.append(f"{indent}    in the baseline: "
                   f"{_p(pairs_text(mode_figures(group.before, discrete)))}")
    out.append(f"{indent}    detail: {pairs_text(mode_detail(row))}")
    return out


def finding_lines(f: Finding, discrete: bool, color: bool = False, *,
                  modes: bool = True) -> list[str]:
    """Lines of one finding: head (mark, rule, requirement, line), message, then the
    uncertainty note, the hint and (with ``modes``) a block for each mode it names."""
    mark = _paint("FAIL" if f.severity == "error" else "warn", color)
    where = f"line {f.line}" if f.line else ""
    head = f"  {mark}  {f.rule} {f.name}"
    if f.requirement and f.rule != "EG001":
        head += f"  [{_p(f.requirement)}]"
    if where:
        head += f"  ({where})"
    out = [head, f"        {_p(f.message)}"]
    if f.uncertain:
        out.append(f"        note: {UNCERTAIN_NOTE}")
    figure = figure_line(getattr(f, "figure", None))
    if figure:
        out.append(f"        figure: {_p(figure)}")
    if getattr(f, "decided_by", ""):
        out.append(f"        decided: {f.decided_by} ({DECIDED_NOTES[f.decided_by]})")
    out += [f"        cause: {_p(c)}" for c in cause_lines(f)]
    if f.suggestion:
        out.append(f"        hint: {_p(f.suggestion)}")
    if getattr(f, "waiver_note", "") and not f.waived:
        out.append(f"        waiver: {_p(f.waiver_note)}")
    if modes:
        for group in mode_groups([f]):
            out.extend(mode_block(group, discrete))
    return out


def waived_lines(f: Finding) -> list[str]:
    """A waived finding: rule, requirement, the measured value and the waiver's expiry, then
    the reason given."""
    head = f"    waived  {f.rule} {f.name}  [{_p(f.requirement)}]"
    text = waiver_text(f)
    return [head + (f": {_p(text)}" if text else ""), f"        reason: {_p(f.waived)}"]


def findings_lines(findings: Sequence[Finding], discrete: bool, color: bool = False,
                   extra: Callable[[Finding], list[str]] | None = None) -> list[str]:
    """Each finding without its modes, then one block per mode the findings name (a mode
    that three rules fired on is shown once, with the three figures). ``extra`` adds lines
    after a finding's first two."""
    out: list[str] = []
    for f in findings:
        block = finding_lines(f, discrete, color, modes=False)
        out += block[:2] + (extra(f) if extra else []) + block[2:]
    groups = mode_groups(findings)
    if groups:
        out.append("    modes:")
        for group in groups:
            out.extend(mode_block(group, discrete))
    return out


_finding_lines = finding_lines  # the former private name


def model_lines(r: ModelResult, *, verbose: bool = True, color: bool = False) -> list[str]:
    """The block of one :class:`~eigengate.scan.engine.ModelResult`: a summary line (status,
    eigenvalue count, spectral abscissa or radius, min ζ, type of the origin), the passing
    requirements when ``verbose``, then each finding and each waived finding."""
    sp, m = r.spectrum, r.model
    status = _paint("FAILED" if not r.passed else "unchecked" if any(
        f.rule == "EG005" for f in r.findings) else "ok", color)
    figure = (f"spectral radius {sp.spectral_radius:.6g}" if m.discrete else
              f"spectral abscissa {sp.spectral_abscissa:.6g} 1/s")
    extra = f", {sp.infinite} infinite" if sp.infinite else ""
    nm = len(sp.modes)
    partial = getattr(sp, "search", None) is not None  # a sparse search: the modes found
    found = f" found of {m.n_states} by a sparse search" if partial else ""
    origin = "not classified (partial spectrum)" if partial else r.equilibrium.type
    lines = [f"  {_p(m.title)}: {status} — {plural(sp.n_eigenvalues, 'eigenvalue')}{found} in {nm} "
             f"mode{'' if nm == 1 else 's'}{extra}, {figure}, "
             f"min ζ {sp.min_damping:.3g}; origin: {origin}"]
    if verbose:
        for v in r.verdicts:
            if v.passed and not v.uncertain:
                margin = f" ({_p(v.message)})" if v.margin is None else \
                    f" (margin {v.margin:.4g})"
                lines.append(f"    {_paint('pass', color)}  {v.rule} {v.name}  "
                             f"[{_p(v.requirement)}]{margin}")
    lines.extend(findings_lines(r.findings, m.discrete, color))
    for f in getattr(r, "waived", ()):
        lines.extend(waived_lines(f))
    return lines


def grid_lines(summary, color: bool = False) -> list[str]:
    """A grid's summary: its headline, then a table of its failing and warned points and its
    worst passing ones, worst first (:class:`~eigengate.rules.grid_summary.GridSummary`)."""
    shown, left = summary.shown()
    body = [[_p(c) for c in grid_cells(p)] for p in shown]
    head = grid_head(summary)
    widths = [max(len(r[i]) for r in (head, *body)) for i in range(len(head))]
    lines = [f"  {_p(summary.headline())} (worst first)"]
    for k, row in enumerate((head, *body)):
        cells = [c.ljust(w) for c, w in zip(row, widths)]
        if k and color:
            cells[1] = cells[1].replace(row[1].split()[0], _paint(row[1].split()[0], color), 1)
        lines.append(("    " + "  ".join(cells)).rstrip())
    if left:
        lines.append("    " + rest_line(summary, left))
    if summary.left_out():
        lines.append(f"    findings in full below for the {len(summary.detailed())} worst "
                     f"points; {summary.left_out()} more points with findings are rows of "
                     "the JSON report")
    return lines


def render_results(results: Iterable[FileResult], *, verbose: bool = True,
                   color: bool = False) -> str:
    """Render :class:`~eigengate.scan.engine.FileResult` objects as text, grouped by file, with a
    one-line summary; ANSI colour only when ``color``."""
    lines: list[str] = []
    files = models = failing = invalid = 0
    errors = warnings = 0
    checked = unselected = 0  # model files checked, model files no include glob selects
    for fr in results:
        files += 1
        checked += 1 if fr.results or fr.error is not None else 0
        unselected += sum(1 for f in fr.findings if f.rule == "EG004")
        invalid += 1 if fr.error is not None else 0
        quiet_file = not verbose and not fr.findings and not any(
            getattr(r, "waived", ()) for r in fr.results)
        if not quiet_file:
            lines.append(_p(fr.source))
        shown: set[int] = set()
        grid = fr.grid
        detailed = grid.detailed() if grid is not None else frozenset()
        if grid is not None and not quiet_file:  # its table, then its worst points' findings
            lines.extend(grid_lines(grid, color))
        for r in fr.results:
            models += 1
            failing += 0 if r.passed else 1
            if grid is not None and r.model.title not in detailed:
                shown.update(id(f) for f in r.findings)  # a row of the table, no block
                continue
            if verbose or r.findings or getattr(r, "waived", ()):
                lines.extend(model_lines(r, verbose=verbose, color=color))
            shown.update(id(f) for f in r.findings)
        for f in fr.findings:
            if id(f) not in shown:  # the file's own: invalid file, expired or unused waivers
                lines.extend(finding_lines(f, False, color))
            if f.severity == "error":
                errors += 1
            else:
                warnings += 1
        if not quiet_file:
            lines.append("")
    lines.append(summary_line(files, models, failing, errors, warnings, invalid)
                 + (f"; {checked + unselected} model files found, {checked} checked"
                    if unselected else ""))
    return "\n".join(lines) + "\n"


def render_model(result: ModelResult) -> str:
    """Everything about one analysed model: every mode, the origin's type, every verdict."""
    from ..rules.findings import ModeRow

    m, sp = result.model, result.spectrum
    kind = f"discrete, T = {m.sample_period:g} s" if m.discrete else "continuous"
    lines = [f"{_p(m.source)} — {_p(m.title)}",
             f"  {m.structure}, {kind}, {m.n_states} states"
             + (f", {sp.infinite} infinite eigenvalues (descriptor)" if sp.infinite else ""),
             f"  origin: {result.equilibrium.describe()}",
             (f"  spectral radius {sp.spectral_radius:.6g}, " if m.discrete else "  ")
             + f"spectral abscissa {sp.spectral_abscissa:.6g} 1/s, min ζ {sp.min_damping:.3g}",
             "  modes (least stable first):"]
    lines.extend(mode_table([ModeRow.of(x) for x in sp.modes], m.discrete, detail=True))
    lines.append("  verdicts:")
    for v in result.verdicts:
        mark = "pass" if v.passed else "FAIL"
        margin = "" if v.margin is None else f", margin {v.margin:.4g}"
        note = " (numerically uncertain)" if v.uncertain else ""
        lines.append(f"    {mark}  {v.rule} {v.name}  [{_p(v.requirement)}]{margin}{note}"
                     f"  · {v.decided_by}")
        lines.append(f"          {_p(v.message)}")
    for f in result.waived:
        lines.extend(waived_lines(f))
    return "\n".join(lines) + "\n"
