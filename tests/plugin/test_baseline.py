"""Baselines in the pytest plugin: model items compare with the accepted baseline, and
--eigengate-accept writes it (once per process, locked and atomic, so pytest-xdist workers
accepting at once lose nothing); the summary counts what changed and prints the commands."""

import json
import re
import subprocess
import sys

import pytest
from support import lift_axis

from eigengate.baseline.store import Baseline

POLICY = 'include = ["models/**/*.yaml"]\n'
BASELINE = ".eigengate/baseline.json"


lift = lift_axis  # see support.lift_axis for the closed-loop poles


def first_order(name: str, poles: dict[str, float]) -> str:
    # ẋ = a x has its one pole at a (first-order system, common in control textbooks).
    points = "".join(f"  - label: {label}\n    plant: {{states: [x], A: [[{a}]]}}\n"
                     for label, a in poles.items())
    return f"model_format: 1\nname: {name}\nrequirements:\n  stable: true\n" \
           f"operating_points:\n{points}"


SPARE = ("model_format: 1\nname: spare\nplant:\n  A: [[-3]]\n"  # one pole at -3 (Hurwitz)
         "requirements:\n  stable: true\n")


def build(project):
    project.pyproject(POLICY)
    project.write("models/lift.yaml", lift(2.08))
    project.write("models/spare.yaml", SPARE)


def entries(project):
    return Baseline.load(project.path / BASELINE).keys()


def test_first_run_writes_nothing_then_accept_then_pass(project):
    build(project)
    first = project.pytester.runpytest()
    first.assert_outcomes(passed=2)
    first.stdout.fnmatch_lines([
        "*= eigengate: baseline =*",
        "no baseline yet (.eigengate/baseline.json): 2 models not compared; to accept the "
        "current models as the baseline: pytest --eigengate-accept",
    ])
    assert not (project.path / ".eigengate").exists()  # nothing without the accept step

    accepted = project.pytester.runpytest("--eigengate-accept")
    accepted.assert_outcomes(passed=2)
    accepted.stdout.fnmatch_lines([
        "eigengate: accepting the collected models into .eigengate/baseline.json",
        "*= eigengate: baseline =*",
        "baseline .eigengate/baseline.json: 2 models accepted: 2 added, 0 changed, "
        "0 unchanged",
    ])
    assert entries(project) == [("models/lift.yaml", "lift"), ("models/spare.yaml", "spare")]
    text = (project.path / BASELINE).read_text(encoding="utf-8")
    # poles -2 and -4 of s² + 6s + 8 (see lift()), least stable first
    modes = json.loads(text)["models"]["models/lift.yaml"]["lift"]["modes"]
    assert [m["eigenvalue"] for m in modes] == [[-2, 0], [-4, 0]]

    again = project.pytester.runpytest()
    again.assert_outcomes(passed=2)
    assert "eigengate: baseline" not in again.stdout.str()  # nothing moved: nothing to say

    unchanged = project.pytester.runpytest("--eigengate-accept")
    unchanged.stdout.fnmatch_lines(["*: 2 models accepted: 0 added, 0 changed, 2 unchanged "
                                    "(file unchanged)"])
    assert (project.path / BASELINE).read_text(encoding="utf-8") == text


def test_retune_fails_with_the_moved_mode_and_accepting_again_passes(project):
    build(project)
    project.pytester.runpytest("--eigengate-accept").assert_outcomes(passed=2)
    project.write("models/lift.yaml", lift(1.2))
    result = project.pytester.runpytest("models")
    result.assert_outcomes(passed=1, failed=1)
    result.stdout.fnmatch_lines([
        "*_ models/lift.yaml::lift _*",
        # line 8 of the lift file holds the gain that changed, where the moved mode's
        # regressions are reported (the whole model's, EG204, at the feedback block, line 7)
        "models/lift.yaml:8: lift regressed from its baseline entry (.eigengate/baseline.json)",
        "    pass  EG101 asymptotic-stability  [[]stable: true[]]*",
        "  FAIL  EG202 decay-rate-regressed  [[]baseline[]]  (line 8)",
        # the accepted pole -4 moved to the pair -1.9 ± 2.09523j: decay rate -Re s 4 → 1.9,
        # -52.5 %; the default tolerance is 5 % of 4 = 0.2 (docs/baselines.md)
        "        vel mode -4 → -1.9±2.09523j: decay rate 4 → 1.9 1/s (-2.1, -52.5 %; allowed "
        "±0.2)",
        # the cause: the one input that changed; a real pole turning into a pair is far from
        # a first-order move, and the note says so
        "        cause: mode -4 → -1.9±2.1j: 100 % of the first-order shift comes from "
        "feedback.state_gain[[]0[]][[]1[]] 2.08 → 1.2 (line 8)",
        "        cause: first-order total * differs from the actual move *",
    ])
    result.stdout.fnmatch_lines([
        # one block for the mode all three regressions name, the figures of each first
        "    modes:",
        "        * mode",
        "          EG202 decay-rate-regressed 1.9 1/s (baseline 4 1/s, margin *)",
        "          EG203 damping-regressed 0.6718 (baseline 1, margin *)",
        # ζ 0.672 and ωn 2.828 from the standard form (see lift()); a 2×2 pair's participation
        # factors (λ - a22)/(λ - λ̄) and (λ - a11)/(λ - λ̄) have equal magnitude: 0.50 each
        "          eigenvalue -1.9±2.09523j · ωn 2.828 rad/s · ζ 0.672 · τ * · states pos 0.50, "
        "vel 0.50",
        "            in the baseline: eigenvalue -4 · *",
    ])
    # one block for the mode, not one per rule: the two figures on consecutive lines
    assert re.search(r"\n +[\w-]+ mode\n +EG202 decay-rate-regressed [^\n]*\n +EG203 damping-regressed",
                     result.stdout.str())
    result.stdout.fnmatch_lines([
        # a real pole (ζ = 1) became a pair with ζ = 0.672: -32.8 %
        "  FAIL  EG203 damping-regressed  [[]baseline[]]  (line 8)",
        "        vel mode -4 → -1.9±2.09523j: damping ratio 1 → 0.6718 (-0.3282, -32.8 %*",
    ])
    result.stdout.fnmatch_lines([
        "*= eigengate: baseline =*",
        "baseline .eigengate/baseline.json: 2 models compared: 1 regressed, 0 new (no "
        "baseline entry), 0 stale entries, 0 improvements",
        "regressed: models/lift.yaml::lift (EG202, EG203, EG204)",
        "after review, accept the current models with: pytest --eigengate-accept models",
    ])

    accepted = project.pytester.runpytest("--eigengate-accept", "models")
    accepted.assert_outcomes(passed=2)
    accepted.stdout.fnmatch_lines(["*: 2 models accepted: 0 added, 1 changed, 1 unchanged"])
    project.pytester.runpytest().assert_outcomes(passed=2)


def test_warnings_do_not_fail_and_improvements_and_stale_entries_are_reported(project):
    project.pyproject(POLICY)
    project.write("models/spare.yaml", SPARE)
    project.write("models/drive.yaml", first_order("drive", {"empty": -4.0, "loaded": -2.0}))
    project.pytester.runpytest("--eigengate-accept").assert_outcomes(passed=3)

    (project.path / "models" / "spare.yaml").unlink()
    # point "empty" now decays faster (pole -4 → -5), "loaded" is gone, "towing" is new
    project.write("models/drive.yaml", first_order("drive", {"empty": -5.0, "towing": -1.0}))
    result = project.pytester.runpytest()
    result.assert_outcomes(passed=2)  # EG208 new-model and EG209 stale are warnings
    result.stdout.fnmatch_lines([
        "*= eigengate: baseline =*",
        "baseline .eigengate/baseline.json: 2 models compared: 0 regressed, 1 new (no "
        "baseline entry), 2 stale entries, 1 improvement",
        "new: models/drive.yaml::drive[[]towing[]]",
        "stale: models/drive.yaml::drive[[]loaded[]]: its model file no longer defines it",
        "stale: models/spare.yaml::spare: its model file is gone",
        # decay rate -Re s of ẋ = a x is -a: 4 → 5, +25 % (first-order system)
        "improved: drive[[]empty[]] (models/drive.yaml): x mode -4 → -5: decay rate 4 → 5 1/s*",
        "after review, accept the current models with: pytest --eigengate-accept",
        "remove stale entries with: eigengate baseline accept",
    ])

    accepted = project.pytester.runpytest("--eigengate-accept")
    accepted.stdout.fnmatch_lines([
        "*: 2 models accepted: 1 added, 1 changed, 0 unchanged",
        "2 stale entries kept (pytest --eigengate-accept adds and updates entries, it never "
        "removes one):",
        "  stale: models/drive.yaml::drive[[]loaded[]]: its model file no longer defines it",
        "  stale: models/spare.yaml::spare: its model file is gone",
        "remove stale entries with: eigengate baseline accept",
    ])
    assert ("models/spare.yaml", "spare") in entries(project)

    removed = subprocess.run([sys.executable, "-m", "eigengate", "baseline", "accept"],
                             cwd=project.path, capture_output=True, text=True, timeout=180)
    assert removed.returncode == 0, removed.stderr
    assert entries(project) == [("models/drive.yaml", "drive[empty]"),
                                ("models/drive.yaml", "drive[towing]")]
    assert "eigengate: baseline" not in project.pytester.runpytest().stdout.str()


def test_stale_entries_of_a_file_outside_the_run_name_the_file(project):
    project.pyproject(POLICY)
    project.write("models/drive.yaml", first_order("drive", {"empty": -4.0, "loaded": -2.0}))
    project.pytester.runpytest("--eigengate-accept").assert_outcomes(passed=2)
    project.write("models/drive.yaml", first_order("drive", {"empty": -4.0}))
    result = project.pytester.runpytest("models/drive.yaml")
    result.stdout.fnmatch_lines([
        "stale: models/drive.yaml::drive[[]loaded[]]: its model file no longer defines it",
        "remove stale entries with: eigengate baseline accept models/drive.yaml",
    ])


def test_two_workers_accepting_at_once_write_every_entry_once(project):
    project.pyproject(POLICY)
    # 24 files of one model and one file of 8 operating points, whose items xdist's load
    # scheduling spreads over both workers; pole of model k at -k (first-order system)
    for k in range(1, 25):
        project.write(f"models/axis_{k:02}.yaml", first_order(f"axis-{k}", {"nominal": -k}))
    points = {f"p{i}": -(i + 1.0) for i in range(8)}
    project.write("models/conveyor.yaml", first_order("conveyor", points))
    want = sorted([(f"models/axis_{k:02}.yaml", f"axis-{k}[nominal]") for k in range(1, 25)]
                  + [("models/conveyor.yaml", f"conveyor[{p}]") for p in points])

    result = project.pytester.runpytest_subprocess("-n", "2", "--eigengate-accept")
    result.assert_outcomes(passed=32)
    result.stdout.fnmatch_lines([
        "created: 2/2 workers",
        "*= eigengate: baseline =*",
        "baseline .eigengate/baseline.json: 32 models accepted: 32 added, 0 changed, "
        "0 unchanged",
    ])
    text = (project.path / BASELINE).read_text(encoding="utf-8")
    data = json.loads(text)  # valid JSON
    assert sum(len(titles) for titles in data["models"].values()) == 32  # no duplicate
    assert Baseline.loads(text, BASELINE).keys() == want  # every entry, once, valid
    assert not list((project.path / ".eigengate").glob("*.lock"))
    assert not list((project.path / ".eigengate").glob(".tmp-*"))

    # one point removed: exactly its entry is stale, though no worker saw the whole file
    del points["p3"]
    project.write("models/conveyor.yaml", first_order("conveyor", points))
    again = project.pytester.runpytest_subprocess("-n", "2")
    again.assert_outcomes(passed=31)
    again.stdout.fnmatch_lines([
        "baseline .eigengate/baseline.json: 31 models compared: 0 regressed, 0 new (no "
        "baseline entry), 1 stale entry, 0 improvements",
        "stale: models/conveyor.yaml::conveyor[[]p3[]]: its model file no longer defines it",
    ])


@pytest.mark.parametrize("args", [(), ("--eigengate-accept",)], ids=["compare", "accept"])
def test_corrupt_baseline_is_a_usage_error_naming_the_file(project, args):
    build(project)
    project.write(BASELINE, '{"format_version": 1, "models": {"models/lift.yaml": 3}}\n')
    result = project.pytester.runpytest(*args)
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines([
        "ERROR: eigengate: .eigengate/baseline.json:1: model file 'models/lift.yaml' must be "
        "a non-empty object of model titles (restore the file from version control, or "
        "accept again)",
    ])
    assert "Traceback" not in result.stdout.str() + result.stderr.str()


def test_corrupt_baseline_under_xdist_stops_before_the_workers(project):
    build(project)
    project.write(BASELINE, '{"format_version": 7, "models": {}}\n')
    result = project.pytester.runpytest_subprocess("-n", "2")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines([
        "ERROR: eigengate: .eigengate/baseline.json:1: format_version is 7: the file was "
        "written by a newer eigengate (this one reads format_version 1) (upgrade eigengate)",
    ])
    assert "INTERNALERROR" not in result.stdout.str() + result.stderr.str()


def test_accept_needs_collection(project):
    build(project)
    result = project.pytester.runpytest("--eigengate-accept", "--eigengate-no-collect")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines([
        "ERROR: eigengate: --eigengate-accept accepts the collected model files, but "
        "--eigengate-no-collect turns collection off; drop one of them",
    ])


def test_a_failed_write_is_reported_and_fails_the_run(project):
    build(project)
    (project.path / BASELINE).mkdir(parents=True)  # a folder where the file should be
    result = project.pytester.runpytest("--eigengate-accept")
    result.assert_outcomes(passed=2)
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stdout.fnmatch_lines([
        "*= eigengate: baseline =*",
        "baseline .eigengate/baseline.json: 2 models accepted: 0 added, 0 changed, 0 unchanged",
        "not written: .eigengate/baseline.json: cannot be read: *",
    ])
