"""The loop and vector-field pictures of one result, as the HTML report embeds them and
``eigengate check --figures DIR`` writes them: what to draw, its file name, alt text and
caption. The numbers come from the result's plot data
(:attr:`eigengate.rules.results.ModelResult.pictures`); nothing here computes one.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Any, Callable

from .figures import _png_bytes, _style, _svg_text

__all__ = ["Picture", "pictures_for", "picture_files", "pole_map_files", "FIGURE_FORMATS"]

#: File formats ``--figures`` writes.
FIGURE_FORMATS = ("png", "svg")


@dataclass(frozen=True)
class Picture:
    """One picture of a model: ``kind`` (bode, nyquist, field), the file-name suffix, the alt
    text, the caption and the function that draws it on a new Figure (given matplotlib)."""

    kind: str
    suffix: str
    alt: str
    caption: str
    draw: Callable[[Any], Any]


def _failed_rules(result: Any) -> frozenset[str]:
    return frozenset(v.rule for v in result.verdicts if not v.passed)


def _db(x: float) -> str:
    return "none (no phase crossover)" if math.isinf(x) else f"{x:.3g} dB"


def _loop_pictures(result: Any) -> list[Picture]:
    from ..rules.pictures import loop_curves_of
    from .loop_plots import bode_figure, nyquist_figure

    curves = loop_curves_of(result)
    failed = _failed_rules(result)
    title = result.model.title
    out = []
    for c in curves:
        where = f"loop broken at the {c.at.replace('_', ' ')}" + (
            f", channel {c.channel}" if len(curves) > 1 else "")
        pm = "none (no gain crossover)" if math.isinf(c.phase_margin_deg) else \
            f"{c.phase_margin_deg:.3g}°"
        fails = [w for r, w in (("EG301", "gain"), ("EG302", "phase"), ("EG305", "disk"))
                 if r in failed]
        fail_note = f"; failing: {', '.join(fails)} margin" if fails else ""
        suffix = "" if len(curves) == 1 else "-" + re.sub(r"[^A-Za-z0-9._-]+", "-", c.channel)
        disk = {"disk": "the shaded disk",
                "half-plane": "the left half-plane Re L ≤ 0",
                "outside": "everything outside the dotted circle"}.get(c.disk_kind, "no region")
        texts = {
            "bode": (f"gain margin {_db(c.gain_margin_db)}, phase margin {pm}",
                     "Triangles on the dashed 0 dB line: gain crossovers; squares on the "
                     "dash-dot −180° line: phase crossovers; capped bars: the gain margin "
                     f"({_db(c.gain_margin_db)}) and the phase margin ({pm}), drawn thicker "
                     "in the failure colour when their requirement fails."),
            "nyquist": (f"disk margin {c.disk_margin:.3g}",
                        f"Bold plus: the critical point −1; a balanced disk margin α = "
                        f"{c.disk_margin:.3g} keeps the curve out of {disk} (gain and phase "
                        "varied together, Blight, Dailey & Gangsaas 1994); diamond: where "
                        "the curve comes nearest it. Dotted: the mirror image for ω ≤ 0.")}
        for kind, draw in (("bode", bode_figure), ("nyquist", nyquist_figure)):
            name = "Bode plot" if kind == "bode" else "Nyquist plot"
            marks, words = texts[kind]
            out.append(Picture(
                kind, f"{kind}{suffix}", f"{name} of {title}, {where}: {marks}{fail_note}",
                f"{name} of L, {where}. {words}", _drawer(draw, c, title, failed, len(curves))))
    return out


def _drawer(draw: Callable[..., Any], curve: Any, title: str, failed: frozenset[str],
            channels: int) -> Callable[[Any], Any]:
    """``draw`` of one curve, waiting for matplotlib."""
    return lambda mpl: draw(curve, title=title, failed=failed, channels=channels, mpl=mpl)


def _field_picture(result: Any) -> Picture | None:
    from ..rules.pictures import field_grid_of
    from .portrait import EQUILIBRIUM_MARKS, field_portrait_figure

    grid = field_grid_of(result)
    if grid is None:
        return None
    title = result.model.title
    tiny = 1e-9 * max(abs(v) for v in grid.box)  # a rounding-level coordinate reads as 0

    def coord(v: float) -> str:
        return f"{0.0 if abs(v) < tiny else v:.3g}"

    found = ", ".join(f"{EQUILIBRIUM_MARKS.get(t, ('', '', '', t))[3]} at "
                      f"({coord(x)}, {coord(y)})" for (x, y), t in zip(grid.equilibria,
                                                                        grid.types))
    failed = f" The function failed at {grid.failed} grid points (left blank)." \
        if grid.failed else ""
    return Picture(
        "field", "field",
        f"Phase portrait of the vector field of {title} over the {grid.whence}"
        + (f"; equilibria: {found}" if found else ""),
        f"Phase portrait drawn from the vector field itself, {grid.states[0]} against "
        f"{grid.states[1]}, over the {grid.whence}: streamlines of f on a {len(grid.xs)} × "
        f"{len(grid.ys)} grid. Marks: each equilibrium the search found, by type (legend); "
        f"bold plus: this model's operating point.{failed}",
        lambda mpl: field_portrait_figure(grid, title=title, mpl=mpl))


def pictures_for(result: Any) -> list[Picture]:
    """The loop and vector-field pictures of one analysed result, in report order."""
    out = []
    field = _field_picture(result)
    if field is not None:
        out.append(field)
    return out + _loop_pictures(result)


def picture_files(files: Any, fmt: str, dpi: int = 100):
    """``(file name, bytes)`` of every picture of every result in ``files`` (FileResult
    objects), ``fmt`` png or svg; names are ``<source>--<model title>--<kind>.<fmt>`` with
    anything but letters, digits, dots, dashes and underscores replaced."""
    if fmt not in FIGURE_FORMATS:
        raise ValueError(f"figure format must be one of {', '.join(FIGURE_FORMATS)}, got {fmt!r}")
    for fr in files:
        for r in fr.results:
            stem = _stem(r)
            for p in pictures_for(r):
                with _style() as mpl:
                    fig = p.draw(mpl)
                    data = _png_bytes(fig, dpi) if fmt == "png" else \
                        _svg_text(fig).encode("utf-8")
                yield f"{stem}--{p.suffix}.{fmt}", data


def _stem(r: Any) -> str:
    return re.sub(r"[^A-Za-z0-9._-]+", "-", f"{r.model.source}--{r.model.title}").strip("-")


def pole_map_files(files: Any, baseline_poles: Any = None):
    """``(file name, bytes)``: a PNG and an SVG pole map of every model with findings."""
    from .plots import pole_map_png, pole_map_svg

    for fr in files:
        for r in fr.results:
            if not r.findings:
                continue
            poles = (baseline_poles or {}).get((r.model.source, r.model.title))
            yield f"{_stem(r)}.png", pole_map_png(r, baseline_poles=poles)
            yield f"{_stem(r)}.svg", pole_map_svg(r, baseline_poles=poles).encode("utf-8")
