"""The model-file collector: selection by [tool.eigengate] and the options, one item per
operating point, failures that point at the file, malformed files, agreement with the CLI."""

from eigengate.scan.config import load_config
from eigengate.scan.engine import check_paths

POLICY = """\
include = ["models/**/*.yaml"]
exclude = ["models/attic/**"]
"""


def build(project, policy=POLICY):
    project.pyproject(policy)
    project.standard_models()
    project.write("models/broken.yaml", project.BROKEN)
    project.write("models/attic/old.yaml", project.LIFT)          # excluded
    project.write("models/notes.json", '{"model_format": 1}')    # not included
    project.write("tests/test_ok.py", "def test_ok():\n    pass\n")


def collected(result):
    return sorted(line for line in result.stdout.lines if "::" in line)


def test_items_are_named_by_file_and_operating_point(project):
    build(project)
    result = project.pytester.runpytest("--collect-only", "-q")
    assert collected(result) == [
        "models/broken.yaml::broken",
        "models/mast/sway.yaml::mast-sway-damper",
        "models/shuttle/drive_speed.yaml::shuttle-drive-speed[empty]",
        "models/shuttle/drive_speed.yaml::shuttle-drive-speed[full-load]",
        "models/shuttle/drive_speed.yaml::shuttle-drive-speed[half-load]",
        "models/shuttle/lift_axis.yaml::shuttle-lift-axis",
        "tests/test_ok.py::test_ok",
    ]


def test_failures_point_at_the_file_and_a_bad_file_does_not_stop_the_others(project):
    build(project)
    result = project.pytester.runpytest()
    # drive (3 points), lift and test_ok pass; sway fails; broken errors
    result.assert_outcomes(passed=5, failed=1, errors=1)
    result.stdout.fnmatch_lines([
        "*_ models/mast/sway.yaml::mast-sway-damper _*",
        # line 14 of the sway file (conftest.py) holds min_damping
        "models/mast/sway.yaml:14: mast-sway-damper does not meet its requirements",
        "    pass  EG101 asymptotic-stability  [[]stable: true[]]*",
        "  FAIL  EG103 damping-ratio  [[]min_damping: 0.3[]]  (line 14)",
        "*eigenvalue * · states sway_rate *, sway_angle *",  # the sway pair: angle and rate
    ])
    result.stdout.fnmatch_lines([
        # the A matrix is on line 4 of the broken file (written in conftest.py)
        "models/broken.yaml:4: plant.A must be square, got 2×3",
    ])
    result.stdout.fnmatch_lines([
        "*= eigengate: models failing their requirements =*",
        "models/broken.yaml:4: broken  (models/broken.yaml::broken)",
        "  EG001 invalid-model: models/broken.yaml:4: plant.A must be square, got 2×3",
        "models/mast/sway.yaml:14: mast-sway-damper  (models/mast/sway.yaml::mast-sway-damper)",
        "  EG103 damping-ratio [[]min_damping: 0.3[]]: 1 mode violates damping ratio ≥ 0.3*",
    ])
    assert "Traceback" not in result.stdout.str()


def test_reportinfo_gives_the_file_and_line(project):
    build(project)
    reprec = project.pytester.inline_run()
    failed = {r.nodeid: r for r in reprec.getreports("pytest_runtest_logreport")
              if r.failed}
    sway = failed["models/mast/sway.yaml::mast-sway-damper"]
    # 0-based line 11: the `requirements:` key is line 12 of the file in conftest.py
    assert sway.location == ("models/mast/sway.yaml", 11,
                             "models/mast/sway.yaml::mast-sway-damper")
    assert failed["models/broken.yaml::broken"].when == "setup"
    assert failed["models/broken.yaml::broken"].location[:2] == ("models/broken.yaml", 3)


def test_repository_policy_decides_exactly_as_the_cli(project):
    # The override asks the drive loop for a decay rate of 1.5 1/s: its full-load point
    # (A = [[-1]], decay rate 1) fails, half-load (2) passes. The lift axis is a stable node:
    # its expected focus fails EG106, downgraded to a warning, so the item passes.
    build(project, POLICY + """\
        [tool.eigengate.severity]
        EG106 = "warning"
        [[tool.eigengate.overrides]]
        paths = ["models/shuttle/drive_*.yaml"]
        requirements = { min_decay_rate = 1.5 }
        """)
    project.write("models/shuttle/lift_axis.yaml",
                  project.LIFT.replace("equilibrium: stable-node", "equilibrium: stable-focus"))
    (project.path / "models" / "broken.yaml").unlink()
    reprec = project.pytester.inline_run()
    outcomes = {r.nodeid.split("::", 1)[1]: r.outcome
                for r in reprec.getreports("pytest_runtest_logreport")
                if r.when == "call" and r.nodeid.startswith("models/")}
    policy = load_config(start=project.path)
    cli = {r.model.title: "failed" if any(f.severity == "error" for f in r.findings)
           else "passed"
           for fr in check_paths([project.path / "models"], config=policy) for r in fr.results}
    assert outcomes == cli
    assert outcomes == {"mast-sway-damper": "failed", "shuttle-lift-axis": "passed",
                        "shuttle-drive-speed[empty]": "passed",
                        "shuttle-drive-speed[half-load]": "passed",
                        "shuttle-drive-speed[full-load]": "failed"}


def test_options_narrow_supply_and_switch_off_collection(project):
    build(project)
    narrowed = project.pytester.runpytest("--collect-only", "-q",
                                          "--eigengate-models", "models/shuttle/**")
    assert [i for i in collected(narrowed) if i.startswith("models/")] == [
        "models/shuttle/drive_speed.yaml::shuttle-drive-speed[empty]",
        "models/shuttle/drive_speed.yaml::shuttle-drive-speed[full-load]",
        "models/shuttle/drive_speed.yaml::shuttle-drive-speed[half-load]",
        "models/shuttle/lift_axis.yaml::shuttle-lift-axis",
    ]
    off = project.pytester.runpytest("--collect-only", "-q", "--eigengate-no-collect")
    assert collected(off) == ["tests/test_ok.py::test_ok"]

    # no [tool.eigengate]: the ini key supplies the globs, or a file is named explicitly
    project.pyproject(None, ini=INI_WITH_MODELS)
    supplied = project.pytester.runpytest("--collect-only", "-q")
    assert collected(supplied) == ["models/mast/sway.yaml::mast-sway-damper",
                                   "tests/test_ok.py::test_ok"]
    project.pyproject(None)
    named = project.pytester.runpytest("--collect-only", "-q", "models/shuttle/lift_axis.yaml")
    assert collected(named) == ["models/shuttle/lift_axis.yaml::shuttle-lift-axis"]
    project.pyproject(POLICY, ini=INI_NO_COLLECT)
    ini_off = project.pytester.runpytest("--collect-only", "-q")
    assert collected(ini_off) == ["tests/test_ok.py::test_ok"]


INI_WITH_MODELS = """\
[tool.pytest.ini_options]
testpaths = ["tests", "models"]
filterwarnings = ["error"]
eigengate_models = ["models/mast/*.yaml"]
"""

INI_NO_COLLECT = """\
[tool.pytest.ini_options]
testpaths = ["tests", "models"]
filterwarnings = ["error"]
eigengate_collect = false
"""


def test_suffix_list_matches_the_engine():
    # the plugin keeps its own copy so that deciding about a file imports nothing
    from eigengate.scan.engine import MODEL_SUFFIXES
    from eigengate.pytest.plugin import MODEL_SUFFIXES as plugin_suffixes

    assert set(MODEL_SUFFIXES) == plugin_suffixes
