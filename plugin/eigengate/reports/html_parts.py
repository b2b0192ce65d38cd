"""The pieces of the HTML report: its stylesheet, value formatters and shared HTML fragments."""

from __future__ import annotations

import base64
import math
from html import escape
from typing import TYPE_CHECKING, Any, Mapping, Sequence

from .render import (DECIDED_NOTES, UNCERTAIN_NOTE, cause_lines, eigenvalue_text,
                     figure_line, finding_figure, mode_detail, mode_figures, mode_name,
                     pairs_text, states_text)

if TYPE_CHECKING:  # pragma: no cover
    from ..rules.findings import Finding

_STATUS_WORD = {"invalid": "INVALID", "fail": "FAIL", "warn": "WARN", "pass": "PASS"}

_CSS = """
:root{--ink:#1f3347;--muted:#5b6670;--line:#d5dbe1;--soft:#f4f6f8;--fail:#c0392b;
--warn:#b9770e;--pass:#2e7d5b;--invalid:#6c3483;--region:#dcefe6}
*{box-sizing:border-box}
body{margin:0;font:14px/1.45 system-ui,-apple-system,"Segoe UI",Roboto,"DejaVu Sans",sans-serif;
color:var(--ink);background:#fff}
.eg-head{background:var(--ink);color:#fff;padding:18px 28px 14px}
.eg-head h1{margin:0 0 4px;font-size:21px;font-weight:600;letter-spacing:.2px}
.eg-head .eg-summary{margin:6px 0 0;font-size:15px}
.eg-head .eg-tool{margin:0;color:#b8c4cf;font-size:12px}
.eg-caution{margin:14px 28px 0;padding:9px 14px;border-left:4px solid var(--warn);
background:#fbf5ea;font-size:13px}
.eg-wrap{padding:8px 28px 28px}
h2{font-size:17px;margin:22px 0 8px}
h4{font-size:13.5px;margin:16px 0 6px;text-transform:uppercase;letter-spacing:.6px;
color:var(--muted)}
table{border-collapse:collapse;font-size:13px}
th,td{padding:4px 9px;border-bottom:1px solid var(--line);text-align:left;vertical-align:top}
th{background:var(--soft);font-weight:600;white-space:nowrap}
td.num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
tr.eg-hit td{background:#fdf0ee}
.eg-index tbody tr:nth-child(even) td{background:#fafbfc}
.eg-index a{color:var(--ink)}
.eg-badge{display:inline-block;min-width:58px;padding:1px 7px;border-radius:3px;color:#fff;
font-size:11.5px;font-weight:700;letter-spacing:.5px;text-align:center}
.eg-badge.fail{background:var(--fail)}.eg-badge.warn{background:var(--warn)}
.eg-badge.pass{background:var(--pass)}.eg-badge.invalid{background:var(--invalid)}
.eg-badge.waived{background:#7d8a96}
details.eg-model{border:1px solid var(--line);border-radius:5px;margin:10px 0}
details.eg-model>summary{cursor:pointer;padding:8px 12px;background:var(--soft);
list-style-position:inside}
details.eg-model[open]>summary{border-bottom:1px solid var(--line)}
details.eg-model.fail,details.eg-model.invalid{border-left:4px solid var(--fail)}
details.eg-model.warn{border-left:4px solid var(--warn)}
summary h3.eg-title{display:inline;font-size:14px;margin:0 0 0 4px}
.eg-sum-file{color:var(--muted);font-size:12.5px;margin-left:8px}
.eg-sum-note{color:var(--muted);font-size:12.5px;float:right}
.eg-body{padding:6px 16px 14px}
.eg-facts{margin:6px 0;color:var(--muted);font-size:13px}
.eg-figs{display:flex;flex-wrap:wrap;gap:14px;margin-top:8px}
figure{margin:0}
figure img{max-width:100%;height:auto;border:1px solid var(--line)}
figcaption{font-size:12px;color:var(--muted);max-width:420px}
.eg-finding{border-left:3px solid var(--line);padding:4px 10px;margin:8px 0}
.eg-finding.error{border-left-color:var(--fail)}.eg-finding.warning{border-left-color:var(--warn)}
.eg-finding p{margin:3px 0}
.eg-mode{border:1px solid var(--line);border-radius:4px;padding:4px 10px;margin:8px 0}
.eg-mode p{margin:3px 0}.eg-lead{font-weight:600}
.eg-rule{font-weight:600}
.eg-req{font-family:ui-monospace,Menlo,Consolas,monospace;font-size:12.5px;color:var(--muted)}
.eg-hint{color:var(--muted)}
pre{background:var(--soft);padding:8px 10px;white-space:pre-wrap;font-size:12.5px}
.eg-note{color:var(--muted);font-size:12.5px}
a.eg-top{font-size:12px;color:var(--muted)}
footer{padding:14px 28px;color:var(--muted);font-size:12px;border-top:1px solid var(--line)}
"""


# -- small formatters ------------------------------------------------------------------------

def _num(x: Any, digits: int = 4, unit: str = "") -> str:
    if x is None:
        return "—"
    if isinstance(x, str):
        return x
    x = float(x)
    if math.isinf(x):
        text = ("-" if x < 0 else "") + "∞"
    elif math.isnan(x):
        text = "nan"
    else:
        text = f"{x:.{digits}g}"
    return f"{text} {unit}".rstrip()


def _ev(z: complex, pair: bool) -> str:
    from .render import format_eigenvalue

    return format_eigenvalue(z, pair)


def _e(x: Any) -> str:
    return escape(str(x), quote=True)


# -- fragments -------------------------------------------------------------------------------

def _img(png: bytes, alt: str) -> str:
    import struct

    w, h = struct.unpack(">II", png[16:24])  # IHDR: the first chunk of every PNG
    data = base64.b64encode(png).decode("ascii")
    return (f'<img src="data:image/png;base64,{data}" width="{w}" height="{h}" '
            f'alt="{_e(alt)}">')


def _mode_rows_table(rows: Sequence[Any], discrete: bool,
                     hits: Mapping[int, str] | None = None, limit: int | None = None
                     ) -> list[str]:
    """Every mode of a model: name, eigenvalue, ωn, ζ, τ, participating states; the error
    bounds and condition numbers in a collapsed detail table below."""
    head = ["mode", "z" if discrete else "eigenvalue"] + (["s equivalent"] if discrete else [])
    head += ["ωn [rad/s]", "ζ", "τ [s]", "participating states"]
    out = ["<table><thead><tr>" + "".join(f"<th>{_e(h)}</th>" for h in head)
           + "</tr></thead><tbody>"]
    shown = rows if limit is None else rows[:limit]
    for row in shown:
        cells = [eigenvalue_text(row)] + ([_ev(row.s, row.pair)] if discrete else [])
        cells += [_num(row.natural_frequency), _num(row.damping_ratio, 3),
                  _num(row.time_constant)]
        tds = f"<td>{_e(mode_name(row))}</td>" + "".join(
            f'<td class="num">{_e(c)}</td>' for c in cells) + f"<td>{_e(states_text(row))}</td>"
        cls = ' class="eg-hit"' if hits and row.index in hits else ""
        out.append(f"<tr{cls}>{tds}</tr>")
    out.append("</tbody></table>")
    out += ["<details class=\"eg-detail\"><summary>Error bounds and condition numbers</summary>",
            "<table><thead><tr><th>mode</th><th>± bound</th><th>κ</th></tr></thead><tbody>"]
    out += [f"<tr><td>{_e(mode_name(row))}</td><td class=\"num\">{_e(_num(row.uncertainty, 2))}"
            f"</td><td class=\"num\">{_e(_num(row.condition, 3))}</td></tr>" for row in shown]
    out.append("</tbody></table></details>")
    if limit is not None and len(rows) > limit:
        out.append(f'<p class="eg-note">{len(rows) - limit} more modes not listed (the '
                   f"{limit} least stable are).</p>")
    return out


def _mode_card(group: Any, discrete: bool) -> list[str]:
    """One mode the findings name: its name and each finding's figure (threshold, margin),
    then its figures, then a collapsed detail view (the baseline's mode, bounds)."""
    row = group.row
    out = [f'<div class="eg-mode"><p><b>{_e(group.title)}</b></p>']
    out += [f'<p class="eg-lead">{_e(finding_figure(f))}</p>' for f in group.findings]
    out.append(f"<p>{_e(pairs_text(mode_figures(row, discrete)))}</p>")
    detail = []
    if group.before is not None:
        detail.append(f"<p>In the baseline: {_e(pairs_text(mode_figures(group.before, discrete)))}"
                      "</p>")
    detail.append(f"<p>{_e(pairs_text(mode_detail(row)))}</p>")
    out += ["<details class=\"eg-detail\"><summary>Baseline, error bound, condition number"
            "</summary>", *detail,
            "</details></div>"]
    return out


def _mode_cards(findings: Sequence[Any], discrete: bool) -> list[str]:
    from .render import mode_groups

    groups = mode_groups(findings)
    if not groups:
        return []
    return ["<h4>Modes the findings name</h4>"] + [x for g in groups
                                                    for x in _mode_card(g, discrete)]


def _finding(f: "Finding", discrete: bool, modes: bool = True) -> list[str]:
    sev = "error" if f.severity == "error" else "warning"
    word = "FAIL" if sev == "error" else "WARN"
    head = (f'<span class="eg-badge {"fail" if sev == "error" else "warn"}">{word}</span> '
            f'<span class="eg-rule">{_e(f.rule)} {_e(f.name)}</span>')
    if f.requirement and f.rule != "EG001":
        head += f' <span class="eg-req">[{_e(f.requirement)}]</span>'
    if f.line:
        head += f' <span class="eg-note">line {f.line}</span>'
    out = [f'<div class="eg-finding {sev}"><p>{head}</p><p>{_e(f.message)}</p>']
    if f.uncertain:
        out.append(f'<p class="eg-hint">{UNCERTAIN_NOTE.capitalize()}.</p>')
    figure = figure_line(getattr(f, "figure", None))
    if figure:
        out.append(f'<p class="eg-note">Figure: {_e(figure)}.</p>')
    if getattr(f, "decided_by", ""):
        out.append(f'<p class="eg-note">Decided: {_e(f.decided_by)} '
                   f'({_e(DECIDED_NOTES[f.decided_by])}).</p>')
    causes = cause_lines(f)
    if causes:
        out.append('<ul class="eg-cause">' + "".join(f"<li>{_e(c)}</li>" for c in causes)
                   + "</ul>")
    if f.suggestion:
        out.append(f'<p class="eg-hint">Hint: {_e(f.suggestion)}</p>')
    if getattr(f, "waiver_note", ""):
        out.append(f'<p class="eg-note">Waiver: {_e(f.waiver_note)}.</p>')
    out.append("</div>")
    if modes:
        out.extend(_mode_cards([f], discrete))
    return out
