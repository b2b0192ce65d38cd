"""Bode and Nyquist pictures of loops: the plot data (analysis.loop_curves) and the marks drawn
from it (reports.loop_plots) quote the margins the verdicts judged, which agree with
python-control; the disk is the set a balanced disk margin excludes. The tests read the
plot-data records, the matplotlib artists and the SVG's ids and values, never pixels."""

import math
import re

import numpy as np
import pytest

from eigengate.analysis.loop_curves import exclusion_disk
from eigengate.analysis.margins import disk_gain_range
from eigengate.load.loader import load_document
from eigengate.rules.pictures import loop_curves_of
from eigengate.scan.engine import check_model

# Invented loops: a greenhouse shade motor 1/(s(s+1)(s+2)) under unit feedback (the
# classic K/(s(s+1)(s+2)) shape), and a two-channel vent actuator with coupling.
SHADE = {
    "model_format": 1, "name": "shade-motor",
    "plant": {"num": [1.0], "den": [1.0, 3.0, 2.0, 0.0], "inputs": ["motor_voltage"],
              "outputs": ["shade_position"]},
    "feedback": {"output_gain": [[1.0]]},
    "requirements": {"min_gain_margin_db": 6, "min_phase_margin_deg": 60,
                     "min_disk_margin": 0.5},
}
VENTS = {
    "model_format": 1, "name": "vent-pair",
    "plant": {"A": [[-1.0, 0.2], [0.1, -2.0]], "B": [[1.0, 0.0], [0.0, 1.0]],
              "C": [[1.0, 0.0], [0.0, 1.0]], "inputs": ["left", "right"],
              "outputs": ["left_angle", "right_angle"]},
    "feedback": {"controller": {"A": [[0.0, 0.0], [0.0, 0.0]], "B": [[1.0, 0.0], [0.0, 1.0]],
                                "C": [[2.0, 0.0], [0.0, 3.0]], "D": [[1.0, 0.0], [0.0, 1.5]]}},
    "requirements": {"min_phase_margin_deg": 30},
}


def result_of(doc):
    (model,) = load_document(doc)
    return check_model(model)


@pytest.fixture(scope="module")
def shade():
    return result_of(SHADE)


def test_plot_data_quotes_the_margins_python_control_finds(shade):
    control = pytest.importorskip("control")
    (curve,) = loop_curves_of(shade)
    L = control.tf([1.0], [1.0, 3.0, 2.0, 0.0])
    gm, pm, wpc, wgc = control.margin(L)  # reference library: python-control
    assert curve.gain_margin_db == pytest.approx(20 * math.log10(gm), rel=1e-9)
    assert curve.phase_margin_deg == pytest.approx(pm, rel=1e-9)
    assert curve.gain_margin_frequency == pytest.approx(wpc, rel=1e-9)
    assert curve.phase_margin_frequency == pytest.approx(wgc, rel=1e-9)
    # the verdicts judged the same numbers the picture marks
    v = {x.rule: x for x in shade.verdicts}
    assert v["EG301"].measured == pytest.approx(curve.gain_margin_db, rel=1e-12)
    assert v["EG302"].measured == pytest.approx(curve.phase_margin_deg, rel=1e-12)
    # python-control's balanced disk margin (skew 0) on a dense sweep: a grid minimum,
    # so ours (located by a bounded search) is at most a hair larger
    w = np.logspace(-3, 3, 20001)
    dm, dgm, dpm = control.disk_margins(L, w, skew=0.0)
    assert curve.disk_margin == pytest.approx(float(dm), rel=1e-6)
    # the disk's real-axis diameter is the gain range the disk margin guarantees
    lo, hi = disk_gain_range(curve.disk_margin)
    assert 20 * math.log10(hi) == pytest.approx(float(dgm), rel=1e-6)
    assert curve.disk_center - curve.disk_radius == pytest.approx(-hi, rel=1e-12)
    assert curve.disk_center + curve.disk_radius == pytest.approx(-lo, rel=1e-12)


def test_the_curve_touches_the_disk_and_stays_outside_it(shade):
    (curve,) = loop_curves_of(shade)
    assert curve.disk_kind == "disk"
    z = complex(*curve.disk_touch)
    c, r = curve.disk_center, curve.disk_radius
    assert abs(z - c) == pytest.approx(r, rel=1e-9)  # Seiler et al. 2020: touches at ω*
    # and |S − T| = 2/α there (the Apollonius circle |1 − L|/|1 + L| = 2/α)
    assert abs((1 - z) / (1 + z)) == pytest.approx(2 / curve.disk_margin, rel=1e-9)
    pts = np.array(curve.real) + 1j * np.array(curve.imag)
    assert np.min(np.abs(pts - c)) >= r * (1 - 1e-6)  # no sampled point inside


@pytest.mark.parametrize("alpha, kind", [(0.5, "disk"), (2.0, "half-plane"), (3.0, "outside")])
def test_exclusion_set_of_a_disk_margin(alpha, kind):
    # boundary: |1 − L| / |1 + L| = 2/α (Seiler, Packard & Gahinet 2020, σ = 0)
    got, c, r = exclusion_disk(alpha)
    assert got == kind
    if kind == "half-plane":
        return
    for t in np.linspace(0, 2 * np.pi, 7):
        z = c + r * np.exp(1j * t)
        assert abs((1 - z) / (1 + z)) == pytest.approx(2 / alpha, rel=1e-9)


def test_bode_and_nyquist_artists_mark_the_computed_margins(shade, mpl):
    from eigengate.reports.figures import _style
    from eigengate.reports.loop_plots import GIDS, bode_figure, nyquist_figure

    (curve,) = loop_curves_of(shade)
    failed = {v.rule for v in shade.verdicts if not v.passed}
    assert failed == {"EG302"}  # 53.4° < 60°
    with _style() as m:
        bode = bode_figure(curve, title="shade-motor", failed=failed, mpl=m)
        nyq = nyquist_figure(curve, title="shade-motor", failed=failed, mpl=m)
    by_gid = {a.get_gid(): a for ax in bode.axes for a in ax.lines if a.get_gid()}
    gm_bar, pm_bar = by_gid[GIDS["gain_margin"]], by_gid[GIDS["phase_margin"]]
    assert np.ptp(gm_bar.get_ydata()) == pytest.approx(curve.gain_margin_db, rel=1e-12)
    assert gm_bar.get_xdata()[0] == curve.gain_margin_frequency
    assert np.ptp(pm_bar.get_ydata()) == pytest.approx(curve.phase_margin_deg, rel=1e-12)
    assert min(pm_bar.get_ydata()) == pytest.approx(-180.0, abs=1e-9)  # from the −180° line
    # a failing margin is drawn thicker, not only in another colour
    assert pm_bar.get_linewidth() > gm_bar.get_linewidth()
    legend = [t.get_text() for t in bode.legends[0].get_texts()]
    assert any("phase margin" in t and "fails" in t for t in legend)
    assert by_gid[GIDS["gain_crossover"]].get_xdata()[0] == curve.phase_margin_frequency
    ax = nyq.axes[0]
    (disk,) = [p for p in ax.patches if p.get_gid() == GIDS["disk"]]
    assert disk.center == (curve.disk_center, 0.0) and disk.radius == curve.disk_radius
    (crit,) = [a for a in ax.lines if a.get_gid() == GIDS["critical"]]
    assert (crit.get_xdata()[0], crit.get_ydata()[0]) == (-1.0, 0.0)


def test_svg_files_carry_the_margins_as_data(shade, mpl, tmp_path):
    from eigengate.reports.pictures import picture_files
    from eigengate.rules.results import FileResult

    files = dict(picture_files([FileResult("loop.yaml", results=(shade,))], "svg"))
    assert sorted(n.rsplit("--", 1)[1] for n in files) == ["bode.svg", "nyquist.svg"]
    (curve,) = loop_curves_of(shade)
    for name, data in files.items():
        svg = data.decode()
        # each mark: <g id="eg-..."> holding a link #eg-value=<the number it marks>
        values = {gid: float(v) for gid, v in re.findall(
            r'<g id="(eg-[^"]+)">(?:(?!<g id=").)*?"#eg-value=([^"]+)"', svg, re.S)}
        if name.endswith("bode.svg"):
            assert values["eg-gain-margin"] == curve.gain_margin_db
            assert values["eg-phase-margin"] == curve.phase_margin_deg
        else:
            assert values["eg-disk-margin-disk"] == curve.disk_margin
            assert values["eg-critical-point"] == -1.0


def test_every_channel_of_a_mimo_loop_gets_its_pictures(mpl):
    from eigengate.reports.pictures import pictures_for

    r = result_of(VENTS)
    curves = loop_curves_of(r)
    margins = r.model.loop_parts.margins()
    assert [c.channel for c in curves] == [c.channel for c in margins.channels] == \
        ["left", "right"]
    for c, cm in zip(curves, margins.channels):
        assert c.phase_margin_deg == cm.phase_margin
    kinds = [p.suffix for p in pictures_for(r)]
    assert kinds == ["bode-left", "nyquist-left", "bode-right", "nyquist-right"]


def test_no_curves_for_an_unstable_loop_or_a_model_without_margin_requirements():
    unstable = dict(SHADE, feedback={"output_gain": [[8.0]]})  # Routh: unstable for K > 6
    assert loop_curves_of(result_of(unstable)) == ()
    plain = dict(SHADE, requirements={"stable": True})
    assert loop_curves_of(result_of(plain)) == ()


def test_pictures_survive_the_result_cache(shade):
    from eigengate.scan.serial import results_from_data, results_to_data

    data, blobs = results_to_data("loop.yaml", [shade], None)
    import json

    data = json.loads(json.dumps(data))  # what the cache stores
    _, (back,), _ = results_from_data(data, blobs)
    from eigengate.scan.records import record

    # the same numbers (NaN where a margin does not exist, so compared as JSON text)
    assert [type(p) for p in back.pictures] == [type(p) for p in shade.pictures]
    assert json.dumps([record(p) for p in back.pictures]) == \
        json.dumps([record(p) for p in shade.pictures])


@pytest.mark.parametrize("kind", ["bode", "nyquist"])
def test_titles_fit_the_figure_even_for_long_model_names(shade, mpl, kind):
    from eigengate.reports.figures import _style
    from eigengate.reports.loop_plots import bode_figure, nyquist_figure

    (curve,) = loop_curves_of(shade)
    draw = bode_figure if kind == "bode" else nyquist_figure
    long = "greenhouse-north-wing-shade-motor-position-loop[winter, high wind, night]"
    with _style() as m:
        fig = draw(curve, title=long, channels=2, mpl=m)
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        (title,) = [ax.title if False else ax._left_title for ax in fig.axes
                    if ax._left_title.get_text()]
        extent = title.get_window_extent(renderer)
        width = fig.bbox.width
    text = title.get_text()
    assert "…" in text and text.endswith(curve.channel), text  # shortened, channel kept
    assert extent.x0 >= 0 and extent.x1 <= width, (text, extent, width)


@pytest.mark.parametrize("sample_period", [None, 0.1])
def test_batched_response_equals_the_margins_resolvent(shade, sample_period):
    # the curves' batched dense solve and the margins' Schur resolvent are two evaluations
    # of the same C (λE − A)⁻¹ B + D (backward-stable solves: agreement to rounding)
    from dataclasses import replace

    from eigengate.analysis.loop_curves import _response
    from eigengate.analysis.margins import Resolvent, loop_transfer

    lt = replace(loop_transfer(shade.model.loop_parts), sample_period=sample_period)
    w = np.geomspace(0.01, 30.0 if sample_period else 100.0, 57)
    ours = _response(lt, w)
    ref = Resolvent(lt)(w)[:, 0, 0]
    assert np.allclose(ours, ref, rtol=1e-11, atol=0)
