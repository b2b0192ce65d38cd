"""Markdown report: a pull-request comment (or a CI job summary) a reviewer can read.

Order of importance: a one-line verdict; the models that fail their requirements or regressed
from the baseline, each with its findings, one entry per mode it names (the mode's name and the
figures the findings are about first) and a collapsible detail view, then the command that
accepts the changes; improvements in one line each; warnings and waived findings in one line
each; passing models only as a count; the caution that the check is an engineering aid.

The text depends on nothing but the results (no time, no path of the machine), so a bot can
update its comment in place, and it is capped (:data:`MAX_CHARS`): what does not fit is
counted in a closing line instead of being cut off mid-table. Every piece of text that comes
from a model file is escaped, so a name cannot break the layout or inject markup.
"""

from __future__ import annotations

import re
from typing import Any, Iterable, Sequence

from .escape import printable
from .grid_table import grid_cells, grid_head, rest_line
from .render import (CAUTION, DECIDED_NOTES, UNCERTAIN_NOTE, cause_lines, figure_line,
                     finding_figure, mode_detail, mode_figures, mode_groups, own_findings,
                     pairs_text, plural, tally, waiver_text)

__all__ = ["render_markdown", "escape", "MAX_CHARS", "MARKER"]

#: Punctuation that Markdown (CommonMark and the usual extensions) may read as markup.
_SPECIAL = re.compile(r"([\\`*_{}\[\]<>|#~$&])")

#: The most characters a comment holds (code-hosting sites refuse comments of about 65,000).
MAX_CHARS = 60_000

#: First line of every comment: an HTML comment a bot finds its own comment by.
MARKER = "<!-- eigengate report -->"


def escape(text: str) -> str:
    """``text`` on one line (line breaks made spaces, other control characters escapes, see
    ``_escape``) with markup characters backslash-escaped."""
    return _SPECIAL.sub(r"\\\1", printable(" ".join(str(text).splitlines())))


def _code(text: str) -> str:
    """``text`` as inline code (backticks inside are not possible in a command we print)."""
    return "`" + printable(str(text)).replace("`", "'") + "`"


def _is_regression(f: Any) -> bool:
    return f.requirement == "baseline"


def _state(findings: Sequence[Any]) -> str:
    errors = [f for f in findings if f.severity == "error"]
    what = []
    if any(not _is_regression(f) for f in errors):
        what.append("fails its requirements")
    if any(_is_regression(f) for f in errors):
        what.append("regressed from the baseline")
    return " and ".join(what) or "warnings only"


def _verdict(results: Sequence[Any]) -> str:
    c = tally(results)
    word = "failed" if c["errors"] else ("passed with warnings" if c["warnings"] else "passed")
    failing = c["failed_models"] + c["invalid_files"]
    text = (f"**eigengate: {word}** — {plural(c['models'], 'model')} in "
            f"{plural(c['files'], 'file')}: {failing} failing")
    if c["invalid_files"]:
        text += f" ({plural(c['invalid_files'], 'invalid file')})"
    text += f", {c['models'] - c['failed_models']} passing"
    text += f"; {plural(c['errors'], 'error finding')}, {plural(c['warnings'], 'warning')}"
    if c["waived"]:
        text += f", {c['waived']} waived"
    return text + "."


def _finding_item(f: Any) -> str:
    where = ", ".join(x for x in (f"line {f.line}" if f.line else "",
                                  escape(f.requirement) if f.rule != "EG001" else "") if x)
    return f"- **{f.rule} {f.name}**" + (f" ({where})" if where else "") + \
        f": {escape(f.message)}"


def _finding_details(f: Any) -> list[str]:
    notes = []
    if f.uncertain:
        notes.append(UNCERTAIN_NOTE)
    figure = figure_line(getattr(f, "figure", None))
    if figure:
        notes.append(f"figure: {escape(figure)}")
    if getattr(f, "decided_by", ""):
        notes.append(f"decided: {f.decided_by} ({DECIDED_NOTES[f.decided_by]})")
    if f.suggestion:
        notes.append(f"hint: {escape(f.suggestion)}")
    if getattr(f, "waiver_note", ""):
        notes.append(f"waiver: {escape(f.waiver_note)}")
    return [f"- {f.rule}: " + "; ".join(notes)] if notes else []


def _model_block(title: str, findings: Sequence[Any], discrete: bool) -> list[str]:
    """A failing or regressed model: findings, one entry per mode, a collapsible detail."""
    out = ["", f"### {title} — {_state(findings)}", ""]
    for f in findings:
        out.append(_finding_item(f))
        out += [f"  - cause: {escape(c)}" for c in cause_lines(f)]
    groups = mode_groups(findings)
    if groups:
        out.append("")
    detail: list[str] = []
    for g in groups:
        name = escape(g.title)
        out.append(f"- **{name}**: " + "; ".join(escape(finding_figure(f))
                                                for f in g.findings))
        out.append(f"  - {escape(pairs_text(mode_figures(g.row, discrete)))}")
        if g.before is not None:
            detail.append(f"- {name} in the baseline: "
                          f"{escape(pairs_text(mode_figures(g.before, discrete)))}")
        detail.append(f"- {name}: {escape(pairs_text(mode_detail(g.row)))}")
    notes = [line for f in findings for line in _finding_details(f)]
    if notes or detail:
        out += ["", "<details><summary>Details: how each finding was decided, hints, the "
                "baseline's modes, error bounds</summary>", "", *notes, *detail, "",
                "</details>"]
    return out


def _table(head: Sequence[str], rows: Iterable[Sequence[str]]) -> list[str]:
    def row(cells: Sequence[str]) -> str:
        return "| " + " | ".join(cells) + " |"

    return [row(head), row(["---"] * len(head)), *(row(r) for r in rows)]


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


def _short_item(title: str, findings: Sequence[Any]) -> str:
    rules = ", ".join(sorted({f.rule for f in findings if f.severity == "error"}))
    return f"- {title} — {_state(findings)}: {rules}"


def _failing(results: Sequence[Any]) -> list[tuple[str, list[Any], bool]]:
    """(title, findings, discrete) of each failing or regressed model and each file with
    errors of its own, in the order of the results."""
    out = []
    for fr in results:
        src = escape(fr.source)
        detailed = fr.grid.detailed() if fr.grid is not None else None
        for r in fr.results:
            if detailed is not None and r.model.title not in detailed:
                continue  # a row of the grid's table
            if any(f.severity == "error" for f in r.findings):
                out.append((f"{src} · {escape(r.model.title)}", list(r.findings),
                            r.model.discrete))
        own = own_findings(fr)
        if any(f.severity == "error" for f in own):
            word = " (invalid model file)" if fr.error is not None else ""
            out.append((f"{src}{word}", own, False))
    return out


def _one_liners(results: Sequence[Any]) -> list[str]:
    """Warnings and waived findings, one line each."""
    out = []
    for fr in results:
        src = escape(fr.source)
        for r in fr.results:
            title = f"{src} · {escape(r.model.title)}"
            if any(f.severity == "error" for f in r.findings):
                warnings = []  # already in the model's block
            else:
                warnings = [f for f in r.findings if f.severity != "error"]
            out += [f"- warning: {title}: **{f.rule} {f.name}** {escape(f.message)}"
                    for f in warnings]
            for f in getattr(r, "waived", ()):
                text = waiver_text(f)
                out.append(f"- waived: {title}: **{f.rule} {f.name}**"
                           + (f" {escape(text)}" if text else "")
                           + f" — reason: {escape(f.waived)}")
        if not any(f.severity == "error" for f in own_findings(fr)):
            out += [f"- warning: {src}: **{f.rule} {f.name}** {escape(f.message)}"
                    for f in own_findings(fr)]
    return out


class _Budget:
    """Lines added while they fit under the cap (a reserve kept for the closing lines)."""

    def __init__(self, limit: int, reserve: int = 800) -> None:
        self.lines: list[str] = []
        self.size = 0
        self.limit = limit - reserve

    def add(self, lines: Sequence[str]) -> bool:
        size = sum(len(x) + 1 for x in lines)
        if self.size + size > self.limit:
            return False
        self.lines.extend(lines)
        self.size += size
        return True


def render_markdown(results: Iterable[Any], *, accept: str | None = None,
                    improvements: Sequence[str] = (), max_chars: int = MAX_CHARS) -> str:
    """Render :class:`~eigengate.scan.engine.FileResult` objects as a pull-request comment in
    GitHub-flavoured Markdown.

    Parameters
    ----------
    accept
        The command that accepts the current models into the baseline, shown after the
        failing and regressed models when any regressed.
    improvements
        One line per mode that got better than the baseline.
    max_chars
        The cap on the comment's length; what does not fit is counted, not cut.

    Returns
    -------
    str
        Markdown text ending in a newline.
    """
    results = list(results)
    out = _Budget(max_chars)
    out.add([MARKER, _verdict(results)])
    left: dict[str, int] = {}
    failing = _failing(results)
    if failing:
        out.add(["", f"## Failing and regressed ({len(failing)})"])
    for title, findings, discrete in failing:
        if not out.add(_model_block(title, findings, discrete)):
            if not out.add(["", _short_item(title, findings)]):
                left["failing or regressed models"] = left.get(
                    "failing or regressed models", 0) + 1
    grids = [fr.grid for fr in results if fr.grid is not None]
    if grids:
        out.add(["", f"## Operating-point grids ({len(grids)})"])
    for grid in grids:
        if not out.add(_grid_section(grid)):
            left["grid tables"] = left.get("grid tables", 0) + 1
    regressed = any(_is_regression(f) and f.severity == "error"
                    for _, findings, _ in failing for f in findings)
    if accept and regressed:
        out.add(["", f"If the changes are intended, accept them after review: {_code(accept)}"])
    sections = [("Improvements", "improvements", [f"- {escape(i)}" for i in improvements]),
                ("Warnings and waivers", "warnings and waived findings", _one_liners(results))]
    for head, word, items in sections:
        if not items:
            continue
        out.add(["", f"## {head} ({len(items)})", ""])
        for i, item in enumerate(items):
            if not out.add([item]):
                left[word] = len(items) - i
                break
    clean = sum(1 for fr in results for r in fr.results
                if not r.findings and not getattr(r, "waived", ()))
    tail = ["", f"{plural(clean, 'model')} {'passes' if clean == 1 else 'pass'} every check "
                "(not listed)."]
    if left:
        tail.append("Left out to keep this comment under "
                    f"{max_chars:,} characters: "
                    + ", ".join(f"{n} {word}" for word, n in left.items())
                    + "; the text or JSON report has everything.")
    tail += ["", f"> {CAUTION}"]
    return "\n".join(out.lines + tail) + "\n"
