"""Regression rules EG201-EG209: each fires on a hand-built retune, none on an improvement."""

import math
import textwrap

import numpy as np
import pytest
from scipy.linalg import block_diag

from eigengate import from_arrays
from eigengate.baseline.store import Baseline, baseline_entry_from
from eigengate.scan.engine import analyse_model, check_file
from eigengate.errors import ModelError
from eigengate.baseline.regressions import (DEFAULT_SEVERITY, Tolerance, Tolerances, compare,
                                   compare_all, parse_tolerances)
from eigengate.rules.catalogue import RULES


def osc(zeta, wn):
    # Second-order standard form s^2 + 2 zeta wn s + wn^2: s = -zeta wn ± j wn sqrt(1 - zeta^2)
    # (common in control textbooks).
    return np.array([[0.0, 1.0], [-wn * wn, -2.0 * zeta * wn]])


def result(*blocks, T=None, name="pitch", label=None, source="models/pitch.yaml"):
    A = block_diag(*[np.atleast_2d(np.asarray(b, float)) for b in blocks])
    n = A.shape[0]
    return analyse_model(from_arrays(A, np.zeros((n, 1)), np.zeros((1, n)), np.zeros((1, 1)),
                                     name=name, label=label, source=source, sample_period=T,
                                     states=[f"x{i + 1}" for i in range(n)]))


def rules_of(comparison):
    return sorted(f.rule for f in comparison.regressions)


def check(before, after, tol=None, **kw):
    return compare(after, baseline_entry_from(before), tol, **kw)


def test_unchanged_model_has_no_findings():
    r = result(osc(0.3, 2.0), [[-5.0]])
    c = check(r, r)
    assert c.regressions == () and c.improvements == () and not c.failed
    assert all(m.kind == "matched" for m in c.matched)


# ------------------------------------------------------------------ EG201

def test_crossed_into_instability():
    c = check(result(osc(0.1, 2.0), [[-5.0]]), result(osc(-0.05, 2.0), [[-5.0]]))
    assert rules_of(c) == ["EG201", "EG204"]  # a stable focus became a saddle, too
    f = next(f for f in c.regressions if f.rule == "EG201")
    # before: Re s = -zeta wn = -0.2; after: +0.1 (standard form)
    assert f.severity == "error" and "→" in f.message and "crossed into instability" in f.message
    assert f.before[0].s.real == pytest.approx(-0.2) and f.modes[0].s.real == pytest.approx(0.1)
    assert f.modes[0].top_states and f.threshold == pytest.approx(0.2)
    assert not any(f.rule == "EG202" for f in c.regressions)  # not reported twice


def test_stabilised_mode_is_an_improvement():
    c = check(result(osc(-0.05, 2.0), [[-5.0]]), result(osc(0.1, 2.0), [[-5.0]]))
    assert c.regressions == () and not c.failed
    assert {i.figure for i in c.improvements} >= {"stability", "equilibrium"}


def test_unstable_mode_appearing_is_a_crossing():
    c = check(result([[-1.0]], [[-4.0]]), result([[-1.0]], [[-4.0]], [[0.5]]))
    assert "EG201" in rules_of(c) and "EG206" not in rules_of(c)
    eg204 = next(f for f in c.regressions if f.rule == "EG204")
    assert "saddle" in eg204.message  # a saddle appeared


# ------------------------------------------------------------------ EG202

@pytest.mark.parametrize("after, fires", [(-0.9, True), (-0.97, False), (-1.2, False)])
def test_decay_rate_regressed(after, fires):
    # default tolerance: a drop counts beyond max(1e-6, 5 % of the baseline decay rate)
    c = check(result([[-1.0]], [[-10.0]]), result([[after]], [[-10.0]]))
    assert (rules_of(c) == ["EG202"]) is fires
    if fires:
        f = c.regressions[0]
        assert "1 → 0.9 1/s" in f.message and "-10.0 %" in f.message
        assert f.margin < 0 and f.measured == pytest.approx(0.9)
    if after == -1.2:
        assert [i.figure for i in c.improvements] == ["decay_rate"]


def test_decay_tolerance_is_configurable():
    loose = Tolerances(decay_rate=Tolerance(abs=0.5, rel=0.0))
    assert rules_of(check(result([[-1.0]]), result([[-0.9]]), loose)) == []
    strict = Tolerances(decay_rate=Tolerance(abs=0.0, rel=0.01))
    assert rules_of(check(result([[-1.0]]), result([[-0.97]]), strict)) == ["EG202"]


def test_discrete_decay_rate_uses_the_s_plane():
    # z = e^{sT}: a pole moving from z = 0.8 to z = 0.9 slows from ln(0.8)/T to ln(0.9)/T.
    T = 0.05
    c = check(result([[0.8]], [[0.1]], T=T), result([[0.9]], [[0.1]], T=T))
    f = next(f for f in c.regressions if f.rule == "EG202")
    assert f.threshold == pytest.approx(-math.log(0.8) / T)
    assert f.measured == pytest.approx(-math.log(0.9) / T)


def test_new_slow_mode_trips_the_whole_model_decay_check():
    # the mode-by-mode check sees only a new mode (a warning); the slowest decay rate of the
    # model fell from 1 to 0.01 1/s, which is a regression
    c = check(result([[-1.0]], osc(0.5, 4.0)), result([[-1.0]], osc(0.5, 4.0), [[-0.01]]))
    assert rules_of(c) == ["EG202", "EG206"]
    f = next(f for f in c.regressions if f.rule == "EG202")
    assert "slowest decay rate" in f.message and f.severity == "error"


# ------------------------------------------------------------------ EG203

@pytest.mark.parametrize("zeta, fires", [(0.25, True), (0.29, False), (0.4, False)])
def test_damping_regressed(zeta, fires):
    # default: a drop counts beyond max(0.005, 5 % of the baseline zeta); the decay rate
    # tolerance is loosened so only damping is judged here
    tol = Tolerances(decay_rate=Tolerance(abs=10.0))
    c = check(result(osc(0.3, 2.0)), result(osc(zeta, 2.0)), tol)
    assert (rules_of(c) == ["EG203"]) is fires
    if zeta == 0.4:
        assert [i.figure for i in c.improvements] == ["damping_ratio"]


def test_real_modes_turning_oscillatory_lose_damping():
    c = check(result(osc(1.5, 2.0)), result(osc(0.5, 2.0)))
    assert "EG203" in rules_of(c) and "EG204" in rules_of(c)  # node → focus


# ------------------------------------------------------------------ EG204

def test_equilibrium_type_changed_to_saddle():
    # a 2-state system with real eigenvalues of opposite sign is a saddle (common practice)
    c = check(result([[-1.0]], [[-2.0]]), result([[-1.0]], [[0.3]]))
    f = next(f for f in c.regressions if f.rule == "EG204")
    assert f.measured == "saddle" and f.threshold == "stable-node"
    assert [m.s.real for m in f.modes] == [pytest.approx(0.3)]  # the unstable direction


def test_integrator_added_changes_center_count():
    c = check(result([[-1.0]], [[-2.0]]), result([[-1.0]], [[-2.0]], [[0.0]]))
    assert "EG204" in rules_of(c)


# ------------------------------------------------------------------ EG205

@pytest.mark.parametrize("wn, fires", [(2.2, True), (1.8, True), (2.05, False)])
def test_frequency_shifted_either_way(wn, fires):
    tol = Tolerances(decay_rate=Tolerance(abs=10.0), damping=Tolerance(abs=1.0))
    c = check(result(osc(0.1, 2.0)), result(osc(0.1, wn)), tol)
    assert (rules_of(c) == ["EG205"]) is fires
    if fires:
        assert c.regressions[0].severity == "warning" and not c.failed


def test_frequency_direction_is_configurable():
    tol = Tolerances(decay_rate=Tolerance(abs=10.0), damping=Tolerance(abs=1.0),
                     frequency=Tolerance(rel=0.05, worse="higher"))
    assert rules_of(check(result(osc(0.1, 2.0)), result(osc(0.1, 2.2)), tol)) == ["EG205"]
    c = check(result(osc(0.1, 2.0)), result(osc(0.1, 1.8)), tol)
    assert rules_of(c) == [] and [i.figure for i in c.improvements] == ["natural_frequency"]


# ------------------------------------------------------------------ EG206-EG209

def test_mode_disappeared():
    c = check(result([[-1.0]], osc(0.4, 3.0), [[-30.0]]), result([[-1.0]], osc(0.4, 3.0)))
    assert rules_of(c) == ["EG207"]
    f = c.regressions[0]
    assert f.severity == "warning" and f.modes[0].s.real == pytest.approx(-30.0)


def test_new_model():
    c = compare(result([[-1.0]]), None)
    assert rules_of(c) == ["EG208"] and not c.failed


def test_compare_all_new_and_stale(tmp_path):
    (tmp_path / "models").mkdir()
    path = tmp_path / "models" / "mast.yaml"
    path.write_text(textwrap.dedent("""\
        model_format: 1
        name: mast
        plant:
          A: [[0, 1], [-9, -0.6]]
        operating_points:
          - label: calm
          - label: storm
            plant: {A: [[0, 1], [-9, -0.3]]}
        """), encoding="utf-8")
    fr = check_file(path, root=tmp_path)
    accepted = Baseline([baseline_entry_from(r) for r in fr.results], path="bl.json")
    # the baseline also knows a removed operating point and a deleted file
    ghost = baseline_entry_from(result([[-1.0]], name="mast", label="gale",
                                       source="models/mast.yaml"))
    gone = baseline_entry_from(result([[-1.0]], name="old", source="models/old.yaml"))
    text = accepted.updated([ghost, gone]).dump()
    bl = Baseline.loads(text, ".eigengate/baseline.json")
    out = compare_all([fr], bl)
    assert out.stale_keys == (("models/mast.yaml", "mast[gale]"),) and out.new_keys == ()
    f = [f for f in out.findings if f.rule == "EG209"][0]
    assert f.source == ".eigengate/baseline.json" and f.line == bl.line_of(ghost.key)
    assert (f.model, f.label) == ("mast", "gale")
    out = compare_all([fr], bl, complete=True)
    assert set(out.stale_keys) == {ghost.key, gone.key}
    out = compare_all([fr], Baseline())
    assert len(out.new_keys) == 2 and [f.rule for f in out.findings] == ["EG208", "EG208"]


def test_broken_file_entries_are_not_stale(tmp_path):
    bad = tmp_path / "broken.yaml"
    bad.write_text("model_format: 1\nplant: {A: [[1, 2]]}\n", encoding="utf-8")
    fr = check_file(bad, root=tmp_path)
    assert fr.error is not None
    bl = Baseline([baseline_entry_from(result([[-1.0]], name="broken", source="broken.yaml"))])
    assert compare_all([fr], bl, complete=True).stale_keys == ()


def test_findings_carry_place_and_modes(tmp_path):
    path = tmp_path / "mast.yaml"
    text = textwrap.dedent("""\
        model_format: 1
        name: mast
        operating_points:
          - label: storm
            plant:
              states: [sway, sway rate]
              A: [[0, 1], [-9, {damp}]]
        """)
    path.write_text(text.format(damp=-0.6), encoding="utf-8")
    before = check_file(path, root=tmp_path).results[0]
    path.write_text(text.format(damp=-0.3), encoding="utf-8")
    after = check_file(path, root=tmp_path).results[0]
    c = compare(after, baseline_entry_from(before))
    f = next(f for f in c.regressions if f.rule == "EG203")
    assert (f.source, f.model, f.label, f.title) == ("mast.yaml", "mast", "storm", "mast[storm]")
    # the line of the entry that changed (A's -0.6 → -0.3, line 7), not of the point
    assert f.line == 7 and f.name == RULES["EG203"].name and f.requirement == "baseline"
    assert f.cause[0].input == "plant.A[1][1]" and (f.cause[0].before, f.cause[0].after) == (
        -0.6, -0.3)
    # zeta = 0.6 / (2 * 3) = 0.1 → 0.05 (standard form)
    assert "0.1 → 0.05" in f.message
    assert {s for s, _ in f.modes[0].top_states} == {"sway", "sway rate"}
    assert f.before[0].damping_ratio == pytest.approx(0.1)


def test_severities_can_be_changed_or_switched_off():
    before, after = result([[-1.0]]), result([[-0.5]])
    assert check(before, after, severities={"EG202": "warning"}).regressions[0].severity == \
        "warning"
    assert check(before, after, severities={"EG202": "off"}).regressions == ()


def test_every_regression_rule_is_registered():
    for rid in DEFAULT_SEVERITY:
        assert rid in RULES and RULES[rid].id == rid


# ------------------------------------------------------------------ tolerance blocks

def test_parse_tolerances_layers():
    repo = parse_tolerances({"damping": {"abs": 0.01}, "match_gate": 1.2}, "pyproject.toml",
                            "allowed_drift.")
    assert repo.damping == Tolerance(abs=0.01, rel=0.05, worse="lower")
    assert repo.match_gate == 1.2
    model = parse_tolerances({"frequency": {"rel": 0.1, "worse": "higher"}}, "m.yaml",
                             base=repo)
    assert model.damping.abs == 0.01 and model.frequency == Tolerance(1e-6, 0.1, "higher")
    assert parse_tolerances({}, "m.yaml") == Tolerances()


@pytest.mark.parametrize("value, field, fragment", [
    ({"dampnig": {"abs": 0.1}}, "allowed_drift.dampnig", "did you mean 'damping'"),
    ({"damping": 0.1}, "allowed_drift.damping", "must be a mapping"),
    ({"damping": {"abs": -1}}, "allowed_drift.damping.abs", "non-negative"),
    ({"damping": {"rel": True}}, "allowed_drift.damping.rel", "non-negative"),
    ({"frequency": {"worse": "up"}}, "allowed_drift.frequency.worse", "lower, higher, either"),
    ({"frequency": {"tol": 1}}, "allowed_drift.frequency.tol", "not a tolerance field"),
    ({"match_gate": 0}, "allowed_drift.match_gate", "positive"),
    ([1, 2], "allowed_drift", "must be a mapping"),
])
def test_parse_tolerances_errors(value, field, fragment):
    with pytest.raises(ModelError) as info:
        parse_tolerances(value, "m.yaml", "allowed_drift.",
                         lines={"allowed_drift": 7, "allowed_drift.damping": 8})
    err = info.value
    assert err.field == field and fragment in str(err) and err.line in (7, 8)


def test_finding_before_survives_the_cache_round_trip():
    # Finding.before is new: a cached (pre-waiver) finding must come back equal and hashable
    import json

    from eigengate.scan.serial import results_from_data, results_to_data
    from eigengate.rules.requirements import MinDamping

    m = from_arrays(osc(0.1, 2.0), np.zeros((2, 1)), np.zeros((1, 2)), np.zeros((1, 1)),
                    requirements=(MinDamping(0.5),))
    r = analyse_model(m)
    data, blobs = results_to_data("m", [r], None)
    _, (back,), _ = results_from_data(json.loads(json.dumps(data)), blobs)
    assert back.findings == r.findings and back.findings[0].before == ()
    hash(back.findings[0])
