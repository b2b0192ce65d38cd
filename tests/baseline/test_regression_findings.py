"""Regression findings in full: every field a report shows (rule, severity, place, message with
its numbers, measured value, threshold, margin, unit, modes after and before), for each kind of
change, and the small formatters they are made of.

Models are diagonal (LAPACK returns a diagonal exactly) or in the second-order standard form
s² + 2ζωn s + ωn², s = -ζωn ± jωn√(1 − ζ²) (common in control textbooks), so every number in
a message is known in advance.
"""

from __future__ import annotations

import math
import textwrap
from types import SimpleNamespace

import numpy as np
import pytest
from scipy.linalg import block_diag
from support import lift_axis

from eigengate import from_arrays
from eigengate.baseline.store import Baseline, baseline_entry_from
from eigengate.scan.engine import analyse_model, check_file
from eigengate.baseline.regressions import (Tolerance, Tolerances, _change, _ev, _f, _side, compare,
                                   compare_all)

SUGGESTION = "if the change is intended, accept it into the baseline"
up, down = (lambda x: math.nextafter(x, math.inf)), (lambda x: math.nextafter(x, -math.inf))


def osc(zeta, wn):
    return np.array([[0.0, 1.0], [-wn * wn, -2.0 * zeta * wn]])


def result(*blocks, name="pitch", label=None, source="models/pitch.yaml"):
    A = block_diag(*[np.atleast_2d(np.asarray(b, float)) for b in blocks])
    return analyse_model(from_arrays(A, name=name, label=label, source=source))


def diag(*values, **kw):
    return result(*[[[v]] for v in values], **kw)


def check(before, after, tol=None, **kw):
    return compare(after, baseline_entry_from(before), tol, **kw)


def place(f):
    return (f.rule, f.name, f.severity, f.source, f.line, f.model, f.label, f.requirement,
            f.unit, f.suggestion)


# ------------------------------------------------------------------ formatters

def test_number_formats():
    assert (_f(math.inf), _f(-math.inf), _f(1.23456), _f(0.0), _f(-2.5e-7)) == (
        "∞", "-∞", "1.235", "0", "-2.5e-07")


def test_eigenvalue_formats():
    def ev(z, k=1):
        return _ev(SimpleNamespace(eigenvalue=z, multiplicity=k))

    assert ev(-1.0) == "-1" and ev(complex(-0.5, -2.0)) == "-0.5±2j"
    assert ev(-1.0, 2) == "-1 ×2" and ev(complex(0.25, 1.5), 3) == "0.25±1.5j ×3"


def test_change_formats():
    tol = Tolerance(abs=0.0, rel=0.25)
    assert _change(1.0, 0.5, tol, "1/s") == "1 → 0.5 1/s (-0.5, -50.0 %; allowed ±0.25)"
    assert _change(2.0, 3.0, tol, "") == "2 → 3 (+1, +50.0 %; allowed ±0.5)"
    assert _change(-2.0, -1.0, tol, "") == "-2 → -1 (+1, +50.0 %; allowed ±0.5)"
    # no percentage of a zero baseline, nor of an infinite change; a zero change has no sign
    assert _change(0.0, 0.5, Tolerance(abs=1e-6), "") == "0 → 0.5 (+0.5; allowed ±1e-06)"
    assert _change(1.0, math.inf, tol, "1/s") == "1 → ∞ 1/s (+∞; allowed ±0.25)"
    assert _change(1.0, 1.0, tol, "") == "1 → 1 (0, +0.0 %; allowed ±0.25)"


@pytest.mark.parametrize("re, side", [(-0.25, 0), (down(-0.25), -1), (0.25, 0), (up(0.25), 1),
                                      (0.0, 0), (-3.0, -1), (3.0, 1)])
def test_side_of_the_boundary_within_the_uncertainty(re, side):
    # a mode within its error bound of the imaginary axis is on the boundary (0)
    assert _side(SimpleNamespace(s=complex(re, 1.0), uncertainty=0.25)) == side


# ------------------------------------------------------------------ per-mode findings

def test_decay_rate_regression_in_full():
    c = check(diag(-1.0, -10.0), diag(-0.5, -10.0))
    (f,) = c.regressions
    assert place(f) == ("EG202", "decay-rate-regressed", "error", "models/pitch.yaml", None,
                        "pitch", None, "baseline", "1/s", SUGGESTION)
    # allowed: max(1e-6, 0.05·1) = 0.05; margin = 0.05 - 0.5
    assert f.message == ("x1 mode -1 → -0.5: decay rate 1 → 0.5 1/s (-0.5, -50.0 %; "
                         "allowed ±0.05)")
    assert (f.measured, f.threshold, f.margin) == (0.5, 1.0, pytest.approx(-0.45))
    assert [(r.index, r.s) for r in f.modes] == [(1, -0.5)]
    assert [(r.index, r.s) for r in f.before] == [(1, -1.0)]
    assert (c.source, c.title, c.failed, c.improvements) == ("models/pitch.yaml", "pitch", True,
                                                              ())
    assert [m.kind for m in c.matched] == ["matched", "matched"]


def test_decay_rate_improvement_in_full():
    c = check(diag(-1.0, -10.0, name="roll", label="hover"), diag(-2.0, -10.0, name="roll",
                                                                    label="hover"))
    assert c.regressions == () and not c.failed
    (i,) = c.improvements
    assert (i.figure, i.source, i.model, i.label, i.title) == (
        "decay_rate", "models/pitch.yaml", "roll", "hover", "roll[hover]")
    assert i.message == "x1 mode -1 → -2: decay rate 1 → 2 1/s (+1, +100.0 %; allowed ±0.05)"
    assert [r.s for r in i.modes] == [-2.0] and [r.s for r in i.before] == [-1.0]
    assert i.before[0].index == 1


def test_damping_and_frequency_regressions_in_full():
    # ζ 0.5 → 0.3 at ωn = 2: s = -1 ± 1.73205j → -0.6 ± 1.90788j
    c = check(result(osc(0.5, 2.0)), result(osc(0.3, 2.0)))
    by = {f.rule: f for f in c.regressions}
    assert sorted(by) == ["EG202", "EG203"]
    f = by["EG203"]
    assert place(f)[:3] == ("EG203", "damping-regressed", "error") and f.unit == ""
    assert f.message == ("x1-x2 mode -1±1.73205j → -0.6±1.90788j: damping ratio 0.5 → 0.3 "
                         "(-0.2, -40.0 %; allowed ±0.025)")
    assert f.measured == pytest.approx(0.3) and f.threshold == pytest.approx(0.5)
    assert f.margin == pytest.approx(0.025 - 0.2)
    # ωn 2 → 2.5 at ζ = 0.3: a frequency shift (a warning), decay 0.6 → 0.75 is better
    c = check(result(osc(0.3, 2.0)), result(osc(0.3, 2.5)))
    (f,) = c.regressions
    assert place(f)[:3] == ("EG205", "frequency-shifted", "warning") and f.unit == "rad/s"
    assert f.message == ("x1-x2 mode -0.6±1.90788j → -0.75±2.38485j: natural frequency 2 → 2.5 "
                         "rad/s (+0.5, +25.0 %; allowed ±0.1)")
    assert not c.failed and [i.figure for i in c.improvements] == ["decay_rate"]


def test_a_real_mode_turning_oscillatory_is_judged_on_damping_but_not_frequency():
    # -2 (ζ = 1) → -0.6 ± 1.90788j (ζ = 0.3); a real mode has no frequency to compare
    c = check(diag(-2.0, -2.5), result(osc(0.3, 2.0)))
    rules = sorted(f.rule for f in c.regressions)
    assert "EG203" in rules and "EG205" not in rules


def test_crossing_into_instability_in_full():
    c = check(result(osc(0.1, 2.0), [[-5.0]]), result(osc(-0.05, 2.0), [[-5.0]]))
    by = {f.rule: f for f in c.regressions}
    assert sorted(by) == ["EG201", "EG204"]
    f = by["EG201"]
    assert place(f) == ("EG201", "crossed-into-instability", "error", "models/pitch.yaml",
                        None, "pitch", None, "baseline", "1/s", SUGGESTION)
    # Re s: -ζωn = -0.2 → +0.1; allowed max(1e-6, 0.05·0.2) = 0.01
    assert f.message == ("x1-x2 mode -0.2±1.98997j → 0.1±1.9975j crossed into instability: decay "
                         "rate 0.2 → -0.1 1/s (-0.3, -150.0 %; allowed ±0.01)")
    assert f.measured == pytest.approx(-0.1) and f.threshold == pytest.approx(0.2)
    assert f.margin == pytest.approx(-0.1)
    assert [r.s.real for r in f.modes] == [pytest.approx(0.1)]
    assert [r.s.real for r in f.before] == [pytest.approx(-0.2)]
    g = by["EG204"]
    assert g.message == ("equilibrium stable-focus (3 stable, 0 unstable, 0 center) → saddle "
                         "(1 stable, 2 unstable, 0 center)")
    assert (g.measured, g.threshold, g.severity) == ("saddle", "stable-focus", "error")
    assert [r.s.real for r in g.modes] == [pytest.approx(0.1)]  # the modes not stable


def test_stabilised_mode_in_full():
    c = check(result(osc(-0.05, 2.0), [[-5.0]]), result(osc(0.1, 2.0), [[-5.0]]))
    assert c.regressions == ()
    by = {i.figure: i for i in c.improvements}
    assert by["stability"].message == "x1-x2 mode 0.1±1.9975j → -0.2±1.98997j is stable now"
    assert by["equilibrium"].message == ("equilibrium saddle (1 stable, 2 unstable, 0 center) "
                                         "→ stable-focus (3 stable, 0 unstable, 0 center)")
    assert by["stability"].modes[0].s.real == pytest.approx(-0.2)
    assert by["stability"].before[0].s.real == pytest.approx(0.1)


def test_node_to_focus_is_worse():
    # the same direction counts; a stable node (real modes) becoming a stable focus is worse
    c = check(diag(-2.0, -3.0), result(osc(0.9, 2.5)))
    f = next(f for f in c.regressions if f.rule == "EG204")
    assert (f.measured, f.threshold) == ("stable-focus", "stable-node") and f.modes == ()
    # and a center: s = ±2j, ζ = 0 (undamped oscillator)
    c = check(result(osc(0.5, 2.0)), result(osc(0.0, 2.0)))
    f = next(f for f in c.regressions if f.rule == "EG204")
    assert (f.measured, f.threshold) == ("center", "stable-focus")
    assert [r.s.imag for r in f.modes] == [pytest.approx(2.0)]
    # and back is an improvement
    c = check(result(osc(0.9, 2.5)), diag(-2.0, -3.0))
    assert "equilibrium" in {i.figure for i in c.improvements}


def test_modes_appearing_in_full():
    c = check(diag(-1.0, -4.0), diag(-1.0, -4.0, 0.5))
    f = next(f for f in c.regressions if f.rule == "EG201")
    assert f.message == ("unstable mode 0.5 (decay rate -0.5 1/s) appeared with no counterpart "
                         "in the baseline")
    assert (f.measured, f.threshold, f.margin) == (0.5, 0.0, None)
    assert [r.s for r in f.modes] == [0.5] and f.before == ()
    c = check(diag(-1.0, -4.0), diag(-1.0, -4.0, -70.0))
    (f,) = c.regressions
    assert place(f)[:3] == ("EG206", "mode-appeared", "warning")
    assert f.message == "x3 mode -70 (ζ=1, ωn=70 rad/s) has no counterpart in the baseline"
    assert [r.s for r in f.modes] == [-70.0] and (f.measured, f.threshold) == (None, None)


def test_an_unstable_mode_appearing_without_more_unstable_directions_is_a_new_mode():
    # 0.5 becomes -0.45 (stable now) and 30 arrives: still one unstable direction, so the
    # arrival is EG206, and the slowest decay rate of the model (-0.5 → -30) is EG202
    c = check(diag(-1.0, 0.5), diag(-1.0, -0.45, 30.0))
    assert sorted(f.rule for f in c.regressions) == ["EG202", "EG206"]
    assert "stability" in {i.figure for i in c.improvements}


def test_modes_disappearing_in_full():
    c = check(diag(-1.0, -4.0, -70.0), diag(-1.0, -4.0))
    (f,) = c.regressions
    assert place(f)[:3] == ("EG207", "mode-disappeared", "warning")
    assert f.message == "baseline x3 mode -70 (ζ=1, ωn=70 rad/s) has no counterpart in the model"
    assert [(r.index, r.s) for r in f.modes] == [(3, -70.0)] and f.before == ()
    # part of a multiple eigenvalue: a double -70 that keeps one copy
    c = check(diag(-1.0, -70.0, -70.0), diag(-1.0, -70.0))
    (f,) = [f for f in c.regressions if f.rule == "EG207"]
    assert f.message == ("baseline x2-x3 mode -70 ×2 (ζ=1, ωn=70 rad/s) has no counterpart in the "
                         "model (1 of its 2)")


def test_new_model_in_full():
    c = compare(diag(-1.0, name="yaw", label="cruise"), None)
    (f,) = c.regressions
    assert place(f) == ("EG208", "new-model", "warning", "models/pitch.yaml", None, "yaw",
                        "cruise", "baseline", "", SUGGESTION)
    assert f.message == ("yaw[cruise] has no baseline entry: accept it to start comparing its "
                         "modes with later changes")
    assert (c.source, c.title, c.matched, c.improvements) == ("models/pitch.yaml",
                                                              "yaw[cruise]", (), ())


# ------------------------------------------------------------------ whole-model figures

def test_slowest_decay_rate_of_the_model_in_full():
    c = check(diag(-1.0, -10.0), diag(-1.0, -10.0, -0.5))
    f = next(f for f in c.regressions if f.rule == "EG202")
    assert f.message == ("slowest decay rate of the model 1 → 0.5 1/s (-0.5, -50.0 %; allowed "
                         "±0.05), now from mode -0.5")
    assert (f.measured, f.threshold) == (0.5, 1.0) and [r.s for r in f.modes] == [-0.5]


def test_smallest_damping_of_the_model_in_full():
    # a lightly damped pair (ζ = 0.1, ωn = 20) appears far from the old modes
    c = check(result(osc(0.5, 2.0), [[-10.0]]), result(osc(0.5, 2.0), [[-10.0]],
                                                       osc(0.1, 20.0)))
    f = next(f for f in c.regressions if f.rule == "EG203")
    assert f.message == ("smallest damping ratio of the model 0.5 → 0.1 (-0.4, -80.0 %; "
                         "allowed ±0.025), now from mode -2±19.8997j")
    assert f.measured == pytest.approx(0.1) and f.threshold == pytest.approx(0.5)
    assert [r.s.imag for r in f.modes] == [pytest.approx(19.8997487)]


def test_whole_model_figures_use_their_own_tolerance():
    # the same appearance within a loose tolerance is no regression of the model
    loose = Tolerances(decay_rate=Tolerance(rel=0.6), damping=Tolerance(rel=0.9))
    c = check(diag(-1.0, -10.0), diag(-1.0, -10.0, -0.5), loose)
    assert [f.rule for f in c.regressions] == ["EG206"]


def test_the_finding_line_is_the_feedback_block_of_a_closed_loop(tmp_path):
    # lift_axis: plant on line 3, feedback on line 7, the gain on 8 (support.lift_axis);
    # k2 2.08 → 1.2
    path = tmp_path / "lift.yaml"
    path.write_text(lift_axis(2.08), encoding="utf-8")
    before = check_file(path, root=tmp_path).results[0]
    path.write_text(lift_axis(1.2), encoding="utf-8")
    after = check_file(path, root=tmp_path).results[0]
    lines = lift_axis(1.2).splitlines()
    assert lines[2] == "plant:" and lines[6] == "feedback:"
    c = compare(after, baseline_entry_from(before))
    # a moved mode's finding points at the input that changed (k2, line 8), the whole
    # model's figures at the feedback block
    assert c.regressions and {f.line for f in c.regressions} <= {7, 8}
    assert {f.line for f in c.regressions if f.cause} == {8}
    assert {f.line for f in c.regressions if not f.cause} <= {7}
    path.write_text(textwrap.dedent("""\
        model_format: 1
        name: plain
        plant:
          A: [[-1.0]]
        """), encoding="utf-8")
    plain = check_file(path, root=tmp_path).results[0]
    (f,) = compare(plain, baseline_entry_from(diag(-2.0, name="plain"))).regressions
    assert f.line == 3


def test_unknown_rules_default_to_error_and_off_drops_them():
    before, after = diag(-1.0), diag(-0.5)
    assert check(before, after, severities={"EG205": "off"}).regressions[0].severity == "error"
    assert check(before, after, severities={"EG202": "off"}).regressions == ()


# ------------------------------------------------------------------ compare_all

def _two_file_baseline(tmp_path):
    (tmp_path / "models").mkdir()
    a = tmp_path / "models" / "a.yaml"
    a.write_text("model_format: 1\nname: a\nplant:\n  A: [[-1.0]]\n", encoding="utf-8")
    fr = check_file(a, root=tmp_path)
    ghost = baseline_entry_from(diag(-1.0, name="a", label="old", source="models/a.yaml"))
    gone = baseline_entry_from(diag(-1.0, name="b", source="models/b.yaml"))
    slower = baseline_entry_from(diag(-2.0, name="a", source="models/a.yaml"))
    text = Baseline([slower, ghost, gone]).dump()
    return fr, Baseline.loads(text, ".eigengate/baseline.json"), ghost, gone


def test_compare_all_in_full(tmp_path):
    fr, bl, ghost, gone = _two_file_baseline(tmp_path)
    out = compare_all([fr], bl, complete=True)
    assert out.failed and out.new_keys == () and len(out.comparisons) == 1
    by = {(f.rule, f.model): f for f in out.findings}
    assert sorted(by) == [("EG202", "a"), ("EG209", "a"), ("EG209", "b")]
    stale = by[("EG209", "a")]
    assert (stale.name, stale.severity, stale.source, stale.line, stale.label,
            stale.requirement, stale.suggestion) == (
        "stale-baseline-entry", "warning", ".eigengate/baseline.json", bl.line_of(ghost.key),
        "old", "baseline", "accept again to remove stale entries")
    assert stale.message == ("baseline entry 'a[old]' of 'models/a.yaml' is stale: its model "
                             "file no longer defines it")
    assert by[("EG209", "b")].message == ("baseline entry 'b' of 'models/b.yaml' is stale: its "
                                          "model file is gone")
    assert out.stale_keys == (ghost.key, gone.key) or set(out.stale_keys) == {ghost.key,
                                                                              gone.key}
    # not complete: only entries of checked files are stale
    assert compare_all([fr], bl).stale_keys == (ghost.key,)
    # an entry without a line in the baseline file is reported at its model file
    out = compare_all([fr], Baseline([ghost]), complete=True)
    assert [(f.source, f.line) for f in out.findings if f.rule == "EG209"] == [
        ("models/a.yaml", None)]
    assert [f.rule for f in out.findings] == ["EG208", "EG209"]
    assert out.new_keys == (("models/a.yaml", "a"),)


def test_compare_all_severities_and_tolerances(tmp_path):
    fr, bl, ghost, gone = _two_file_baseline(tmp_path)
    out = compare_all([fr], bl, complete=True, severities={"EG209": "off", "EG202": "warning"})
    assert [(f.rule, f.severity) for f in out.findings] == [("EG202", "warning")]
    assert not out.failed and out.stale_keys  # still known as stale, just not reported
    out = compare_all([fr], bl, severities={"EG209": "error"})
    assert [f.severity for f in out.findings if f.rule == "EG209"] == ["error"]
    seen = []

    def per_model(r):
        seen.append(r.model.title)
        return Tolerances(decay_rate=Tolerance(rel=0.6))

    out = compare_all([fr], bl, per_model)
    assert seen == ["a"] and [f.rule for f in out.findings] == ["EG209"]
    out = compare_all([fr], bl, Tolerances(decay_rate=Tolerance(rel=0.6)))
    assert [f.rule for f in out.findings] == ["EG209"]


def test_compare_all_collects_improvements(tmp_path):
    fr, _, _, _ = _two_file_baseline(tmp_path)
    bl = Baseline([baseline_entry_from(diag(-0.5, name="a", source="models/a.yaml"))])
    out = compare_all([fr], bl)
    assert out.findings == () and [i.figure for i in out.improvements] == ["decay_rate"]
    assert out.comparisons[0].improvements == out.improvements


# ------------------------------------------------------------------ allowed_drift errors

def _tol_error(value, lines=None):
    from eigengate.errors import ModelError
    from eigengate.baseline.regressions import parse_tolerances

    with pytest.raises(ModelError) as e:
        parse_tolerances(value, "pyproject.toml", "tool.eigengate.allowed_drift.",
                         lines if lines is not None else {"tool.eigengate.allowed_drift": 12})
    err = e.value
    return err.source, err.field, err.problem, err.line, err.hint


P = "tool.eigengate.allowed_drift"


@pytest.mark.parametrize("value, expected", [
    ([1], (P, "must be a mapping of decay_rate, damping, frequency, stability_radius, transient_growth, pseudospectral_abscissa, match_gate, got [1]", 12,
           None)),
    ({"dacay_rate": {}}, (f"{P}.dacay_rate", "is not a tolerance", 12,
                          "did you mean 'decay_rate'?")),
    ({"zzz": {}}, (f"{P}.zzz", "is not a tolerance", 12,
                   "known keys: decay_rate, damping, frequency, stability_radius, transient_growth, pseudospectral_abscissa, match_gate")),
    ({"damping": 0.1}, (f"{P}.damping", "must be a mapping of abs, rel, worse, got 0.1", 12,
                        "for example {abs: 0.01, rel: 0.05}")),
    ({"damping": {"absolute": 0.1}}, (f"{P}.damping.absolute", "is not a tolerance field", 12,
                                      "known: abs, rel, worse")),
    ({"damping": {"worse": "down"}}, (f"{P}.damping.worse",
                                      "must be one of lower, higher, either, got 'down'", 12,
                                      None)),
    ({"damping": {"rel": -1}}, (f"{P}.damping.rel", "must be a non-negative number, got -1",
                                12, None)),
    ({"match_gate": 0}, (f"{P}.match_gate", "must be a positive number, got 0", 12, None))])
def test_allowed_drift_errors_in_full(value, expected):
    assert _tol_error(value) == ("pyproject.toml", *expected)


def test_allowed_drift_error_lines_prefer_the_field():
    lines = {P: 12, f"{P}.damping.rel": 14}
    assert _tol_error({"damping": {"rel": -1}}, lines)[3] == 14
    assert _tol_error({"damping": {"abs": -1}}, lines)[3] == 12
    assert _tol_error({"damping": {"abs": -1}}, {})[3] is None


def test_allowed_drift_keys_after_the_gate_are_read():
    from eigengate.baseline.regressions import parse_tolerances

    t = parse_tolerances({"match_gate": 2.0, "damping": {"rel": 0.5, "worse": "either"}},
                         "m.yaml")
    assert t.match_gate == 2.0 and t.damping == Tolerance(abs=0.005, rel=0.5, worse="either")


# ------------------------------------------------------------------ boundary modes and ties

@pytest.mark.parametrize("before, after, rules, stable_now", [
    # a mode on the boundary (s = 0: side 0) that becomes unstable crossed into instability
    ((-1.0, 0.0), (-1.0, 0.3), ["EG201", "EG204"], False),
    # an unstable mode that grows did not cross: it regressed
    ((-1.0, 0.3), (-1.0, 0.5), ["EG202"], False),
    # a stable mode that reaches the boundary did not cross either
    ((-1.0, -0.3), (-1.0, 0.0), ["EG202", "EG204"], False),
    # the boundary becoming stable, or the unstable reaching it, is not "stable now"
    ((-1.0, 0.0), (-1.0, -0.3), [], False),
    ((-1.0, 0.3), (-1.0, 0.0), [], False),
    ((-1.0, 0.3), (-1.0, -0.1), [], True)])
def test_crossings_are_judged_by_side(before, after, rules, stable_now):
    c = check(diag(*before), diag(*after))
    assert sorted(f.rule for f in c.regressions) == rules
    assert ("stability" in {i.figure for i in c.improvements}) is stable_now


def test_an_appearing_boundary_mode_is_no_crossing():
    # 0.5 and 0 appear beside -1: one more unstable direction (EG201 for 0.5 only); the
    # integrator at 0 is a new mode (EG206)
    c = check(diag(-1.0), diag(-1.0, 0.0, 0.5))
    rules = sorted(f.rule for f in c.regressions)
    assert rules.count("EG201") == 1 and rules.count("EG206") == 1
    assert next(f for f in c.regressions if f.rule == "EG206").modes[0].s == 0.0


def test_a_mode_turning_oscillatory_is_reported_as_that_mode():
    # -2.5 (ζ = 1) → -0.6 ± 1.90788j (ζ = 0.3): the mode's own damping finding, not only the
    # whole model's
    c = check(diag(-2.0, -2.5), result(osc(0.3, 2.0)))
    msgs = [f.message for f in c.regressions if f.rule == "EG203"]
    assert len(msgs) == 1 and msgs[0].startswith("x2 mode ") and "damping ratio 1 → 0.3" in msgs[0]


def test_the_slowest_mode_on_a_tie_is_the_first_listed():
    # a real mode and a pair with the same real part -0.5 appear: modes are listed real first
    # (smaller |Im s|), and the whole-model finding names that one
    pair = np.array([[-0.5, 3.0], [-3.0, -0.5]])
    c = check(diag(-1.0, -10.0), result([[-1.0]], [[-10.0]], [[-0.5]], pair))
    f = next(f for f in c.regressions if f.rule == "EG202")
    assert f.message.endswith("now from mode -0.5")


def test_every_change_of_one_retune_is_reported():
    # several kinds at once, so no kind of finding hides those after it: -1 → -0.5 (EG202),
    # -70 gone (EG207), -4000 → +6000 crossed (EG201), and the origin became a saddle (EG204)
    c = check(diag(-1.0, -70.0, -4000.0), diag(-0.5, 6000.0))
    assert sorted(f.rule for f in c.regressions) == ["EG201", "EG202", "EG204", "EG207"]
    c = check(diag(-1.0, -4.0), diag(-1.0, -4.0, -70.0, -900.0, 20.0))
    rules = sorted(f.rule for f in c.regressions)
    assert rules.count("EG206") == 2 and rules.count("EG201") == 1


def test_compare_all_goes_on_after_a_broken_file(tmp_path):
    bad = tmp_path / "broken.yaml"
    bad.write_text("model_format: 1\nplant: {A: [[1, 2]]}\n", encoding="utf-8")
    good = tmp_path / "good.yaml"
    good.write_text("model_format: 1\nname: good\nplant:\n  A: [[-1.0]]\n", encoding="utf-8")
    frs = [check_file(bad, root=tmp_path), check_file(good, root=tmp_path)]
    out = compare_all(frs, Baseline())
    assert out.new_keys == (("good.yaml", "good"),) and [f.rule for f in out.findings] == [
        "EG208"]


def test_a_stale_entry_without_a_line_is_reported_at_its_model_file():
    ghost = baseline_entry_from(diag(-1.0, name="a", label="old", source="models/a.yaml"))
    bl = Baseline([ghost], path=".eigengate/baseline.json")
    assert bl.line_of(ghost.key) is None
    (f,) = compare_all([], bl, complete=True).findings
    assert (f.rule, f.source, f.line) == ("EG209", "models/a.yaml", None)


def test_the_default_field_prefix_is_allowed_drift():
    from eigengate.errors import ModelError
    from eigengate.baseline.regressions import parse_tolerances

    with pytest.raises(ModelError) as e:
        parse_tolerances({"zzz": {}}, "m.yaml")
    assert e.value.field == "allowed_drift.zzz"


def test_every_mode_gone_and_every_mode_new_is_reported():
    # matches list matched modes, then the gone, then the new ones: none may stop the rest.
    # +60 is beyond the gate of -70 and -80 (scaled distances 130/70, 140/80 > 1.5): two
    # gone, one unstable new (the slowest mode: its EG201 stands for the model's decay rate)
    c = check(diag(-1.0, -70.0, -80.0), diag(-1.0, 60.0))
    assert sorted(f.rule for f in c.regressions) == ["EG201", "EG204", "EG207", "EG207"]
