"""`check --against REV` loads the old revision under the repository's own policy: vector-field
models are compared with their old selves (their module read from the revision, not from the
working tree), and a model that cannot be loaded at REV is a finding of its own (EG210), never
a "new model"."""

import json
import shutil
import sys

import pytest

from support import boom_files, git, run_cli, write

pytestmark = pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed")





POLICY = '[tool.eigengate]\ninclude = ["models/**/*.yaml"]\nallow_python = true\n'


@pytest.fixture
def repo(tmp_path):
    r = tmp_path / "repo"
    r.mkdir()
    git(r, "init", "-q")
    write(r / "pyproject.toml", POLICY)
    # zeta = c / 4 (support.BOOM_FIELD); the coefficient lives in a module the field's module
    # imports, so only the revision's modules give the old zeta
    boom_files(r, 2.0)                                                 # zeta 0.5
    git(r, "add", "-A")
    git(r, "commit", "-q", "-m", "accepted boom")
    git(r, "tag", "accepted")
    write(r / "plantdyn" / "coefficients.py", "DAMPING = 0.4\n")     # zeta 0.1
    git(r, "commit", "-q", "-am", "softer boom")
    return r


def findings(proc):
    doc = json.loads(proc.stdout)
    return [f for fr in doc["files"] for f in
            fr["findings"] + [g for m in fr["models"] for g in m["findings"]]]


def test_vector_field_model_is_compared_with_its_old_module(repo):
    proc = run_cli("check", "--against", "accepted", "--format", "json", "--no-cache",
                   cwd=repo)
    assert proc.returncode == 1, proc.stderr
    rules = sorted(f["rule"] for f in findings(proc))
    assert "EG208" not in rules  # never a "new model"
    damping = [f for f in findings(proc) if f["rule"] == "EG203"]
    assert damping, rules
    # zeta 0.5 -> 0.1 (c / 4 with c = 2 and 0.4)
    assert damping[0]["threshold"] == pytest.approx(0.5, rel=1e-6)
    assert damping[0]["measured"] == pytest.approx(0.1, rel=1e-6)


def test_unchanged_vector_field_model_is_clean_against_its_revision(repo):
    proc = run_cli("check", "--against", "HEAD", "--format", "json", "--no-cache", cwd=repo)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert not findings(proc)


def test_model_unreadable_at_the_revision_is_its_own_finding(repo):
    write(repo / "models" / "tail.yaml", """\
        model_format: 1
        name: tail
        plant:
          A: [[-1, 0], [0, -2]]
        """)
    (repo / "models" / "tail.yaml").write_text("model_format: 1\nname: tail\nplant: {A: oops}\n")
    git(repo, "add", "-A")
    git(repo, "commit", "-q", "-m", "broken tail")
    git(repo, "tag", "broken")
    write(repo / "models" / "tail.yaml", """\
        model_format: 1
        name: tail
        plant:
          A: [[-1, 0], [0, -2]]
        requirements:
          stable: true
        """)
    proc = run_cli("check", "--against", "broken", "--format", "json", "--no-cache", cwd=repo)
    found = findings(proc)
    tail = [f for f in found if f["source"] == "models/tail.yaml"]
    assert [f["rule"] for f in tail] == ["EG210"], found
    assert "broken" in tail[0]["message"] and "plant.A" in tail[0]["message"]
    assert tail[0]["severity"] == "error" and proc.returncode == 1


def test_python_turned_off_fails_loudly_not_as_a_new_model(repo):
    # The policy allowed project code at REV but not now: the current side fails to load (its
    # own EG001), and a second model file that loads today is still compared; a refusal is
    # never a silent "new model".
    write(repo / "pyproject.toml", '[tool.eigengate]\ninclude = ["models/**/*.yaml"]\n')
    proc = run_cli("check", "--against", "accepted", "--format", "json", "--no-cache",
                   cwd=repo)
    rules = [f["rule"] for f in findings(proc)]
    assert "EG208" not in rules and "EG001" in rules and proc.returncode == 1


def test_revision_import_leaves_the_working_tree_modules_alone(repo):
    from eigengate.scan.config import load_config
    from eigengate.scan.gitrev import revision_baseline

    config = load_config(repo / "pyproject.toml")
    sys.path.insert(0, str(repo))
    try:
        import plantdyn.coefficients as today
        snapshot = revision_baseline("accepted", repo, config=config)
        assert not snapshot.errors
        (entry,) = snapshot.baseline.entries()
        # the old module (c = 2): zeta = 0.5 (standard form, as above)
        assert entry.min_damping == pytest.approx(0.5, rel=1e-9)
        assert sys.modules["plantdyn.coefficients"] is today and today.DAMPING == 0.4
    finally:
        sys.path.remove(str(repo))
        for name in ("plantdyn.coefficients", "plantdyn"):
            sys.modules.pop(name, None)
