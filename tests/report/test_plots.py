"""Pole maps and phase portraits: one marker per eigenvalue, the unit circle for discrete
models, the allowed region, baseline arrows, PNG sizes, byte-identical output, and a clear
error without matplotlib."""

import math
import struct
import subprocess
import sys
import xml.etree.ElementTree as ET

import pytest

from eigengate.reports import plots

SVG = "{http://www.w3.org/2000/svg}"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def png_size(data: bytes) -> tuple[int, int]:
    assert data[:8] == PNG_SIGNATURE
    assert data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


def group(svg: str, gid: str):
    root = ET.fromstring(svg)
    found = [el for el in root.iter() if el.get("id") == gid]
    return found[0] if found else None


def markers(svg: str, gid: str) -> int:
    """Marker shapes drawn by the scatter collection with this id (matplotlib writes a shared
    marker as <use> elements, or one <path> each when the styles differ)."""
    g = group(svg, gid)
    if g is None:
        return 0
    defs = {id(el) for d in g.iter(f"{SVG}defs") for el in d.iter()}
    return sum(1 for el in g.iter() if el.tag in (f"{SVG}use", f"{SVG}path")
               and id(el) not in defs)


@pytest.mark.parametrize("name, count", [("osc", 2), ("sampled", 2), ("three", 3),
                                         ("saddle", 2), ("fine", 3)])
def test_one_marker_per_eigenvalue(mpl, by_name, name, count):
    r = by_name[name]
    assert r.spectrum.n_eigenvalues == count
    assert markers(plots.pole_map_svg(r), plots.POLE_GID) == count


def test_multiplicity_is_labelled(mpl, by_name):
    svg = plots.pole_map_svg(by_name["three"])  # -1 is a defective double eigenvalue
    assert "×2" in svg
    assert "×" not in plots.pole_map_svg(by_name["osc"])


def test_unit_circle_only_for_discrete_models(mpl, by_name):
    svg = plots.pole_map_svg(by_name["sampled"])
    assert group(svg, plots.UNIT_CIRCLE_GID) is not None
    assert "z-plane" in svg and "Re z" in svg
    cont = plots.pole_map_svg(by_name["osc"])
    assert group(cont, plots.UNIT_CIRCLE_GID) is None
    assert "s-plane" in cont


def test_allowed_region_is_shaded_when_required(mpl, by_name):
    assert group(plots.pole_map_svg(by_name["osc"]), plots.REGION_GID) is not None
    assert group(plots.pole_map_svg(by_name["sampled"]), plots.REGION_GID) is not None


def test_allowed_region_from_requirements(by_name):
    assert plots.allowed_region(by_name["osc"].model) == plots.AllowedRegion(0.0, 0.3, None)
    assert plots.allowed_region(by_name["three"].model) == plots.AllowedRegion(0.2, 0.5, 3.0)
    assert plots.allowed_region(by_name["saddle"].model) is None  # no_saddle shapes nothing


def inside(poly, x, y):
    """Point in a convex polygon (either orientation)."""
    signs = set()
    for (x0, y0), (x1, y1) in zip(poly, poly[1:] + poly[:1]):
        c = (x1 - x0) * (y - y0) - (y1 - y0) * (x - x0)
        if abs(c) > 1e-12:
            signs.add(c > 0)
    return len(signs) <= 1


@pytest.mark.parametrize("s, expected", [
    (complex(-1, 0.5), True),     # decays fast enough, ζ ≈ 0.89, ωn ≈ 1.1
    (complex(-0.1, 0.0), False),  # too slow (Re s > -0.2)
    (complex(-1, 2.5), False),    # ζ ≈ 0.37 < 0.5
    (complex(-2.9, 1.0), False),  # ωn ≈ 3.07 > 3
    (complex(-1, -1.5), True),    # lower half: ζ ≈ 0.55
])
def test_region_pieces_hold_exactly_the_allowed_poles(s, expected):
    from eigengate.rules.requirements import region_distance

    region = plots.AllowedRegion(alpha=0.2, zeta=0.5, omega=3.0)
    pieces = plots.region_pieces(region, (-10, 10, -10, 10))
    got = any(inside(p, s.real, s.imag) for p in pieces)
    assert got is expected
    assert (region_distance(s, 0.2, 0.5, 3.0) > 0) is expected  # the engine agrees


def test_negative_damping_bound_allows_part_of_the_right_half_plane():
    pieces = plots.region_pieces(plots.AllowedRegion(zeta=-0.5), (-5, 5, -5, 5))
    assert any(inside(p, 0.5, 2.0) for p in pieces)       # ζ ≈ -0.24 ≥ -0.5
    assert not any(inside(p, 2.0, 0.5) for p in pieces)   # ζ ≈ -0.97


def test_z_plane_boundaries_follow_z_equals_exp_sT():
    T, alpha = 0.1, 0.5
    (circle,) = plots._boundary_curves(plots.AllowedRegion(alpha=alpha),
                                       (-10, 1, -math.pi / T, math.pi / T), T)
    radii = [math.hypot(x, y) for x, y in circle]
    assert max(radii) == pytest.approx(math.exp(-alpha * T))
    assert min(radii) == pytest.approx(math.exp(-alpha * T))
    assert len(circle) > 20  # subdivided into an arc, not a chord


def test_baseline_poles_and_arrows(mpl, by_name):
    r = by_name["osc"]  # poles at -0.2 ± 1.99j
    svg = plots.pole_map_svg(r, baseline_poles=[complex(-0.4, 1.6)])  # the conjugate is added
    assert markers(svg, plots.BASELINE_GID) == 2
    root = ET.fromstring(svg)
    arrows = [el for el in root.iter() if (el.get("id") or "").startswith(plots.ARROW_GID)]
    assert len(arrows) == 2
    same = plots.pole_map_svg(r, baseline_poles=r.spectrum.eigenvalues())
    assert not [el for el in ET.fromstring(same).iter()
                if (el.get("id") or "").startswith(plots.ARROW_GID)]


def test_nearest_pairs_is_one_to_one():
    cur = [complex(-1, 1), complex(-1, -1), complex(-5, 0)]
    base = [complex(-1.1, -1), complex(-4, 0), complex(-1.1, 1)]
    assert plots.nearest_pairs(cur, base) == [(0, 2), (1, 0), (2, 1)]
    assert plots.nearest_pairs(cur, base[:1]) == [(1, 0)]


@pytest.mark.parametrize("dpi", [72, 90, 100])
def test_png_size_and_signature(mpl, by_name, dpi):
    data = plots.pole_map_png(by_name["sampled"], dpi=dpi)
    assert png_size(data) == (round(4.5 * dpi), round(3.6 * dpi))
    assert len(data) < 60_000


def test_output_is_deterministic_whatever_the_users_style(mpl, by_name):
    r = by_name["three"]
    png, svg = plots.pole_map_png(r), plots.pole_map_svg(r)
    pp = plots.phase_portrait_png(by_name["osc"])
    with mpl.rc_context({"lines.linewidth": 4, "font.size": 20, "axes.facecolor": "black",
                         "svg.hashsalt": None}):
        assert plots.pole_map_png(r) == png
        assert plots.pole_map_svg(r) == svg
        assert plots.phase_portrait_png(by_name["osc"]) == pp
    assert "Date" not in svg and "Matplotlib" not in svg
    assert b"Software" not in png and b"tEXt" not in png
    assert mpl.rcParams["svg.hashsalt"] is None  # the user's style is left as it was


def test_phase_portrait_draws_eigenvector_lines(mpl, by_name):
    r = by_name["saddle"]  # eigenvalues 1 (unstable, along tilt) and -2 (stable)
    with plots._style() as m:
        fig = plots.phase_portrait_figure(r, mpl=m)
        ax = fig.axes[0]
        legend = [t.get_text() for t in fig.legends[0].get_texts()]
        assert legend == ["λ = 1 (unstable direction)", "λ = -2 (stable direction)"]
        # The two eigenvector lines through the origin: (1, 0) and (0.5, -3)/|·|.
        slopes = set()
        for line in ax.lines:
            x, y = line.get_data()
            if len(x) == 2 and x[0] == -x[1] and x[0] != 0:
                slopes.add(round(float(y[1] / x[1]), 6))
        assert slopes == {0.0, -6.0}
        assert ax.get_xlabel() == "tilt" and ax.get_ylabel() == "drift"
    assert png_size(plots.phase_portrait_png(r, dpi=80)) == (360, 288)


def test_phase_portrait_of_a_discrete_model_draws_orbits(mpl, by_name):
    data = plots.phase_portrait_png(by_name["sampled"])
    assert png_size(data) == (450, 360)


def test_phase_portrait_needs_two_states(mpl, by_name):
    with pytest.raises(ValueError, match="two-state model.*3 states"):
        plots.phase_portrait_png(by_name["three"])


def test_missing_matplotlib_is_a_clear_error(monkeypatch, by_name):
    monkeypatch.setitem(sys.modules, "matplotlib", None)  # import matplotlib → ImportError
    from eigengate.errors import EigengateError

    for call in (lambda: plots.pole_map_png(by_name["osc"]),
                 lambda: plots.pole_map_svg(by_name["osc"]),
                 lambda: plots.phase_portrait_png(by_name["osc"])):
        with pytest.raises(plots.ReportDependencyError) as info:
            call()
        assert isinstance(info.value, EigengateError)
        assert 'pip install "eigengate[report]"' in str(info.value)


def test_the_rest_of_the_tool_never_imports_matplotlib(repo_root):
    root = repo_root
    code = (
        "import sys\n"
        "from eigengate.scan.engine import check_paths\n"
        "from eigengate.reports.text import render_results\n"
        "import eigengate.reports.html, eigengate.reports.plots, eigengate.cli\n"
        f"res = check_paths([{str(root / 'models')!r}], root={str(root)!r})\n"
        "render_results(res)\n"
        "print('matplotlib' in sys.modules)\n"
        "sys.modules['matplotlib'] = None\n"
        "try:\n"
        "    eigengate.reports.html.render_html(res, tool_version='0')\n"
        "except eigengate.reports.plots.ReportDependencyError as exc:\n"
        "    print(exc)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         timeout=120)
    assert out.returncode == 0, out.stderr
    first, second = out.stdout.strip().splitlines()
    assert first == "False"
    assert second == ('the HTML report needs matplotlib, which is not installed; install it '
                      'with pip install "eigengate[report]"')
