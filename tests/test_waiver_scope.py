"""Policy waivers are judged unused (EG003) only when their scope was fully checked: a run of
part of the repository (the pre-commit hook's changed files) says nothing about a waiver whose
model files were not part of it. The CLI as a subprocess."""

import pytest

from support import ROLL, oscillator, run_cli, write

POLICY = """\
    [tool.eigengate]
    include = ["models/**/*.yaml"]

    [tool.eigengate.requirements]
    stable = true

    [[tool.eigengate.waivers]]
    rule = "EG103"
    reason = "mast retune scheduled"
    paths = ["models/mast/*.yaml"]
    """

@pytest.fixture
def repo(tmp_path):
    write(tmp_path / "pyproject.toml", POLICY)
    # the oscillator has zeta 0.1 < 0.3 (see support.oscillator): the waiver is in use
    (tmp_path / "models" / "mast").mkdir(parents=True)
    (tmp_path / "models" / "mast" / "upper.yaml").write_text(oscillator("upper"), "utf-8")
    (tmp_path / "models" / "mast" / "lower.yaml").write_text(oscillator("lower", None),
                                                              "utf-8")
    write(tmp_path / "models" / "roll.yaml", ROLL)
    return tmp_path


def rules(proc):
    return [line.split()[1] for line in proc.stdout.splitlines()
            if line.strip().startswith(("FAIL", "warn")) and "EG" in line]


def test_waiver_outside_a_partial_run_is_not_called_unused(repo):
    proc = run_cli("check", "--no-baseline", "models/roll.yaml", cwd=repo)
    assert proc.returncode == 0, proc.stdout
    assert "EG003" not in proc.stdout


def test_waiver_partly_inside_a_partial_run_is_not_judged(repo):
    # lower.yaml matches the waiver's paths and has no finding, but upper.yaml was not run
    proc = run_cli("check", "--no-baseline", "models/mast/lower.yaml", cwd=repo)
    assert "EG003" not in proc.stdout, proc.stdout


def test_waiver_whose_scope_was_fully_checked_is_judged(repo):
    (repo / "models" / "mast" / "upper.yaml").write_text(oscillator("upper", None), "utf-8")
    # every file of the waiver's scope is in this run, and none needs it: unused
    proc = run_cli("check", "--no-baseline", "models/mast", cwd=repo)
    assert "EG003" in proc.stdout, proc.stdout
    whole = run_cli("check", "--no-baseline", cwd=repo)
    assert "EG003" in whole.stdout, whole.stdout


def test_waiver_in_use_in_a_full_run_is_not_reported(repo):
    proc = run_cli("check", "--no-baseline", cwd=repo)
    assert "EG003" not in proc.stdout and proc.returncode == 0, proc.stdout


def test_hook_run_on_one_changed_file_keeps_the_waiver(repo):
    proc = run_cli("check", "--quiet", "--no-baseline", "--changed-files", "models/roll.yaml",
                   cwd=repo)
    assert proc.returncode == 0 and "EG003" not in proc.stdout, proc.stdout
