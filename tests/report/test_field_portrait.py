"""Phase portraits of nonlinear models are drawn from the vector field itself over the
equilibria search box, with every equilibrium found marked by its type (not from the
linearisation around 0)."""

import math
import textwrap

import numpy as np
import pytest

from eigengate.rules.pictures import field_grid_of
from eigengate.scan.config import Config
from eigengate.scan.engine import check_paths

# An invented swinging boom, angle'' = -2 sin(angle) - 0.8 angle' (damped pendulum: a stable
# focus hanging down, a saddle upside down; any mechanics text, from memory).
FIELD = """\
import numpy as np


def field(x, u, damping=0.8, g_over_l=2.0):
    return np.array([x[1], -g_over_l * np.sin(x[0]) - damping * x[1] + u[0]])
"""
MODEL = """\
model_format: 1
name: boom
vector_field:
  function: dyn.boom:field
  states: [angle, rate]
  inputs: [torque]
  at:
    - {label: hanging, x: [0.0, 0.0], u: [0.0]}
    - label: inverted
      x: [3.141592653589793, 0.0]
      u: [0.0]
      requirements: {stable: false, equilibrium: saddle}
  equilibria:
    box: {angle: [-1.0, 4.0], rate: [-1.5, 1.5]}
    starts: 24
requirements:
  equilibrium: stable-focus
  equilibrium_count: 2
"""


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    root = tmp_path_factory.mktemp("boom")
    (root / ".git").mkdir()
    (root / "dyn").mkdir()
    (root / "dyn" / "__init__.py").write_text("")
    (root / "dyn" / "boom.py").write_text(FIELD)
    (root / "models").mkdir()
    (root / "models" / "boom.yaml").write_text(textwrap.dedent(MODEL))
    (fr,) = check_paths([root / "models"], config=Config(root=root, allow_python=True))
    assert fr.error is None, fr.error
    return {r.model.label: r for r in fr.results}


def test_the_grid_is_the_field_itself_over_the_box(results):
    grid = field_grid_of(results["inverted"])
    assert grid.box == (-1.0, 4.0, -1.5, 1.5) and grid.whence == "search box"
    xs, ys = np.array(grid.xs), np.array(grid.ys)
    assert xs[0] == -1.0 and xs[-1] == 4.0 and ys[0] == -1.5 and ys[-1] == 1.5
    gx, gy = np.meshgrid(xs, ys)
    # the field evaluated independently here (not a linearisation: sin, not its tangent)
    assert np.array(grid.dx) == pytest.approx(gy, abs=1e-15)
    assert np.array(grid.dy) == pytest.approx(-2.0 * np.sin(gx) - 0.8 * gy, abs=1e-14)
    assert grid.failed == 0


def test_equilibria_and_types_are_the_searchs(results):
    grid = field_grid_of(results["hanging"])
    kinds = dict(zip(grid.types, grid.equilibria))
    # damped pendulum: s² + 0.8 s + 2 at the bottom (ζ = 0.28, a focus); s² + 0.8 s − 2 at
    # the top (real roots of both signs, a saddle)
    assert sorted(kinds) == ["saddle", "stable-focus"]
    assert kinds["stable-focus"] == pytest.approx((0.0, 0.0), abs=1e-9)
    assert kinds["saddle"] == pytest.approx((math.pi, 0.0), abs=1e-9)
    assert field_grid_of(results["inverted"]).point == pytest.approx((math.pi, 0.0))


def test_portrait_marks_each_type_with_its_own_mark(results, mpl):
    from eigengate.reports.figures import _style
    from eigengate.reports.portrait import EQUILIBRIUM_MARKS, field_portrait_figure

    grid = field_grid_of(results["inverted"])
    with _style() as m:
        fig = field_portrait_figure(grid, title="boom[inverted]", mpl=m)
    ax = fig.axes[0]
    marks = {a.get_gid(): a for a in ax.lines if a.get_gid()}
    saddle = marks["eg-equilibrium-saddle"]
    assert (saddle.get_xdata()[0], saddle.get_ydata()[0]) == pytest.approx((math.pi, 0.0))
    assert saddle.get_marker() == EQUILIBRIUM_MARKS["saddle"][0]
    assert marks["eg-equilibrium-stable-focus"].get_marker() != saddle.get_marker()
    assert ax.get_xlim() == (-1.0, 4.0)  # the box, not a box around 0
    words = {t.get_text() for t in fig.legends[0].get_texts()}
    assert {"saddle", "stable focus", "operating point (linearised here)"} <= words
    assert "vector field" in ax.get_title(loc="left")


def test_report_draws_the_field_portrait_not_the_linear_one(results, mpl):
    from eigengate.reports.pictures import pictures_for

    (pic,) = [p for p in pictures_for(results["inverted"]) if p.kind == "field"]
    assert "saddle at (3.14, 0)" in pic.alt and "stable focus at (0, 0)" in pic.alt


def test_a_long_title_is_shortened_to_fit(results, mpl):
    from eigengate.reports.figures import _style
    from eigengate.reports.portrait import field_portrait_figure

    long = "irrigation-boom-of-the-north-wing-greenhouse[inverted, winter, night shift]"
    with _style() as m:
        fig = field_portrait_figure(field_grid_of(results["inverted"]), title=long, mpl=m)
        fig.canvas.draw()
        title = fig.axes[0]._left_title
        extent = title.get_window_extent(fig.canvas.get_renderer())
        width = fig.bbox.width
    assert "…" in title.get_text() and title.get_text().endswith("vector field, search box")
    assert 0 <= extent.x0 and extent.x1 <= width
