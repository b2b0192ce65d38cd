"""The reviewer's report: one self-contained HTML file (inline CSS, PNG figures as data URIs).

Layout: a summary and the caution, an index with one row per model (failing ones first), then
a collapsible section per model (failing ones open) with the pole map over the allowed region,
the phase portrait of two-state models (of a vector field: drawn from the field over its
search box), the Bode and Nyquist plots of loops with margin requirements
(:mod:`eigengate.reports.pictures`), the findings, the requirements checked, loop margins,
the modes and, for nonlinear models, the equilibria found. Headings run h1 → h2 → h3 (a
model, in its summary line) → h4 (its parts); every image has alt text. No JavaScript and nothing fetched at
view time. Like every report it renders what the engine found and decides nothing itself.

The figures need matplotlib (``pip install "eigengate[report]"``); without it
:func:`render_html` raises :class:`~eigengate.reports.plots.ReportDependencyError`.
"""

from __future__ import annotations

import re
from typing import TYPE_CHECKING, Any, Callable, Iterable, Mapping, Sequence

from .html_parts import (_CSS, _STATUS_WORD, _e, _finding, _img, _mode_cards,
                         _mode_rows_table, _num)
from .render import waiver_text
from .figures import ReportDependencyError
from .html_grid import grid_sections

if TYPE_CHECKING:  # pragma: no cover
    from ..rules.results import FileResult, ModelResult
    from ..rules.findings import Finding

__all__ = ["render_html", "CAUTION", "ReportDependencyError", "DEFAULT_MAX_IMAGES",
           "MAX_MODE_ROWS"]

CAUTION = ("eigengate is an engineering aid for model regression checks. A model that passes "
           "says nothing about the physical system beyond the model. Safety-critical sign-off "
           "follows the applicable standards and licensed engineering practice.")
#: Sections that get figures, failing models first; the rest state that they were left out.
DEFAULT_MAX_IMAGES = 100
#: Modes listed per model (least stable first); a note counts the others.
MAX_MODE_ROWS = 60

_STATUS_RANK = {"invalid": 0, "fail": 1, "warn": 2, "pass": 3}


# -- what the rows say -----------------------------------------------------------------------

class _Entry:
    """One section of the report: a model (operating point) or a file that did not load."""

    __slots__ = ("file", "result", "own", "status", "anchor", "order")

    def __init__(self, file: "FileResult", result: "ModelResult | None",
                 own: Sequence["Finding"], order: int) -> None:
        self.file, self.result, self.own, self.order = file, result, tuple(own), order
        findings = self.findings
        if result is None:
            self.status = "invalid"
        elif any(f.severity == "error" for f in findings):
            self.status = "fail"
        elif findings:
            self.status = "warn"
        else:
            self.status = "pass"
        self.anchor = ""

    @property
    def findings(self) -> tuple:
        own = tuple(self.own)
        return own if self.result is None else tuple(self.result.findings) + own

    @property
    def title(self) -> str:
        return "(not loaded)" if self.result is None else self.result.model.title


def _entries(results: Iterable["FileResult"]) -> list[_Entry]:
    out: list[_Entry] = []
    for fr in results:
        if fr.error is not None or not fr.results:
            out.append(_Entry(fr, None, fr.findings, len(out)))
            continue
        shown = {id(f) for r in fr.results for f in r.findings}
        own = [f for f in fr.findings if id(f) not in shown]  # expired or unused waivers
        # a grid: its table stands for every point but its worst ones with findings
        detailed = fr.grid.detailed() if fr.grid is not None else None
        for k, r in enumerate(fr.results):
            if detailed is not None and not (k == 0 and own) and r.model.title not in detailed:
                continue
            out.append(_Entry(fr, r, own if k == 0 else (), len(out)))
    # Failing models first: the index reads as a to-do list. Stable within each status.
    out.sort(key=lambda e: (_STATUS_RANK[e.status], e.order))
    used: set[str] = set()
    for e in out:
        name = e.file.source if e.result is None else f"{e.file.source}--{e.title}"
        base = "m-" + (re.sub(r"[^A-Za-z0-9]+", "-", name)
                       .strip("-").lower() or "model")
        anchor, k = base, 2
        while anchor in used:
            anchor, k = f"{base}-{k}", k + 1
        used.add(anchor)
        e.anchor = anchor
    return out


def _margin_verdicts(result: "ModelResult | None") -> list:
    """Verdicts of loop-margin rules (read generically: the rule's name says "margin") that
    measured something."""
    if result is None:
        return []
    return [v for v in result.verdicts if "margin" in v.name and v.measured != "n/a"]


def _crossover(v: Any) -> str:
    """The frequency a margin verdict was measured at: a field when the verdict has one,
    else the first ``at … rad/s`` of its message."""
    for name in ("frequency", "crossover", "crossover_frequency"):
        value = getattr(v, name, None)
        if isinstance(value, (int, float)):
            return _num(value, unit="rad/s")
    m = re.search(r"at (∞|[-+0-9.eE]+) rad/s", v.message)
    return m.group(1) + " rad/s" if m else "—"


# -- the index -------------------------------------------------------------------------------

def _summary(results: Sequence["FileResult"], n_files: int) -> str:
    from .render import summary_line

    # from the results, not the sections: a grid has sections for its worst points only
    models = sum(len(fr.results) for fr in results if fr.error is None)
    failing = invalid = 0
    for fr in results:  # as the sections count: a file's own errors go with its first model
        if fr.error is not None or not fr.results:
            invalid += 1
            continue
        theirs = {id(f) for r in fr.results for f in r.findings}
        own = any(f.severity == "error" for f in fr.findings if id(f) not in theirs)
        failing += sum(1 for k, r in enumerate(fr.results) if not r.passed or (k == 0 and own))
    errors = sum(1 for fr in results for f in fr.findings if f.severity == "error")
    warnings = sum(1 for fr in results for f in fr.findings if f.severity != "error")

    return summary_line(n_files, models, failing, errors, warnings, invalid)


def _index(entries: Sequence[_Entry]) -> list[str]:
    columns: dict[str, str] = {}  # margin rule name → unit, in rule order
    rules: dict[str, str] = {}
    for e in entries:
        for v in _margin_verdicts(e.result):
            columns.setdefault(v.name, v.unit)
            rules.setdefault(v.name, v.rule)
    names = sorted(columns, key=lambda n: rules[n])
    head = ["", "file", "model", "verdict", "abscissa / radius", "min ζ", "findings"]
    head += [f"{n} [{columns[n]}]" if columns[n] else n for n in names]
    out = ['<table class="eg-index" id="eg-index-table"><thead><tr>'
           + "".join(f"<th>{_e(h)}</th>" for h in head) + "</tr></thead><tbody>"]
    for k, e in enumerate(entries, 1):
        r = e.result
        link = f'<a href="#{e.anchor}">{_e(e.title)}</a>'
        if r is None:
            figure = zeta = "—"
        else:
            sp = r.spectrum
            figure = (f"ρ = {_num(sp.spectral_radius)}" if r.model.discrete else
                      f"σ = {_num(sp.spectral_abscissa, unit='1/s')}")
            zeta = _num(sp.min_damping, 3) if any(m.oscillatory for m in sp.modes) else "—"
        n_err = sum(1 for f in e.findings if f.severity == "error")
        n_warn = len(e.findings) - n_err
        count = str(len(e.findings)) + (f" ({n_warn} warn)" if n_warn and n_err else "")
        cells = [f'<td class="num">{k}</td>', f"<td>{_e(e.file.source)}</td>",
                 f"<td>{link}</td>",
                 f'<td><span class="eg-badge {e.status}">{_STATUS_WORD[e.status]}</span></td>',
                 f'<td class="num">{_e(figure)}</td>', f'<td class="num">{_e(zeta)}</td>',
                 f'<td class="num">{_e(count)}</td>']
        by_name = {v.name: v for v in _margin_verdicts(r)}
        for n in names:
            v = by_name.get(n)
            text = "—" if v is None else _num(v.measured)
            mark = "" if v is None or v.passed else " ✗"
            cells.append(f'<td class="num">{_e(text + mark)}</td>')
        out.append(f'<tr class="eg-{e.status}">' + "".join(cells) + "</tr>")
    out.append("</tbody></table>")
    return out


# -- a model's section -----------------------------------------------------------------------

def _region_caption(model: Any) -> str:
    from .plots import allowed_region

    region = allowed_region(model)
    if region is None:
        text = "No pole-region requirement: nothing shaded."
    else:
        text = f"Shaded: the allowed region, {region.describe()}"
        text += " (mapped by z = e^{sT})." if model.discrete else "."
    return text


def _figures(e: _Entry, mpl: Any, baseline: Sequence[complex] | None, dpi: int) -> list[str]:
    from .figures import _png_bytes
    from .plots import marked_modes, pole_map_figure, pseudospectral_grid
    from .transient import growth_verdict, transient_figure
    from .portrait import can_draw_phase_portrait, phase_portrait_figure
    from .pictures import pictures_for

    r = e.result
    assert r is not None  # figures are drawn for analysed models only
    m = r.model
    n = r.spectrum.n_eigenvalues
    hits = sum(mode.count for mode in r.spectrum.modes if mode.index in marked_modes(r))
    alt = (f"Pole map of {m.title}: {n} poles" + (f", {hits} in failing or warning checks"
                                                   if hits else ""))
    caption = (f"{n} poles, one marker each (×k: a k-fold eigenvalue); red: named by a failed "
               f"check, amber: by a warning. {_region_caption(m)}")
    if r.spectrum.infinite:
        caption += f" {r.spectrum.infinite} infinite eigenvalues (descriptor) are not drawn."
    if baseline:
        caption += (" Hollow circles: baseline poles; arrows join each moved pole to the "
                    "nearest baseline pole (a drawing aid: the findings state which mode "
                    "became which).")
    if pseudospectral_grid(r) is not None:
        caption += (" Grey curves: the ε-pseudospectra for ε = 1e-4 … 1e-1, the regions the "
                    "poles can reach under perturbations of A of norm ε.")
    png = _png_bytes(pole_map_figure(r, baseline_poles=baseline, mpl=mpl), dpi)
    out = ['<div class="eg-figs">', f"<figure>{_img(png, alt)}<figcaption>{_e(caption)}"
           "</figcaption></figure>"]
    pictures = pictures_for(r)
    if can_draw_phase_portrait(m) and not any(p.kind == "field" for p in pictures):
        png = _png_bytes(phase_portrait_figure(r, mpl=mpl), dpi)
        where = "the origin" if m.nonlinear is None else "the operating point (deviations)"
        cap = (f"Phase portrait of the linear model around {where}; straight lines: "
               "eigenvector directions of real eigenvalues (solid teal: stable, dashed amber: "
               "unstable).")
        out.append(f"<figure>{_img(png, 'Phase portrait of ' + m.title)}<figcaption>{_e(cap)}"
                   "</figcaption></figure>")
    for p in pictures:
        png = _png_bytes(p.draw(mpl), dpi)
        out.append(f'<figure class="eg-{p.kind}">{_img(png, p.alt)}<figcaption>'
                   f"{_e(p.caption)}</figcaption></figure>")
    growth = growth_verdict(r)
    if growth is not None:
        png = _png_bytes(transient_figure(r, mpl=mpl), dpi)
        f = growth.figure
        unit = "steps" if m.discrete else "s"
        cap = (f"Transient growth: the largest amplification of any initial state over time; "
               f"peak {f.value:.4g} (bracket [{f.lower:.4g}, {f.upper:.4g}]) at "
               f"{f.at[0]:.4g} {unit}; dashed: the limit.")
        out.append(f"<figure>{_img(png, 'Transient growth of ' + m.title)}<figcaption>"
                   f"{_e(cap)}</figcaption></figure>")
    out.append("</div>")
    return out



def _verdicts(r: "ModelResult") -> list[str]:
    if not r.verdicts:
        return []
    out = ["<h4>Requirements checked</h4>", "<table><thead><tr><th>rule</th><th>requirement"
           "</th><th>result</th><th>measured</th><th>threshold</th><th>margin</th>"
           "<th>decided</th></tr></thead>"
           "<tbody>"]
    for v in r.verdicts:
        status = "pass" if v.passed else "fail"
        word = ("PASS" if v.passed else "FAIL") + ("?" if v.uncertain else "")
        unit = f" {v.unit}" if v.unit and not isinstance(v.measured, str) else ""
        out.append(f"<tr><td>{_e(v.rule)} {_e(v.name)}</td><td class=\"eg-req\">"
                   f"{_e(v.requirement)}</td><td><span class=\"eg-badge {status}\">{word}</span>"
                   f"</td><td class=\"num\">{_e(_num(v.measured) + unit)}</td>"
                   f"<td class=\"num\">{_e(_num(v.threshold))}</td>"
                   f"<td class=\"num\">{_e(_num(v.margin))}</td>"
                   f"<td>{_e(v.decided_by)}</td></tr>")
    out.append("</tbody></table>")
    if any(v.uncertain for v in r.verdicts):
        out.append('<p class="eg-note">?: the outcome is numerically uncertain; the model\'s '
                   "on_uncertain policy decided it.</p>")
    return out


def _margins(r: "ModelResult") -> list[str]:
    rows = _margin_verdicts(r)
    if not rows:
        return []
    out = ["<h4>Loop margins</h4>", "<table><thead><tr><th>margin</th><th>measured</th>"
           "<th>required</th><th>at</th><th>detail</th></tr></thead><tbody>"]
    for v in rows:
        unit = f" {v.unit}" if v.unit and not isinstance(v.measured, str) else ""
        cls = "" if v.passed else ' class="eg-hit"'
        out.append(f"<tr{cls}><td>{_e(v.name)}</td><td class=\"num\">"
                   f"{_e(_num(v.measured) + unit)}</td><td class=\"num\">"
                   f"{_e(_num(v.threshold) + (f' {v.unit}' if v.unit else ''))}</td>"
                   f"<td class=\"num\">{_e(_crossover(v))}</td><td>{_e(v.message)}</td></tr>")
    out.append("</tbody></table>")
    return out


def _equilibria(r: "ModelResult") -> list[str]:
    """Equilibria of a nonlinear model, when the result (or its model's cached search)
    carries them; read defensively, the feature is young."""
    found = getattr(r, "equilibria", None)
    if found is None:
        shared = getattr(getattr(r.model, "nonlinear", None), "shared", None)
        found = shared.get("search") if isinstance(shared, dict) else None
    if found is None:
        return []
    items = getattr(found, "equilibria", found)
    try:
        items = list(items)
    except TypeError:
        return []
    states = r.model.states
    out = ["<h4>Equilibria</h4>"]
    describe = getattr(found, "describe", None)
    if callable(describe) and items is not found:
        try:
            out.append(f'<p class="eg-note">Search: {_e(describe())}</p>')
        except Exception:  # noqa: BLE001 - a summary line is not worth failing the report
            pass
    if not items:
        out.append("<p>No equilibrium found.</p>")
        return out
    out.append("<table><thead><tr><th>#</th><th>location</th><th>type</th><th>residual</th>"
               "</tr></thead><tbody>")
    for k, eq in enumerate(items, 1):
        x = getattr(eq, "x", None)
        if x is not None:
            names = states if len(states) == len(x) else [f"x{i + 1}" for i in range(len(x))]
            where = ", ".join(f"{n} = {_num(v, 6)}" for n, v in zip(names, x))
        else:
            where = str(eq)
        kind = getattr(getattr(eq, "equilibrium", None), "type", None) or \
            getattr(eq, "type", None) or "—"
        out.append(f"<tr><td>{k}</td><td>{_e(where)}</td><td>{_e(kind)}</td>"
                   f"<td class=\"num\">{_e(_num(getattr(eq, 'residual', None), 3))}</td></tr>")
    out.append("</tbody></table>")
    return out


def _section(e: _Entry, figures: list[str] | None, max_images: int | None) -> list[str]:
    opened = " open" if e.status in ("fail", "invalid") else ""
    n = len(e.findings)
    note = f"{n} finding{'s' if n != 1 else ''}" if n else "no findings"
    out = [f'<details class="eg-model {e.status}" id="{e.anchor}"{opened}>',
           f'<summary><span class="eg-badge {e.status}">{_STATUS_WORD[e.status]}</span> '
           f"<h3 class=\"eg-title\">{_e(e.title)}</h3>"
           f"<span class=\"eg-sum-file\">{_e(e.file.source)}</span>"
           f'<span class="eg-sum-note">{_e(note)}</span></summary>', '<div class="eg-body">']
    r = e.result
    if r is None:
        out.append("<p>The file could not be checked:</p>")
        out.extend(x for f in e.findings for x in _finding(f, False))
        out.append('<p><a class="eg-top" href="#eg-index">back to the index</a></p>')
        out.append("</div></details>")
        return out
    m, sp = r.model, r.spectrum
    kind = f"discrete, T = {m.sample_period:g} s" if m.discrete else "continuous"
    figure = (f"spectral radius {_num(sp.spectral_radius, 6)}, " if m.discrete else "") + \
        f"spectral abscissa {_num(sp.spectral_abscissa, 6, '1/s')}"
    n_modes = len(sp.modes)
    facts = (f"{m.structure}, {kind}, {m.n_states} state{'' if m.n_states == 1 else 's'}, "
             f"{sp.n_eigenvalues} eigenvalue{'' if sp.n_eigenvalues == 1 else 's'} in "
             f"{n_modes} mode{'' if n_modes == 1 else 's'}"
             + (f", {sp.infinite} infinite" if sp.infinite else "")
             + f"; {figure}; origin: {r.equilibrium.describe()}")
    out.append(f'<p class="eg-facts">{_e(facts)}</p>')
    if figures is not None:
        out.extend(figures)
    else:
        out.append(f'<p class="eg-note">Figures left out: this report draws them for the '
                   f"first {max_images} sections (failing models first) to stay small.</p>")
    if e.findings:
        out.append("<h4>Findings</h4>")
        for f in e.findings:
            out.extend(_finding(f, m.discrete, modes=False))
        out.extend(_mode_cards(e.findings, m.discrete))
    for f in getattr(r, "waived", ()):
        text = waiver_text(f)
        out.append(f'<div class="eg-finding"><p><span class="eg-badge waived">WAIVED</span> '
                   f'<span class="eg-rule">{_e(f.rule)} {_e(f.name)}</span> '
                   f'<span class="eg-req">[{_e(f.requirement)}]</span></p>'
                   f"<p>{_e(f.message)}</p>"
                   + (f'<p class="eg-note">{_e(text[0].upper() + text[1:])}.</p>' if text else "")
                   + f"<p class=\"eg-hint\">Reason: {_e(f.waived)}</p></div>")
    out.extend(_verdicts(r))
    out.extend(_margins(r))
    from ..rules.findings import ModeRow
    from .plots import marked_modes

    out.append("<h4>Modes (least stable first)</h4>")
    out.extend(_mode_rows_table([ModeRow.of(x) for x in sp.modes], m.discrete,
                                marked_modes(r), MAX_MODE_ROWS))
    out.extend(_equilibria(r))
    out.append('<p><a class="eg-top" href="#eg-index">back to the index</a></p>')
    out.append("</div></details>")
    return out


# -- the document ----------------------------------------------------------------------------

def render_html(results: Sequence["FileResult"], *, tool_version: str,
                baseline_poles: Mapping[tuple[str, str], Sequence[complex]] | None = None,
                title: str = "eigengate report", max_images: int | None = DEFAULT_MAX_IMAGES,
                dpi: int = 90, progress: Callable[[int, int], None] | None = None) -> str:
    """Render check results as one self-contained HTML document.

    Parameters
    ----------
    results
        :class:`~eigengate.scan.engine.FileResult` objects, in the order to list them (failing
        models are moved to the front, otherwise the order is kept).
    tool_version
        Shown in the header and footer (the report carries no date, so the same results give
        the same bytes).
    baseline_poles
        ``(source, model title) → baseline eigenvalues`` in the model's own plane; the pole
        map of each such model draws them with arrows to the poles that moved.
    title
        The document title.
    max_images
        At most this many sections get figures (failing models first); None: all. A PNG
        figure is 5–25 kB, so the default keeps a 500-model report within a few MB.
    dpi
        Resolution of the figures (4.5×3.6 in each).
    progress
        Called as ``progress(done, total)`` after each section.

    Raises
    ------
    ReportDependencyError
        matplotlib is not installed (``pip install "eigengate[report]"``).
    """
    from .figures import _require, _style

    _require("the HTML report")
    results = list(results)
    entries = _entries(results)
    total = len(entries)
    baseline_poles = baseline_poles or {}
    doc = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           f"<title>{_e(title)}</title>", f"<style>{_CSS}</style></head><body>",
           '<header class="eg-head">', f"<h1>{_e(title)}</h1>",
           f'<p class="eg-tool">eigengate {_e(tool_version)}</p>',
           f'<p class="eg-summary" id="eg-summary">{_e(_summary(results, len(results)))}</p>',
           "</header>", f'<p class="eg-caution" id="eg-caution">{_e(CAUTION)}</p>',
           '<div class="eg-wrap">', '<h2 id="eg-index">Index</h2>']
    doc.extend(_index(entries))
    drawn = 0
    with _style() as mpl:
        doc.extend(grid_sections(results, {(e.file.source, e.title): e.anchor
                                           for e in entries if e.result is not None}, mpl, dpi))
        doc.append("<h2>Models</h2>")
        for k, e in enumerate(entries, 1):
            figures = None
            if e.result is not None and (max_images is None or drawn < max_images):
                key = (e.result.model.source, e.result.model.title)
                base = baseline_poles.get(key)
                if base is None:
                    base = baseline_poles.get((e.file.source, e.result.model.title))
                figures = _figures(e, mpl, base, dpi)
                drawn += 1
            doc.extend(_section(e, figures, max_images))
            if progress is not None:
                progress(k, total)
    doc.append("</div>")
    doc.append(f"<footer>Written by eigengate {_e(tool_version)}; self-contained, no scripts."
               "</footer>")
    doc.append("</body></html>")
    return "\n".join(doc) + "\n"
