"""The HTML report's section for operating-point grids: per grid its headline, heat maps of the
smallest margin per point (:mod:`eigengate.reports.grid_plots`) and the table of its points,
worst first, linking to the sections of the points that have findings."""

from __future__ import annotations

from typing import Any, Mapping, Sequence

from .grid_table import grid_cells, grid_head, rest_line
from .html_parts import _e, _img

__all__ = ["grid_sections"]

_STATUS_CLASS = {"fail": "fail", "warn": "warn", "pass": "pass"}


def _table(summary: Any, anchors: Mapping[str, str]) -> list[str]:
    shown, left = summary.shown()
    out = ['<table class="eg-index eg-grid"><thead><tr>'
           + "".join(f"<th>{_e(h)}</th>" for h in grid_head(summary)) + "</tr></thead><tbody>"]
    for p in shown:
        cells = grid_cells(p)
        anchor = anchors.get(p.title)
        first = f'<a href="#{anchor}">{_e(cells[0])}</a>' if anchor else _e(cells[0])
        status = (f'<span class="eg-badge {_STATUS_CLASS[p.status]}">{_e(cells[1])}</span>')
        out.append(f'<tr class="eg-{p.status}"><td>{first}</td><td>{status}</td>'
                   + "".join(f'<td class="num">{_e(c)}</td>' for c in cells[2:6])
                   + f"<td>{_e(cells[6])}</td></tr>")
    out.append("</tbody></table>")
    if left:
        out.append(f'<p class="eg-note">{_e(rest_line(summary, left))}</p>')
    return out


def grid_sections(results: Sequence[Any], anchors: Mapping[tuple[str, str], str], mpl: Any,
                  dpi: int) -> list[str]:
    """HTML of every grid in ``results`` (nothing when there is none); ``anchors`` maps
    ``(source, point title)`` to the anchor of the point's section, where it has one."""
    from .figures import _png_bytes
    from .grid_plots import grid_slices, heatmap_alt, heatmap_figure

    grids = [fr.grid for fr in results if fr.grid is not None]
    if not grids:
        return []
    out = ['<h2 id="eg-grids">Operating-point grids</h2>']
    for k, g in enumerate(grids, 1):
        out.append(f'<h3 id="eg-grid-{k}">{_e(g.source)} · {_e(g.name)}</h3>')
        out.append(f"<p>{_e(g.headline())}. Points worst first; only points with findings "
                   "have a section of their own below.</p>")
        out.append('<div class="eg-figs">')
        for fixed, _ in grid_slices(g):
            png = _png_bytes(heatmap_figure(g, fixed, mpl=mpl), dpi)
            cap = ("Colour: the smallest margin of any requirement at the point (its "
                   "requirement is named in the table); hatched cells with a cross fail.")
            out.append(f"<figure>{_img(png, heatmap_alt(g, fixed))}<figcaption>{_e(cap)}"
                       "</figcaption></figure>")
        out.append("</div>")
        out.extend(_table(g, {t: a for (s, t), a in anchors.items() if s == g.source}))
    return out
