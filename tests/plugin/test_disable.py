"""``-p no:eigengate`` switches everything off: options, collector, fixture and markers."""


def test_marker_free_suite_runs_clean_without_the_plugin(project):
    project.pyproject('include = ["models/**/*.yaml"]\n')
    project.standard_models()
    project.write("tests/test_plain.py", "def test_plain():\n    assert 1 + 1 == 2\n")
    result = project.pytester.runpytest("-p", "no:eigengate", "--strict-markers")
    result.assert_outcomes(passed=1)  # the model files are not collected
    assert "eigengate" not in result.stdout.str()
    help_text = project.pytester.runpytest("-p", "no:eigengate", "--help").stdout.str()
    assert "--eigengate-config" not in help_text
    assert "--eigengate-config" in project.pytester.runpytest("--help").stdout.str()


def test_fixture_and_markers_are_gone(project):
    project.write("tests/test_uses.py", """\
        import pytest

        def test_fixture(stability):
            pass

        @pytest.mark.expect_equilibrium("stable-node")
        def test_marker():
            pass
        """)
    # A subprocess: within one process pytest remembers marker names seen by earlier runs.
    result = project.pytester.runpytest_subprocess("-p", "no:eigengate")
    # --strict-markers (in the project's addopts): the unknown marker is a collection error
    result.stdout.fnmatch_lines(["*'expect_equilibrium' not found in `markers` configuration "
                                 "option*"])
    (project.path / "tests" / "test_uses.py").write_text(
        "def test_fixture(stability):\n    pass\n", encoding="utf-8")
    result = project.pytester.runpytest("-p", "no:eigengate")
    result.assert_outcomes(errors=1)
    result.stdout.fnmatch_lines(["*fixture 'stability' not found*"])
