"""Bad settings stop the run with a usage error that quotes the key and the value: the
[tool.eigengate] table, the ini keys and the command-line options."""

import pytest


def usage_error(project, *args):
    result = project.pytester.runpytest(*args)
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    assert "Traceback" not in result.stdout.str() + result.stderr.str()
    return result


def test_bad_policy_value_is_the_config_error_text(project):
    project.pyproject('on_uncertain = "maybe"\n')
    result = usage_error(project)
    result.stderr.fnmatch_lines([
        "ERROR: eigengate: pyproject.toml: [tool.eigengate] on_uncertain must be 'fail' or "
        "'pass', got 'maybe'",
    ])


def test_unknown_policy_key_suggests_the_close_one(project):
    project.pyproject('inclde = ["models/**/*.yaml"]\n')
    result = usage_error(project)
    result.stderr.fnmatch_lines([
        "ERROR: eigengate: pyproject.toml: [tool.eigengate] inclde is not a known key "
        "(did you mean 'include'?)",
    ])


def test_bad_policy_requirement_names_the_field(project):
    project.pyproject("[tool.eigengate.requirements]\nmin_damping = 2\n")
    result = usage_error(project)
    result.stderr.fnmatch_lines([
        "ERROR: eigengate: pyproject.toml: [tool.eigengate] requirements.min_damping must be "
        "a non-negative number at most 1, got 2",
    ])


def test_bad_ini_values(project):
    project.write("pytest.ini", "[pytest]\neigengate_collect = maybe\n")
    result = usage_error(project)
    result.stderr.fnmatch_lines(["ERROR: eigengate: ini option eigengate_collect: *'maybe'*"])

    project.write("pytest.ini", "[pytest]\neigengate_config = settings/missing.toml\n")
    result = usage_error(project)
    result.stderr.fnmatch_lines([
        "ERROR: eigengate: ini option eigengate_config = 'settings/missing.toml': no such "
        "file (expected a pyproject.toml with [[]tool.eigengate[]] or an eigengate.toml)",
    ])


def test_bad_options(project):
    result = usage_error(project, "--eigengate-config", "nowhere.toml")
    result.stderr.fnmatch_lines(["ERROR: eigengate: --eigengate-config 'nowhere.toml': no such "
                                 "file*"])
    result = usage_error(project, "--eigengate-models", "/srv/models/*.yaml")
    result.stderr.fnmatch_lines([
        "ERROR: eigengate: --eigengate-models '/srv/models/*.yaml': globs are relative to the "
        "repository root and use '/', e.g. models/**/*.yaml",
    ])


def test_policy_file_given_by_ini_key(project):
    # a policy file of another name is found only through the key; its folder is the root
    project.write("policy.toml", 'include = ["models/**/*.yaml"]\n')
    project.write("models/lift.yaml", project.LIFT)
    project.write("pytest.ini", "[pytest]\neigengate_config = policy.toml\n")
    result = project.pytester.runpytest("--collect-only", "-q", "models")
    result.stdout.fnmatch_lines(["models/lift.yaml::shuttle-lift-axis"])
