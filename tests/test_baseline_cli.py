"""The baseline workflow from the command line, on real temporary git repositories."""

import json
import subprocess

import pytest
from support import lift_axis, run_cli

GIT = ["git", "-c", "user.name=Test Bench", "-c", "user.email=bench@example.invalid",
       "-c", "commit.gpgsign=false"]


def git(*args, cwd):
    subprocess.run([*GIT, *args], cwd=cwd, check=True, capture_output=True)


lift = lift_axis  # see support.lift_axis for the closed-loop poles


@pytest.fixture
def repo(tmp_path):
    git("init", "-q", cwd=tmp_path)
    (tmp_path / "models").mkdir()
    (tmp_path / "models" / "lift.yaml").write_text(lift(2.08), encoding="utf-8")
    (tmp_path / "models" / "spare.yaml").write_text(
        "model_format: 1\nname: spare\nplant:\n  A: [[-3]]\nrequirements:\n  stable: true\n",
        encoding="utf-8")  # one pole at -3: stable (Hurwitz)
    return tmp_path


def test_accept_retune_fail_accept_again_and_stale_entries(repo):
    first = run_cli("check", cwd=repo)
    assert first.returncode == 0
    assert "no baseline yet" in first.stdout and "eigengate baseline accept" in first.stdout
    assert not (repo / ".eigengate").exists()  # nothing is written without the accept step

    accepted = run_cli("baseline", "accept", cwd=repo)
    assert accepted.returncode == 0, accepted.stderr
    assert "2 added" in accepted.stdout
    path = repo / ".eigengate" / "baseline.json"
    text = path.read_text(encoding="utf-8")
    assert json.loads(text)["format_version"] == 1
    again = run_cli("baseline", "accept", cwd=repo)
    assert "2 unchanged" in again.stdout and path.read_text(encoding="utf-8") == text

    assert run_cli("check", cwd=repo).returncode == 0

    (repo / "models" / "lift.yaml").write_text(lift(1.2), encoding="utf-8")
    retuned = run_cli("check", cwd=repo)
    assert retuned.returncode == 1
    assert "EG202 decay-rate-regressed" in retuned.stdout
    assert "-1.9±2.09523j" in retuned.stdout  # the moved mode, after the retune
    assert "pos" in retuned.stdout and "vel" in retuned.stdout
    assert "eigengate baseline accept" in retuned.stdout

    assert run_cli("baseline", "accept", cwd=repo).returncode == 0
    assert run_cli("check", cwd=repo).returncode == 0

    (repo / "models" / "spare.yaml").unlink()
    stale = run_cli("check", cwd=repo)
    assert "EG209 stale-baseline-entry" in stale.stdout and "spare" in stale.stdout
    removed = run_cli("baseline", "accept", cwd=repo)
    assert "1 removed" in removed.stdout


def test_corrupt_baseline_is_a_clear_error(repo):
    run_cli("baseline", "accept", cwd=repo)
    path = repo / ".eigengate" / "baseline.json"
    path.write_text(path.read_text(encoding="utf-8").replace('"format_version": 1',
                                                             '"format_version": 7'),
                    encoding="utf-8")
    out = run_cli("check", cwd=repo)
    assert out.returncode == 2
    assert "baseline.json" in out.stderr and "newer" in out.stderr
    path.write_text('{"format_version": 1, "models": {', encoding="utf-8")
    out = run_cli("check", cwd=repo)
    assert out.returncode == 2 and "baseline.json:1" in out.stderr


def test_compare_with_a_git_revision_handles_retune_rename_and_deletion(repo):
    git("add", "-A", cwd=repo)
    git("commit", "-qm", "first models", cwd=repo)
    base = subprocess.run(["git", "rev-parse", "HEAD"], cwd=repo, capture_output=True,
                          text=True, check=True).stdout.strip()
    git("mv", "models/lift.yaml", "models/lift_axis.yaml", cwd=repo)
    git("commit", "-qm", "rename", cwd=repo)
    (repo / "models" / "lift_axis.yaml").write_text(lift(1.2), encoding="utf-8")
    git("rm", "-q", "models/spare.yaml", cwd=repo)
    git("commit", "-qam", "retune and remove", cwd=repo)
    out = run_cli("check", "--against", base, cwd=repo)
    assert out.returncode == 1, out.stderr
    assert "models/lift_axis.yaml" in out.stdout and "EG202 decay-rate-regressed" in out.stdout
    assert "EG208" not in out.stdout  # the renamed model compares against its old self
    assert not (repo / ".eigengate").exists()
    bad = run_cli("check", "--against", "no-such-revision", cwd=repo)
    assert bad.returncode == 2 and "no-such-revision" in bad.stderr
