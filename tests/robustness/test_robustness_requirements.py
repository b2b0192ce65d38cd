"""The robustness requirements (EG110–EG112) as a user meets them: model-file keys, verdicts
with their brackets, uncertain verdicts, refusals, reports, baselines (EG211–EG213), the
cache and the command line.

References beside each check:

* normal matrices: the distance to instability is the distance of the spectrum to the
  imaginary axis, ‖e^{At}‖ is 1 at its peak (t = 0), and the ε-pseudospectrum is the union
  of ε-discs about the eigenvalues, so its abscissa is α(A) + ε (Trefethen & Embree, Spectra
  and Pseudospectra, 2005, ch. 2 and 14);
* A = [[−1, k], [0, −2]]: e^{At} = [[e^{−t}, k(e^{−t} − e^{−2t})], [0, e^{−2t}]] (closed form of
  the exponential of a triangular 2×2 matrix with distinct diagonal; common practice),
  checked against scipy.linalg.expm on a fine grid;
* python-control's H∞ norm (``control.norm(sys, "inf")``, its own Hamiltonian bisection) for the structured radius
  1/‖C(sI − A)⁻¹B‖∞ (Hinrichsen & Pritchard, Systems & Control Letters 1986).
"""

from __future__ import annotations

import json
import math
import textwrap
from pathlib import Path

import numpy as np
import pytest
import yaml
from scipy.linalg import expm
from support import run_cli

from eigengate.baseline.regressions import compare, parse_tolerances
from eigengate.baseline.store import baseline_entry_from
from eigengate.baseline.fileformat import dump_text, parse
from eigengate.errors import ModelError
from eigengate.load.loader import load_models
from eigengate.model.core import from_arrays
from eigengate.rules.catalogue import explain_rule, RULES
from eigengate.rules.parsing import parse_requirements
from eigengate.rules.robustness import MaxTransientGrowth, MinStabilityRadius
from eigengate.scan.engine import analyse_model


def _model(A, reqs, require=None, **kw):
    import dataclasses

    m = from_arrays(np.asarray(A, float), requirements=parse_requirements(reqs, "m.yaml"),
                    source="models/m.yaml", name="m", **kw)
    return dataclasses.replace(m, require=require)


def _verdicts(A, reqs, **kw):
    return {v.rule: v for v in analyse_model(_model(A, reqs, **kw)).verdicts}


def _peak(k: float) -> tuple[float, float]:
    """max ‖e^{At}‖₂ of [[−1, k], [0, −2]] and its time: scipy's expm on a fine grid, then a
    bounded Brent refinement (scipy.optimize)."""
    from scipy.optimize import minimize_scalar

    A = np.array([[-1.0, k], [0.0, -2.0]])
    ts = np.linspace(0, 4, 801)  # the peak lies near t = 0.66 (k = 10)
    g = [np.linalg.norm(expm(A * t), 2) for t in ts]
    i = int(np.argmax(g))
    r = minimize_scalar(lambda t: -np.linalg.norm(expm(A * t), 2),
                        bounds=(ts[max(i - 1, 0)], ts[min(i + 1, len(ts) - 1)]), method="bounded",
                        options={"xatol": 1e-12})
    return -r.fun, r.x


# ------------------------------------------------------------------ verdicts
def test_normal_matrix_figures_and_verdicts():
    # diag(−1, −3): radius 1, growth 1, ε-abscissa −1 + ε (normal matrices; T&E ch. 2)
    v = _verdicts([[-1.0, 0.0], [0.0, -3.0]],
                  {"min_stability_radius": 0.9, "max_transient_growth": 1.0,
                   "max_pseudospectral_abscissa": {"epsilon": 0.1, "max": -0.85}})
    r, g, a = v["EG110"], v["EG111"], v["EG112"]
    assert r.passed and g.passed and a.passed
    assert r.figure.lower <= 1.0 <= r.figure.upper and r.figure.value == pytest.approx(1, 1e-9)
    assert g.figure.value == pytest.approx(1.0, abs=1e-12) and g.figure.at[0] == 0.0
    assert a.figure.value == pytest.approx(-0.9, abs=1e-8)
    assert r.decided_by == g.decided_by == a.decided_by == "estimated"
    assert r.margin == pytest.approx(0.1, abs=1e-8)
    assert "stability radius 1" in r.message and "≥ 0.9" in r.message


def test_non_normal_growth_peak_and_time_against_expm():
    k = 10.0
    peak, t_peak = _peak(k)
    v = _verdicts([[-1.0, k], [0.0, -2.0]], {"max_transient_growth": 2.0})["EG111"]
    f = v.figure
    assert not v.passed and f.lower <= peak * (1 + 1e-9) and f.upper >= peak * (1 - 1e-9)
    assert f.value == pytest.approx(peak, rel=1e-6) and f.at[0] == pytest.approx(t_peak, rel=1e-3)
    assert f.at_label == "t (s)" and "at t = " in v.message and "violates ≤ 2" in v.message
    assert v.suggestion.startswith("passes with max_transient_growth ≥ ")
    # a curve for the report's plot: starts at (0, 1), its largest value is below the bracket
    assert f.curve[0] == (0.0, pytest.approx(1.0)) and max(y for _, y in f.curve) <= f.upper


def test_a_threshold_inside_the_bracket_is_uncertain_and_follows_on_uncertain():
    A = [[-1.0, 10.0], [0.0, -2.0]]
    f = _verdicts(A, {"max_transient_growth": 2.0})["EG111"].figure
    assert f.lower < f.upper  # the growth bracket has a width: put the threshold inside it
    mid = 0.5 * (f.lower + f.upper)
    failed = _verdicts(A, {"max_transient_growth": mid})["EG111"]
    assert failed.uncertain and not failed.passed and failed.decided_by == "uncertain"
    assert "lies within the bracket" in failed.message and "on_uncertain=fail" in failed.message
    passed = _verdicts(A, {"max_transient_growth": mid}, on_uncertain="pass")["EG111"]
    assert passed.uncertain and passed.passed
    # require: certified turns every robustness verdict into an uncertain one (they are
    # estimated by floating-point level-set tests, not enclosed)
    strict = _verdicts([[-1.0, 0.0], [0.0, -3.0]], {"min_stability_radius": 0.5},
                       require="certified")["EG110"]
    assert strict.decided_by == "uncertain" and not strict.passed


def test_unstable_and_marginal_models_fail_before_any_figure():
    v = _verdicts([[0.5, 0.0], [0.0, -1.0]],
                  {"min_stability_radius": 1e-6, "max_transient_growth": 1e9,
                   "max_pseudospectral_abscissa": {"epsilon": 1e-9, "max": 100.0}})
    assert not any(x.passed for x in v.values())
    assert v["EG110"].measured == 0.0 and math.isinf(v["EG111"].measured)
    assert "unstable (1 eigenvalue in the right half-plane)" in v["EG110"].message
    marginal = _verdicts([[0.0, 1.0], [-1.0, 0.0]], {"min_stability_radius": 1e-6})["EG110"]
    assert not marginal.passed and "not asymptotically stable" in marginal.message


def test_structured_radius_is_one_over_the_hinf_norm_of_python_control():
    import control

    A = np.array([[-0.2, 5.0, 0.0], [-5.0, -0.2, 1.0], [0.0, 0.0, -3.0]])
    B = [[0.0], [1.0], [0.0]]
    C = [[1.0, 0.0, 0.0]]
    gam = control.norm(control.ss(A, B, C, 0), "inf", tol=1e-10, method="scipy")
    v = _verdicts(A, {"min_stability_radius": {"min": 0.01, "structure": {"B": B, "C": C}}})
    f = v["EG110"].figure
    assert f.name == "structured_stability_radius" and v["EG110"].passed
    assert f.value == pytest.approx(1 / gam, rel=1e-6)
    assert "structure: {B: 3×1, C: 1×3}" in v["EG110"].requirement
    # the real radius is at least the complex one (Qiu et al., Automatica 1995)
    real = _verdicts(A, {"min_stability_radius": {"min": 0.01, "structure": {"B": B, "C": C},
                                                  "real": True}})["EG110"].figure
    assert real.name == "real_stability_radius" and real.value >= f.value * (1 - 1e-9)


def test_discrete_models_use_the_unit_circle():
    # diag(0.5, −0.8), T = 0.1: normal, so the radius is 1 − 0.8 = 0.2 and the
    # ε-pseudospectral radius is 0.8 + ε (T&E ch. 2)
    v = _verdicts([[0.5, 0.0], [0.0, -0.8]],
                  {"min_stability_radius": 0.1,
                   "max_pseudospectral_abscissa": {"epsilon": 0.05, "max": 0.9},
                   "max_transient_growth": 1.0}, sample_period=0.1)
    assert v["EG110"].figure.value == pytest.approx(0.2, rel=1e-8)
    assert v["EG112"].figure.value == pytest.approx(0.85, rel=1e-8)
    assert "pseudospectral radius" in v["EG112"].message and v["EG112"].unit == ""
    assert v["EG111"].figure.at_label == "k (steps)" and v["EG111"].passed


def test_descriptor_models_reduce_or_are_refused():
    # E x' = A x with E = diag(2, 1): the same poles as diag(−1, −3) scaled; a singular E has
    # infinite eigenvalues, which these methods do not cover: not evaluated, failing
    A = [[-2.0, 0.0], [0.0, -3.0]]
    ok = _verdicts(A, {"max_transient_growth": 1.0}, E=np.diag([2.0, 1.0]))["EG111"]
    assert ok.passed
    bad = _verdicts([[-1.0, 0.0, 0.0], [0.0, -2.0, 0.0], [0.0, 0.0, 1.0]],
                    {"min_stability_radius": 0.1},
                    E=np.diag([1.0, 1.0, 0.0]))["EG110"]
    assert not bad.passed and bad.measured == "not evaluated"
    assert "min_stability_radius cannot be evaluated" in bad.message


# ------------------------------------------------------------------ model files
def _write(tmp_path: Path, requirements: dict, A=None, name="m.yaml", **extra) -> Path:
    doc = {"model_format": 1, "name": "arm",
           "plant": {"A": A or [[-1.0, 10.0], [0.0, -2.0]]}, "requirements": requirements,
           **extra}
    path = tmp_path / name
    path.write_text(yaml.safe_dump(doc, sort_keys=False), encoding="utf-8")
    return path


@pytest.mark.parametrize("value, field, problem", [
    (0, "requirements.min_stability_radius", "must be a positive number"),
    ("big", "requirements.min_stability_radius", "must be a positive number"),
    ({"min": 0.1, "stucture": {}}, "requirements.min_stability_radius.stucture",
     "is not a known field"),
    ({"structure": {"B": [[1.0]], "C": [[1.0]]}}, "requirements.min_stability_radius.min",
     "is missing"),
    ({"min": 0.1, "structure": {"B": [[1.0]]}}, "requirements.min_stability_radius.structure",
     "must be a mapping with exactly B and C"),
    ({"min": 0.1, "structure": {"B": [[1.0], [0.0]], "C": [[1.0, float("nan")]]}},
     "requirements.min_stability_radius.structure.C", "finite"),
    ({"min": 0.1, "real": "yes"}, "requirements.min_stability_radius.real",
     "must be true or false"),
    ({"min": 0.1, "structure": {"B": [[1.0], [0.0], [0.0]], "C": [[1.0, 0.0]]}},
     "requirements.min_stability_radius", "structure.B has 3 rows, but the model has 2 states"),
])
def test_bad_radius_values_are_named(tmp_path, value, field, problem):
    path = _write(tmp_path, {"min_stability_radius": value})
    with pytest.raises(ModelError) as info:
        load_models(path)
    assert info.value.field == field and problem in info.value.problem, str(info.value)


@pytest.mark.parametrize("key, value, field, problem", [
    ("max_transient_growth", 0.5, "requirements.max_transient_growth", "a number ≥ 1"),
    ("max_transient_growth", True, "requirements.max_transient_growth", "a number ≥ 1"),
    ("max_pseudospectral_abscissa", -0.1, "requirements.max_pseudospectral_abscissa",
     "must be a mapping {epsilon: ε, max: a}"),
    ("max_pseudospectral_abscissa", {"max": -0.1},
     "requirements.max_pseudospectral_abscissa.epsilon", "is missing"),
    ("max_pseudospectral_abscissa", {"epsilon": 0, "max": -0.1},
     "requirements.max_pseudospectral_abscissa.epsilon", "must be a positive number"),
    ("max_pseudospectral_abscissa", {"epsilon": 0.1, "max": float("inf")},
     "requirements.max_pseudospectral_abscissa.max", "must be a finite number"),
    ("max_pseudospectral_abscissa", {"epsilon": 0.1, "max": 0, "eps": 1},
     "requirements.max_pseudospectral_abscissa.eps", "is not a known field"),
])
def test_bad_growth_and_abscissa_values_are_named(tmp_path, key, value, field, problem):
    path = _write(tmp_path, {key: value})
    with pytest.raises(ModelError) as info:
        load_models(path)
    assert info.value.field == field and problem in info.value.problem, str(info.value)


def test_the_command_line_reports_figures_in_every_format(tmp_path):
    (tmp_path / "pyproject.toml").write_text("[tool.eigengate]\n", encoding="utf-8")
    (tmp_path / "models").mkdir()
    _write(tmp_path / "models", {"stable": True, "max_transient_growth": 2.0,
                                 "min_stability_radius": 0.01})
    # one run writes the JSON (standard output), SARIF and Markdown reports
    out = run_cli("check", str(tmp_path), "--format", "json", "-o", "sarif:r.sarif",
                  "-o", "markdown:r.md", cwd=tmp_path)
    assert out.returncode == 1, out.stderr
    data = json.loads(out.stdout)
    (model,) = data["files"][0]["models"]
    by_rule = {v["rule"]: v for v in model["verdicts"]}
    fig = by_rule["EG111"]["figure"]
    assert fig["name"] == "transient_growth" and fig["lower"] <= fig["value"] <= fig["upper"]
    assert by_rule["EG101"]["figure"] is None and by_rule["EG110"]["figure"]["at_label"]
    (finding,) = model["findings"]
    assert finding["rule"] == "EG111" and finding["figure"]["value"] == fig["value"]
    import jsonschema
    from importlib import resources

    schema = json.loads(resources.files("eigengate").joinpath(
        "schema/report-v1.schema.json").read_text(encoding="utf-8"))
    jsonschema.validate(data, schema)
    text = run_cli("check", str(tmp_path), cwd=tmp_path).stdout
    assert "figure: transient growth" in text and "method: " in text
    sarif = json.loads((tmp_path / "r.sarif").read_text(encoding="utf-8"))
    props = sarif["runs"][0]["results"][0]["properties"]
    assert props["figure"]["name"] == "transient_growth"
    md = (tmp_path / "r.md").read_text(encoding="utf-8")
    assert "figure: transient growth" in md
    # the same bytes twice, and through the cache (a second run reads it)
    again = run_cli("check", str(tmp_path), "--format", "json", cwd=tmp_path)
    assert again.stdout == out.stdout


def test_explain_says_what_each_figure_means_and_its_limits():
    for rid in ("EG110", "EG111", "EG112", "EG211", "EG212", "EG213"):
        text = explain_rule(RULES[rid])
        assert text.startswith(f"{rid} {RULES[rid].name}") and "example:" in text
    text = explain_rule(RULES["EG110"])
    assert "limits:" in text and "realisation" in text
    assert "limits:" in explain_rule(RULES["EG111"])
    assert "limits:" in explain_rule(RULES["EG112"])


# ------------------------------------------------------------------ baselines
def test_baseline_stores_the_figures_and_flags_regressions():
    before = analyse_model(_model([[-1.0, 2.0], [0.0, -2.0]],
                                  {"min_stability_radius": 0.01, "max_transient_growth": 50,
                                   "max_pseudospectral_abscissa": {"epsilon": 0.01,
                                                                   "max": 0.0}}))
    entry = baseline_entry_from(before)
    names = [k for k, _ in entry.robustness]
    assert names == ["pseudospectral_abscissa@0.01", "stability_radius", "transient_growth"]
    # the file keeps them: written, read back, equal
    (back,), _ = parse(dump_text([entry]), "baseline.json")
    assert back.robustness == entry.robustness
    after = analyse_model(_model([[-1.0, 20.0], [0.0, -2.0]],
                                 {"min_stability_radius": 0.01, "max_transient_growth": 50,
                                  "max_pseudospectral_abscissa": {"epsilon": 0.01,
                                                                  "max": 0.0}}))
    rules = {f.rule: f for f in compare(after, entry).regressions}
    assert {"EG211", "EG212", "EG213"} <= set(rules)
    assert rules["EG211"].message.startswith("stability radius ")
    assert rules["EG212"].severity == "error" and rules["EG212"].measured > rules["EG212"].threshold
    assert "(ε = 0.01)" in rules["EG213"].message
    # the other way round they are improvements, and a loose tolerance absorbs the change
    back_again = compare(before, baseline_entry_from(after))
    assert not any(f.rule in ("EG211", "EG212", "EG213") for f in back_again.regressions)
    assert {i.figure for i in back_again.improvements} >= {"stability_radius",
                                                           "transient_growth"}
    loose = parse_tolerances({"transient_growth": {"rel": 100.0},
                              "stability_radius": {"rel": 1.0},
                              "pseudospectral_abscissa": {"abs": 10.0}}, "pyproject.toml")
    assert not any(f.rule.startswith("EG21") for f in compare(after, entry, loose).regressions)


def test_figures_compare_only_when_both_sides_have_them():
    plain = analyse_model(_model([[-1.0, 2.0], [0.0, -2.0]], {"stable": True}))
    entry = baseline_entry_from(plain)
    assert entry.robustness == ()
    after = analyse_model(_model([[-1.0, 20.0], [0.0, -2.0]], {"max_transient_growth": 50}))
    assert not any(f.rule == "EG212" for f in compare(after, entry).regressions)


def test_requirement_records_survive_the_cache_format():
    from eigengate.scan.records import record, unrecord

    r = MinStabilityRadius(0.1, ((1.0,), (0.0,)), ((1.0, 0.0),), True)
    assert unrecord(MinStabilityRadius, record(r)) == r
    g = MaxTransientGrowth(3.0)
    assert unrecord(MaxTransientGrowth, record(g)) == g


# ------------------------------------------------------------------ the HTML report's pictures
def test_html_report_draws_pseudospectra_and_the_transient_curve(tmp_path):
    pytest.importorskip("matplotlib")
    from eigengate.reports.html import render_html
    from eigengate.reports.plots import PSEUDOSPECTRA_GID, pole_map_svg
    from eigengate.reports.transient import LIMIT_GID, TRANSIENT_GID, transient_figure
    from eigengate.reports.figures import _style, _svg_text
    from eigengate.scan.engine import file_result

    reqs = {"max_transient_growth": 2.0,
            "max_pseudospectral_abscissa": {"epsilon": 0.01, "max": 0.0}}
    r = analyse_model(_model([[-1.0, 10.0], [0.0, -2.0]], reqs))
    svg = pole_map_svg(r)
    assert f'id="{PSEUDOSPECTRA_GID}' in svg
    with _style() as mpl:
        curve_svg = _svg_text(transient_figure(r, mpl=mpl))
    assert f'id="{TRANSIENT_GID}"' in curve_svg and f'id="{LIMIT_GID}"' in curve_svg
    html = render_html([file_result("models/m.yaml", (r,), None)], tool_version="9.9.9")
    assert "Transient growth: the largest amplification" in html
    assert "Grey curves: the ε-pseudospectra" in html
    assert html.count("<figure>") == 3  # pole map, phase portrait (two states), growth
    # a model without these requirements draws neither
    plain = analyse_model(_model([[-1.0, 10.0], [0.0, -2.0]], {"stable": True}))
    assert PSEUDOSPECTRA_GID not in pole_map_svg(plain)
    assert render_html([file_result("models/m.yaml", (r,), None)],
                       tool_version="9.9.9") == html  # same bytes
