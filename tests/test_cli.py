"""The command line as a real subprocess: verdicts, findings with offending modes, exit codes."""

from pathlib import Path

import pytest
from support import oscillator, run_cli, write

EXAMPLE = Path(__file__).resolve().parents[1] / "example_repo"


def _make_repo(tmp_path):
    (tmp_path / ".git").mkdir()
    write(tmp_path / "models" / "osc.yaml", oscillator())  # ζ = 0.1 < 0.3: EG103
    write(tmp_path / "models" / "fine.yaml", """\
        model_format: 1
        name: fine
        plant:
          A: [[-1, 0], [0, -2]]
        requirements:
          stable: true
        """)
    return tmp_path


@pytest.fixture
def repo(tmp_path):
    return _make_repo(tmp_path)


@pytest.fixture(scope="module")
def checked(tmp_path_factory):
    """(repository, result) of ``check models`` run once for the tests that only read it."""
    root = _make_repo(tmp_path_factory.mktemp("repo"))
    return root, run_cli("check", "models", cwd=root)


def test_failing_requirement_names_mode_and_states(checked):
    _, out = checked
    assert out.returncode == 1, out.stderr
    text = out.stdout
    assert "models/osc.yaml" in text and "EG103 damping-ratio" in text
    assert "-0.2±1.98997j" in text  # -ζωn ± jωn√(1-ζ²) with ζ = 0.1, ωn = 2
    assert "angle" in text and "rate" in text
    assert "fine: ok" in text
    assert "\n2 files, 2 models checked: 1 failing model (1 error finding), 0 warnings\n" in text


def test_clean_repository_exits_zero(repo):
    out = run_cli("check", "models/fine.yaml", cwd=repo)
    assert out.returncode == 0, out.stdout + out.stderr
    assert "EG101 asymptotic-stability" in out.stdout


def test_bad_file_is_a_finding_and_others_still_run(repo):
    write(repo / "models" / "broken.yaml", """\
        model_format: 1
        plant:
          A: [[1, 2, 3], [4, 5, 6]]
        """)
    out = run_cli("check", "models", cwd=repo)
    assert out.returncode == 1
    assert "EG001 invalid-model" in out.stdout
    assert "plant.A must be square, got 2×3" in out.stdout
    assert "Traceback" not in out.stdout + out.stderr
    assert "fine: ok" in out.stdout and "osc: FAILED" in out.stdout


def test_usage_errors_exit_two(repo):
    out = run_cli("check", "nowhere.yaml", cwd=repo)
    assert out.returncode == 2 and "no such file" in out.stderr
    out = run_cli("check", "--jobs", "0", cwd=repo)
    assert out.returncode == 2 and "--jobs must be at least 1, got 0" in out.stderr
    out = run_cli("check", "--output", "pdf:x.pdf", cwd=repo)
    assert out.returncode == 2 and "'pdf:x.pdf'" in out.stderr
    assert run_cli("--no-such-option", cwd=repo).returncode == 2


def test_default_command_checks_the_repository_root(repo):
    out = run_cli(cwd=repo / "models")
    assert out.returncode == 1
    assert "models/osc.yaml" in out.stdout and "models/fine.yaml" in out.stdout


def test_output_is_deterministic(checked):
    root, first = checked  # a second process in the same repository
    assert first.stdout == run_cli("check", "models", cwd=root).stdout


def test_example_repo_shows_the_deliberate_regression():
    out = run_cli("check", "--no-cache", str(EXAMPLE))
    assert out.returncode == 1, out.stderr
    text = out.stdout
    assert "mast-sway-damper: FAILED" in text
    # exactly two models fail: the mast's retune and the one retuned point of the belt grid
    assert "belt-tension[speed=1.5,load=800]: FAILED" in text
    assert text.count(": FAILED") == 2
    assert "sway_rate" in text and "sway_angle" in text
    for rule in ("EG103 damping-ratio", "EG202 decay-rate-regressed", "EG203 damping-regressed"):
        assert rule in text
    assert "EG001" not in text
    assert "2 failing models (5 error findings)" in text
    assert "speed=1.5,load=800  FAILED (regressed)" in text  # the grid's table names it
