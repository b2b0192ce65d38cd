"""The pre-commit hook on a real temporary git repository: every staged file that the hook
definition lets through reaches `eigengate check --changed-files` (run as a subprocess), and a
change to a referenced matrix file, a vector-field module or the policy checks the models that
depend on it; with and without a result cache."""

import io
import re
import shutil
from pathlib import Path

import numpy as np
import pytest
import yaml

from support import ROLL, boom_files, git, run_cli, write

pytestmark = pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed")

HOOKS = Path(__file__).resolve().parents[1] / ".pre-commit-hooks.yaml"




def npz(path: Path, a) -> None:
    buf = io.BytesIO()
    np.savez(buf, A=np.asarray(a, dtype=float))
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(buf.getvalue())


def hook():
    (definition,) = yaml.safe_load(HOOKS.read_text(encoding="utf-8"))
    return definition


def run_hook(repo, *extra):
    """What pre-commit does: the staged files, filtered by the hook's `files` and `exclude`
    patterns (Python regular expressions, searched), appended to its entry."""
    h = hook()
    staged = git(repo, "diff", "--cached", "--name-only", "--diff-filter=ACMR").split()
    chosen = [f for f in staged if re.search(h["files"], f)
              and not (h.get("exclude") and re.search(h["exclude"], f))]
    entry = h["entry"].split()
    assert entry[0] == "eigengate"
    return chosen, run_cli(*entry[1:], *extra, *chosen, cwd=repo)


# s^2 + 2 zeta wn s + wn^2 with wn = 5 (standard second-order form, common in control
# textbooks): A = [[0, 1], [-25, -10 zeta]]; zeta 0.2 passes min_damping 0.1, zeta 0.05 fails.
def mast(zeta):
    return [[0.0, 1.0], [-25.0, -10.0 * zeta]]


MAST = """\
    model_format: 1
    name: mast
    plant:
      A: {file: ../matrices/mast.npz, key: A}
    requirements:
      min_damping: 0.1
    """


@pytest.fixture
def repo(tmp_path):
    r = tmp_path / "repo"
    r.mkdir()
    git(r, "init", "-q")
    write(r / "pyproject.toml", "[tool.eigengate]\nallow_python = true\n")
    write(r / "models" / "mast.yaml", MAST)
    write(r / "models" / "roll.yaml", ROLL)
    npz(r / "matrices" / "mast.npz", mast(0.2))
    boom_files(r, 2.0)  # zeta 0.5 (support.BOOM_FIELD: zeta = damping / 4)
    write(r / "README.md", "notes\n")
    git(r, "add", "-A")
    git(r, "commit", "-q", "-m", "start")
    return r


def test_hook_definition_lets_dependencies_through():
    h = hook()
    for name in ("models/a.yaml", "data/m.npz", "data/m.mat", "data/m.csv", "dyn/f.py",
                 "pyproject.toml", "eigengate.toml"):
        assert re.search(h["files"], name) and not re.search(h.get("exclude", "^$"), name), name
    assert "--changed-files" in h["entry"]


@pytest.mark.parametrize("cache", [True, False], ids=["warm-cache", "no-cache"])
def test_changed_matrix_file_checks_the_model_that_reads_it(repo, cache):
    if cache:  # a full check first records the references in the cache
        assert run_cli("check", cwd=repo).returncode == 0
    npz(repo / "matrices" / "mast.npz", mast(0.05))
    git(repo, "add", "-A")
    chosen, proc = run_hook(repo, *(() if cache else ("--no-cache",)))
    assert chosen == ["matrices/mast.npz"]
    assert proc.returncode == 1, proc.stdout + proc.stderr
    assert "EG103" in proc.stdout and "models/mast.yaml" in proc.stdout
    assert "models/roll.yaml" not in proc.stdout  # only what depends on the change


def test_changed_module_checks_vector_field_models(repo):
    # the module changed is imported by the vector field's module, not named by the model
    write(repo / "plantdyn" / "coefficients.py", "DAMPING = 0.2\n")  # zeta 0.05 < 0.08
    git(repo, "add", "-A")
    chosen, proc = run_hook(repo, "--no-cache")
    assert chosen == ["plantdyn/coefficients.py"]
    assert proc.returncode == 1, proc.stdout + proc.stderr
    assert "models/boom.yaml" in proc.stdout and "EG103" in proc.stdout
    assert "models/mast.yaml" not in proc.stdout


def test_policy_change_checks_everything(repo):
    npz(repo / "matrices" / "mast.npz", mast(0.05))
    git(repo, "commit", "-qam", "softer mast, not checked by this hook run")
    write(repo / "pyproject.toml", "[tool.eigengate]\nallow_python = true\non_uncertain = 'fail'\n")
    git(repo, "add", "-A")
    chosen, proc = run_hook(repo, "--no-cache")
    assert chosen == ["pyproject.toml"]
    assert proc.returncode == 1 and "models/mast.yaml" in proc.stdout, proc.stdout


def test_unrelated_change_checks_nothing(repo):
    write(repo / "README.md", "more notes\n")
    write(repo / "docs" / "notes.json", '{"k": 1}\n')
    git(repo, "add", "-A")
    chosen, proc = run_hook(repo, "--no-cache")
    assert chosen == ["docs/notes.json"]
    assert proc.returncode == 0, proc.stdout + proc.stderr


def test_deleted_matrix_file_checks_the_model_that_read_it(repo):
    (repo / "matrices" / "mast.npz").unlink()
    proc = run_cli("check", "--quiet", "--changed-files", "--no-cache", "matrices/mast.npz",
                   cwd=repo)
    assert proc.returncode == 1 and "EG001" in proc.stdout and "mast.npz" in proc.stdout


def test_cache_records_the_references_the_hook_maps(repo):
    from eigengate.scan.cache import ResultCache
    from eigengate.scan.config import load_config

    assert run_cli("check", cwd=repo).returncode == 0
    config = load_config(repo / "pyproject.toml")
    cache = ResultCache(config.root, config.digest)

    def refs(rel):
        return cache.references(rel, (repo / rel).read_bytes())

    assert refs("models/mast.yaml") == ("matrices/mast.npz",)
    assert refs("models/boom.yaml") == ("plantdyn/arm.py",)  # the module named, not its imports
    assert refs("models/roll.yaml") == ()
    assert cache.references("models/roll.yaml", b"model_format: 1\n") is None


def test_reference_only_the_cache_knows_is_mapped(repo):
    # A JSON model file spelling its reference with an escape: the text does not name
    # "mast.npz", the cache's record of the last analysis does.
    (repo / "models" / "mast.yaml").unlink()
    (repo / "models" / "mast.json").write_text(
        '{"model_format": 1, "name": "mast", "plant": {"A": {"file": '
        '"../matrices/mast\\u002enpz", "key": "A"}}, "requirements": {"min_damping": 0.1}}',
        encoding="utf-8")
    assert run_cli("check", cwd=repo).returncode == 0
    npz(repo / "matrices" / "mast.npz", mast(0.05))
    proc = run_cli("check", "--quiet", "--changed-files", "matrices/mast.npz", cwd=repo)
    assert proc.returncode == 1 and "models/mast.json" in proc.stdout, proc.stdout
