"""Markdown report, for a pull-request comment or a CI job summary.

A one-line verdict, a summary table (one row per model, one per invalid file), a section per
model or file with findings (each finding with its table of offending modes), and the caution
that the check is an engineering aid, not a safety sign-off. Every piece of text that comes
from a model file is escaped, so a name cannot break a table or inject markup.
"""

from __future__ import annotations

import re
from typing import Any, Iterable, Sequence

from .escape import printable
from .grid_table import grid_cells, grid_head, rest_line
from .render import (CAUTION, DECIDED_NOTES, UNCERTAIN_NOTE, cause_lines, figure_line,
                     mode_cells, own_findings, plural, status_of, tally, text_number)

__all__ = ["render_markdown", "escape"]

#: Punctuation that Markdown (CommonMark and the usual extensions) may read as markup.
_SPECIAL = re.compile(r"([\\`*_{}\[\]<>|#~$&])")


def escape(text: str) -> str:
    """``text`` on one line (line breaks made spaces, other control characters escapes, see
    ``_escape``) with markup characters backslash-escaped."""
    return _SPECIAL.sub(r"\\\1", printable(" ".join(str(text).splitlines())))


def _row(cells: Sequence[str]) -> str:
    return "| " + " | ".join(cells) + " |"


def _table(head: Sequence[str], rows: Iterable[Sequence[str]]) -> list[str]:
    return [_row(head), _row(["---"] * len(head)), *(_row(r) for r in rows)]


def _rule_list(findings: Sequence[Any]) -> str:
    return ", ".join(sorted({f.rule for f in findings})) or "–"


def _verdict(results: Sequence[Any]) -> str:
    c = tally(results)
    word = "failed" if c["errors"] else ("passed with warnings" if c["warnings"] else "passed")
    text = (f"**eigengate: {word}** — {plural(c['files'], 'file')}, "
            f"{plural(c['models'], 'model')}: {c['failed_models']} failing")
    if c["invalid_files"]:
        text += f", {plural(c['invalid_files'], 'invalid file')}"
    text += f"; {plural(c['errors'], 'error')}, {plural(c['warnings'], 'warning')}"
    if c["waived"]:
        text += f", {c['waived']} waived"
    return text + "."


def _summary_rows(results: Sequence[Any]) -> Iterable[list[str]]:
    for fr in results:
        src = escape(fr.source)
        grid = fr.grid
        if grid is not None:  # one row for the whole grid; its own table follows
            worst = grid.points[0]
            yield [src, escape(f"{grid.name} ({grid.shape_text()} grid, "
                               f"{plural(len(grid.points), 'point')})"),
                   status_of([f for r in fr.results for f in r.findings]),
                   text_number(max(p.figure for p in grid.points), 6,
                               "" if grid.discrete else "1/s"),
                   text_number(min(p.min_damping for p in grid.points), 3),
                   _rule_list([f for r in fr.results for f in r.findings])
                   + (f" (worst: {escape(worst.ident)})" if worst.status != "pass" else "")]
        for r in fr.results if grid is None else ():
            sp = r.spectrum
            yield [src, escape(r.model.title), status_of(r.findings),
                   text_number(sp.spectral_abscissa, 6, "1/s"),
                   text_number(sp.min_damping, 3), _rule_list(r.findings)]
        own = own_findings(fr)
        if fr.error is not None or own:
            status = "invalid" if fr.error is not None else status_of(own)
            yield [src, "–", status, "–", "–", _rule_list(own)]


def _finding_block(f: Any, discrete: bool) -> list[str]:
    where = ", ".join(x for x in (f.severity, f"line {f.line}" if f.line else "",
                                  escape(f.requirement) if f.rule != "EG001" else "") if x)
    lines = [f"- **{f.rule} {f.name}** ({where}): {escape(f.message)}"]
    if f.uncertain:
        lines.append(f"  - {UNCERTAIN_NOTE}")
    figure = figure_line(getattr(f, "figure", None))
    if figure:
        lines.append(f"  - figure: {escape(figure)}")
    if getattr(f, "decided_by", ""):
        lines.append(f"  - decided: {f.decided_by} ({DECIDED_NOTES[f.decided_by]})")
    lines += [f"  - cause: {escape(c)}" for c in cause_lines(f)]
    if f.suggestion:
        lines.append(f"  - hint: {escape(f.suggestion)}")
    reason = getattr(f, "waived", None)
    if reason:
        lines.append(f"  - waived: {escape(reason)}")
    if f.modes:
        head = ["mode", "z" if discrete else "eigenvalue", "ζ", "ωn [rad/s]", "τ [s]",
                "participating states"]
        rows = ([escape(c) for c in mode_cells(m)] for m in f.modes)
        lines += ["", *("  " + x for x in _table(head, rows))]
    before = getattr(f, "before", ())
    if before:
        lines += ["", "  in the baseline:", "",
                  *("  " + x for x in _table(head, ([escape(c) for c in mode_cells(m)]
                                                    for m in before)))]
    return lines


def _section(title: str, findings: Sequence[Any], discrete: bool) -> list[str]:
    out = ["", f"### {title}", ""]
    for f in findings:
        out += _finding_block(f, discrete)
    return out


def _grid_section(grid: Any) -> list[str]:
    """The grid's headline and its table of points, worst first (failing and warned points
    all, then the worst passing ones)."""
    shown, left = grid.shown()
    out = ["", f"### {escape(grid.source)} · {escape(grid.name)} — {escape(grid.headline())}",
           "", "Points worst first:", ""]
    out += _table(grid_head(grid), ([escape(c) for c in grid_cells(p)] for p in shown))
    if left:
        out += ["", escape(rest_line(grid, left))]
    return out


def render_markdown(results: Iterable[Any]) -> str:
    """Render :class:`~eigengate.scan.engine.FileResult` objects as GitHub-flavoured Markdown.

    Returns
    -------
    str
        Markdown text ending in a newline.
    """
    results = list(results)
    lines = [_verdict(results), ""]
    lines += _table(["file", "model", "status", "spectral abscissa", "min ζ", "findings"],
                    _summary_rows(results))
    for fr in results:
        if fr.grid is not None:
            lines += _grid_section(fr.grid)
        detailed = fr.grid.detailed() if fr.grid is not None else None
        for r in fr.results:
            if detailed is not None and r.model.title not in detailed:
                continue  # a row of the grid's table
            shown = [*r.findings, *getattr(r, "waived", ())]
            if shown:
                title = f"{escape(fr.source)} · {escape(r.model.title)}"
                lines += _section(f"{title} — {status_of(r.findings)}", shown, r.model.discrete)
        own = own_findings(fr)
        if own:
            status = "invalid model file" if fr.error is not None else status_of(own)
            lines += _section(f"{escape(fr.source)} — {status}", own, False)
    lines += ["", f"> {CAUTION}"]
    return "\n".join(lines) + "\n"
