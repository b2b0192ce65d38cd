"""Reports summarise a grid: a table of every point's worst figure, worst point first, built
by rules.grid_summary and laid out by every writer; a grid with one failing point shows that
point clearly in each format."""

import json
import re
import xml.etree.ElementTree as ET

import jsonschema
import numpy as np
import pytest
from gridcase import LOADS, SPEEDS, expected_damping, stacked_repo

from eigengate import (check_file, render_json, render_junit, render_markdown, render_results,
                       render_sarif)
from eigengate.rules.grid_summary import summarise_grid

# ζ at speed=4, load=0 is 1 / (2 √6) = 0.204 (second-order standard form): with
# min_damping 0.21 it is the one point that fails.
ONE_FAILS = "min_damping: 0.21"


@pytest.fixture
def result(tmp_path):
    return check_file(stacked_repo(tmp_path, requirements=ONE_FAILS), root=tmp_path)


def test_the_summary_lists_every_point_worst_first(result):
    grid = summarise_grid(result)
    assert grid is not None and len(grid.points) == len(SPEEDS) * len(LOADS)
    assert grid.points[0].ident == "speed=4,load=0" and grid.points[0].status == "fail"
    assert [p.status for p in grid.points].count("fail") == 1
    # passing points by their smallest margin, ascending: ζ − 0.21 from the standard form
    margins = [p.margin for p in grid.points[1:]]
    assert margins == sorted(margins)
    for p in grid.points:
        c = dict(p.coords)
        assert p.margin == pytest.approx(expected_damping(c["speed"], c["load"]) - 0.21,
                                         abs=1e-9)
        assert p.margin_of == "min_damping: 0.21"
    assert grid.axes == (("speed", SPEEDS), ("load", LOADS))


def test_a_file_that_is_no_grid_has_no_summary(tmp_path):
    from support import oscillator

    (tmp_path / ".git").mkdir()
    (tmp_path / "osc.yaml").write_text(oscillator(), encoding="utf-8")
    assert check_file(tmp_path / "osc.yaml", root=tmp_path).grid is None


def test_text_and_markdown_show_the_failing_point_in_a_short_table(result):
    text = render_results([result], verbose=True)
    assert re.search(r"speed=4,load=0 +FAILED", text)
    assert "grid speed (4) × load (3): 12 points, 1 failing, 11 passing" in text
    assert "… and 8 more points (all passing); the JSON report lists every point" in text
    assert text.count("hoist[") == 1  # one block: the failing point's
    md = render_markdown([result])
    assert "| speed=4,load=0 | FAILED |" in md
    assert md.count("## Operating-point grids (1)") == 1  # the grid's own table, once


def test_json_lists_every_point_and_validates(result):
    from importlib.resources import files

    doc = json.loads(render_json([result], tool_version="t"))
    schema = json.loads(files("eigengate").joinpath("schema/report-v1.schema.json")
                        .read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(schema).validate(doc)
    grid = doc["files"][0]["grid"]
    assert len(grid["points"]) == 12 and grid["points"][0]["id"] == "speed=4,load=0"
    assert grid["points"][0]["status"] == "failed" and grid["points"][0]["margin"] < 0
    assert doc["files"][0]["models"][0]["grid"] == {"speed": 1.0, "load": 0.0}


def test_sarif_and_junit_name_the_failing_point(result):
    log = json.loads(render_sarif([result], tool_version="t"))
    run = log["runs"][0]
    assert run["properties"]["grids"][0]["failing"] == ["speed=4,load=0"]
    assert [r["properties"]["gridPoint"] for r in run["results"]] == [
        {"speed": 4.0, "load": 0.0}]
    suite = ET.fromstring(render_junit([result]).split("\n", 1)[1])[0]
    names = [c.get("name") for c in suite.iter("testcase")]
    assert names == ["hoist[speed=4,load=0]", "hoist[grid: 11 passing points]"]
    assert suite.get("failures") == "1"


def test_a_thousand_point_grid_gives_short_reports(tmp_path):
    # ζ = (load + 1) / (2 √(1.5 speed)) falls with speed: most of these points fail
    speeds = tuple(float(s) for s in range(1, 101))
    path = stacked_repo(tmp_path, speeds=speeds, loads=tuple(0.1 * j for j in range(10)))
    result = check_file(path, root=tmp_path)
    assert len(result.results) == 1000
    bad = sum(1 for r in result.results if not r.passed)
    assert bad > 500
    text = render_results([result], verbose=True)
    assert len(text.splitlines()) < 40 + 10 * 12  # the table, then 10 blocks of findings
    assert text.count("hoist[") == 10
    assert f"… and {1000 - 23} more points ({bad - 20} of them with findings)" in text
    assert f"{bad - 10} more points with findings are rows of the JSON report" in text
    suite = ET.fromstring(render_junit([result]).split("\n", 1)[1])[0]
    assert len(list(suite.iter("testcase"))) == 11
    assert suite.get("failures") == "11"
    md = render_markdown([result])
    assert md.count("### ") == 11


def test_the_heat_map_draws_each_points_margin_and_marks_the_failing_one(result):
    pytest.importorskip("matplotlib")
    from eigengate.reports.figures import _style
    from eigengate.reports.grid_plots import FAIL_MARK_GID, HEATMAP_GID, heatmap_figure

    grid = summarise_grid(result)
    with _style() as mpl:
        fig = heatmap_figure(grid, mpl=mpl)
    ax = fig.axes[0]
    image = [im for im in ax.images if im.get_gid() == HEATMAP_GID][0]
    data = np.asarray(image.get_array())
    for p in grid.points:  # the figure's data, not its pixels
        assert data[p.position] == p.margin
    marks = [a for a in ax.patches if a.get_gid() == FAIL_MARK_GID]
    assert len(marks) == 1 and marks[0].get_xy() == (0 - 0.5, 3 - 0.5)  # load 0, speed 4
    assert [t.get_text() for t in ax.get_yticklabels()] == ["1", "2", "3", "4"]


def test_the_html_report_has_the_grid_section_and_only_the_failing_points_block(result):
    pytest.importorskip("matplotlib")
    from eigengate import render_html

    html = render_html([result], tool_version="t")
    assert '<h2 id="eg-grids">Operating-point grids</h2>' in html
    assert html.count('<details class="eg-model') == 1
    assert 'alt="Heat map of the smallest requirement margin' in html
    assert "1 failing: speed=4,load=0." in html
    table = html.split('<table class="eg-index eg-grid">', 1)[1].split("</table>", 1)[0]
    first = re.search(r"<tr class=\"eg-(\w+)\"><td>(.*?)</td>", table)
    assert first.group(1) == "fail" and 'href="#m-' in first.group(2)


def _three_axes(root):
    # A at (speed, load, temp): s² + (load + 0.01 temp) s + speed, ζ = (load + 0.01 temp) /
    # (2 √speed) (second-order standard form); the worst point is speed=2, load=0, temp=10
    (root / ".git").mkdir(parents=True)
    a = np.zeros((2, 2, 3, 2, 2))
    for i, s in enumerate((1.0, 2.0)):
        for j, l in enumerate((0.0, 1.0)):
            for k, t in enumerate((10.0, 20.0, 30.0)):
                a[i, j, k] = [[0.0, 1.0], [-s, -(l + 0.01 * t)]]
    np.savez(root / "a.npz", A=a)
    (root / "m.yaml").write_text("""\
model_format: 1
name: fan
plant: {states: [x, v]}
requirements: {min_damping: 0.09}
waivers:
  - {rule: EG103, label: "speed=2,load=0,temp=10", reason: accepted at the design review}
grid:
  axes: {speed: [1, 2], load: [0, 1], temp: [10, 20, 30]}
  matrices: {plant.A: {file: a.npz, key: A}}
""", encoding="utf-8")
    return check_file(root / "m.yaml", root=root)


def test_a_three_axis_grid_gets_a_map_per_value_of_its_third_axis_worst_first(tmp_path):
    pytest.importorskip("matplotlib")
    from eigengate.reports.figures import _style
    from eigengate.reports.grid_plots import HEATMAP_GID, grid_slices, heatmap_figure

    result = _three_axes(tmp_path)
    grid = result.grid
    slices = grid_slices(grid)
    # ζ per slice: temp 10 holds the worst point (ζ = 0.1 / (2 √2) = 0.035)
    assert [fixed for fixed, _ in slices] == [(("temp", 10.0),), (("temp", 20.0),),
                                               (("temp", 30.0),)]
    with _style() as mpl:
        fig = heatmap_figure(grid, slices[0][0], mpl=mpl)
    data = np.asarray([im for im in fig.axes[0].images if im.get_gid() == HEATMAP_GID][0]
                      .get_array())
    assert data.shape == (2, 2)
    assert data[1, 0] == pytest.approx(0.1 / (2 * np.sqrt(2)) - 0.09, abs=1e-9)


def test_a_waiver_names_a_grid_point_by_its_identity(tmp_path):
    result = _three_axes(tmp_path)
    waived = [r.model.point_id for r in result.results if r.waived]
    failing = sorted(r.model.point_id for r in result.results if not r.passed)
    # ζ < 0.09 at speed=1, load=0, temp=10 (0.05) and at speed=2, load=0 for temp 10
    # (0.035) and 20 (0.071); 0.1 and more elsewhere (second-order standard form); the
    # waiver accepts the one it names
    assert waived == ["speed=2,load=0,temp=10"]
    assert failing == ["speed=1,load=0,temp=10", "speed=2,load=0,temp=20"]
