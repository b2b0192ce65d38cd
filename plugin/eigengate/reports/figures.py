"""Shared plumbing of the report figures: palette, fixed style, lazy matplotlib, encoders."""

from __future__ import annotations

import contextlib
import io
from typing import Any, Iterator

from ..errors import EigengateError

#: Size of every figure, inches (at 90 dpi: 405×324 px).
FIGSIZE = (4.5, 3.6)
#: Default resolution of the figures embedded in the HTML report.
HTML_DPI = 90
#: Colours a PNG keeps; the figures use a dozen flat colours plus antialiasing ramps.
PNG_COLORS = 96

# Our palette: ink, region, and one colour per finding severity.
_INK = "#1f3347"
_MUTED = "#7d8a96"
_GRID = "#e4e8ec"
_REGION_FILL = "#dcefe6"
_REGION_EDGE = "#3f7f68"
_ERROR = "#c0392b"
_WARNING = "#d68910"
_BASELINE = "#8e99a4"
# Marks of the loop and phase-portrait pictures: a teal/amber/violet set chosen to stay apart
# for red-green and blue-yellow colour-vision deficiencies (they differ in lightness and
# hue), and always paired with a shape or line style of its own, so colour is never the only
# cue (docs/report.md lists the marks).
_GAIN_MARK = "#0e6b82"
_PHASE_MARK = "#a35a00"
_DISK_EDGE = "#5b2f96"
_DISK_FILL = "#ebe5f3"
_CRITICAL = "#14202c"
_MARK_FAIL = "#d1495b"  # a margin whose requirement failed (also drawn thicker, and so named)
#: The marks' colours, checked for colour-vision deficiencies by tests/report/test_palette.py.
MARK_COLOURS = {"curve": _INK, "gain": _GAIN_MARK, "phase": _PHASE_MARK, "disk": _DISK_EDGE,
                "failing": _MARK_FAIL}
_STABLE_DIR = _GAIN_MARK
_UNSTABLE_DIR = _PHASE_MARK

_RC = {
    "font.family": "DejaVu Sans",  # shipped with matplotlib: the same glyphs everywhere
    "font.size": 8.0,
    "axes.titlesize": 8.5,
    "axes.labelsize": 8.0,
    "axes.linewidth": 0.6,
    "axes.edgecolor": "#5b6670",
    "axes.labelcolor": _INK,
    "xtick.labelsize": 7.0,
    "ytick.labelsize": 7.0,
    "xtick.color": "#5b6670",
    "ytick.color": "#5b6670",
    "xtick.major.width": 0.6,
    "ytick.major.width": 0.6,
    "legend.fontsize": 7.0,
    "svg.hashsalt": "eigengate",
    "svg.fonttype": "none",  # text stays text: small files, searchable labels
    "path.simplify": True,
}


class ReportDependencyError(EigengateError, ImportError):
    """The graphical report needs matplotlib, which is not installed."""

    def __init__(self, what: str = "the graphical report") -> None:
        self.what = what
        super().__init__(f"{what} needs matplotlib, which is not installed; install it with "
                         f'pip install "eigengate[report]"')


def _require(what: str = "the graphical report") -> Any:
    """Import matplotlib (and select the Agg backend when nothing else chose one yet)."""
    import sys

    try:
        import matplotlib
    except ImportError:
        raise ReportDependencyError(what) from None
    if "matplotlib.pyplot" not in sys.modules:
        # Every figure is drawn on an explicit Agg canvas anyway; selecting Agg here only keeps
        # a later pyplot import from probing for a display. A session that already runs pyplot
        # keeps its backend: switching it would close the user's windows.
        matplotlib.use("Agg")
    return matplotlib


@contextlib.contextmanager
def _style() -> Iterator[Any]:
    """matplotlib's default style plus ours, for the duration of one figure."""
    mpl = _require()
    with mpl.rc_context():
        mpl.rcdefaults()
        mpl.rcParams.update(_RC)
        yield mpl


def _new_figure(mpl: Any) -> Any:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=FIGSIZE, facecolor="white")
    FigureCanvasAgg(fig)
    return fig


def _fit_title(fig: Any, ax: Any, name: str, tail: str) -> Any:
    """Set ``name + tail`` as the axes' left title, shortening ``name`` (with an ellipsis)
    until the title fits inside the figure; the tail (what the picture is) is always kept."""
    renderer = fig.canvas.get_renderer()
    room = fig.bbox.width - 4.0
    text = ax.set_title(name + tail, color=_INK, loc="left")
    keep = len(name)
    while keep > 4 and text.get_window_extent(renderer).x1 > room:
        keep -= 2
        text.set_text(name[:keep].rstrip() + "…" + tail)
    return text


# -- encoders --------------------------------------------------------------------------------

def _png_bytes(fig: Any, dpi: int) -> bytes:
    """The figure as a palette PNG: a fifth of the RGBA size, the same bytes every run."""
    from PIL import Image  # a matplotlib dependency

    fig.set_dpi(dpi)
    fig.canvas.draw()
    w, h = fig.canvas.get_width_height()
    img = Image.frombuffer("RGBA", (w, h), bytes(fig.canvas.buffer_rgba()), "raw", "RGBA", 0, 1)
    img = img.convert("RGB").quantize(colors=PNG_COLORS, method=0, dither=Image.Dither.NONE)  # median cut
    out = io.BytesIO()
    img.save(out, format="PNG", optimize=True)
    return out.getvalue()


def _svg_text(fig: Any) -> str:
    out = io.StringIO()
    fig.savefig(out, format="svg", metadata={"Date": None, "Creator": None, "Format": None,
                                             "Type": None})
    return out.getvalue()
