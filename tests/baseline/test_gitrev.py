"""Comparing with a git revision, on real temporary repositories."""

import io
import shutil
from pathlib import Path

import numpy as np
import pytest

from eigengate.baseline.store import baseline_entry_from
from eigengate.scan.config import load_config
from eigengate.scan.engine import check_paths
from eigengate.scan.gitrev import GitError, renames_since, resolve_revision, revision_baseline
from eigengate.baseline.regressions import compare_all
from support import git, write

pytestmark = pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed")





def npz(path: Path, **arrays) -> None:
    buf = io.BytesIO()
    np.savez(buf, **arrays)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(buf.getvalue())


# Double integrator x'' = u with state feedback u = -k1 x - k2 x': s^2 + k2 s + k1, so
# zeta = k2 / (2 sqrt(k1)) (second-order standard form, common in control textbooks).
PITCH = """\
    model_format: 1
    name: pitch
    plant:
      states: [angle, rate]
      A: [[0, 1], [0, 0]]
      B: [[0], [1]]
    feedback:
      state_gain: [[4, {k2}]]
    """
ROLL = """\
    model_format: 1
    plant:
      A: [[-2, 0], [0, -6]]
    """
FLEX = """\
    model_format: 1
    name: flex
    plant:
      A: {file: ../matrices/flex.npz, key: A}
    """
LEGACY = """\
    model_format: 1
    plant:
      A: [[-1]]
    """


def flex_A(damping):
    # one lightly damped structural mode, s^2 + 2 zeta 5 s + 25 (standard form)
    return np.array([[0.0, 1.0], [-25.0, -10.0 * damping]])


@pytest.fixture
def repo(tmp_path):
    r = tmp_path / "repo"
    r.mkdir()
    git(r, "init", "-q")
    write(r / "pyproject.toml", '[tool.eigengate]\ninclude = ["models/**/*.yaml"]\n')
    write(r / "models" / "pitch.yaml", PITCH.format(k2=2.4))        # zeta 0.6
    write(r / "models" / "roll.yaml", ROLL)
    write(r / "models" / "flex.yaml", FLEX)
    write(r / "models" / "legacy.yaml", LEGACY)
    npz(r / "matrices" / "flex.npz", A=flex_A(0.02))
    git(r, "add", "-A")
    git(r, "commit", "-q", "-m", "first accepted tuning")
    write(r / "README.md", "notes\n")
    git(r, "add", "-A")
    git(r, "commit", "-q", "-m", "notes")  # a second commit that touches no model
    git(r, "tag", "accepted")
    # the retune under review
    write(r / "models" / "pitch.yaml", PITCH.format(k2=1.2))        # zeta 0.3
    npz(r / "matrices" / "flex.npz", A=flex_A(0.01))
    git(r, "mv", "models/roll.yaml", "models/roll_axis.yaml")
    git(r, "rm", "-q", "models/legacy.yaml")
    git(r, "commit", "-q", "-am", "retune pitch, stiffer mast, rename roll")
    return r


def current(repo):
    config = load_config(repo / "pyproject.toml")
    return config, check_paths([repo / "models"], config=config)


def test_revision_entries_and_regressions(repo):
    config, results = current(repo)
    snap = revision_baseline("accepted", repo, config=config, against="HEAD")
    assert snap.commit == git(repo, "rev-parse", "accepted").strip()
    assert snap.renamed == {"models/roll.yaml": "models/roll_axis.yaml"}
    assert snap.deleted == ("models/legacy.yaml",)
    assert snap.errors == ()
    # the renamed file's entry is keyed by its new path, and its default name follows it
    assert set(snap.baseline.keys()) == {("models/flex.yaml", "flex"),
                                         ("models/legacy.yaml", "legacy"),
                                         ("models/pitch.yaml", "pitch"),
                                         ("models/roll_axis.yaml", "roll_axis")}
    out = compare_all(results, snap.baseline, complete=True)
    by = {(f.source, f.rule) for f in out.findings}
    assert ("models/pitch.yaml", "EG203") in by and ("models/flex.yaml", "EG203") in by
    assert not any(f.source == "models/roll_axis.yaml" for f in out.findings)
    assert out.stale_keys == (("models/legacy.yaml", "legacy"),) and out.new_keys == ()
    pitch = next(f for f in out.findings if f.source == "models/pitch.yaml"
                 and f.rule == "EG203")
    # zeta 0.6 → 0.3 (standard form, k2 / (2 sqrt(k1)) with k1 = 4)
    assert pitch.before[0].damping_ratio == pytest.approx(0.6)
    assert pitch.modes[0].damping_ratio == pytest.approx(0.3)
    assert {s for s, _ in pitch.modes[0].top_states} == {"angle", "rate"}
    flex = next(f for f in out.findings if f.source == "models/flex.yaml" and f.rule == "EG203")
    assert flex.before[0].damping_ratio == pytest.approx(0.02)
    assert flex.modes[0].damping_ratio == pytest.approx(0.01)
    assert out.failed


def test_revision_entry_has_the_store_shape(repo):
    # HEAD read from history equals the working tree read from disk, field by field
    config, results = current(repo)
    snap = revision_baseline("HEAD", repo, config=config)
    assert snap.renamed == {} and snap.deleted == ()
    for fr in results:
        for r in fr.results:
            here = baseline_entry_from(r)
            there = snap.baseline.entry(*here.key)
            assert there is not None and there.written_by.startswith("git ")
            assert there == baseline_entry_from(r, written_by=there.written_by)


def test_renames_against_the_working_tree(repo):
    (repo / "models" / "axes").mkdir()
    git(repo, "mv", "models/pitch.yaml", "models/axes/pitch.yaml")  # staged, not committed
    moves = renames_since("HEAD", repo)
    assert moves.renamed == {"models/pitch.yaml": "models/axes/pitch.yaml"}
    snap = revision_baseline("HEAD", repo, config=load_config(repo / "pyproject.toml"))
    assert ("models/axes/pitch.yaml", "pitch") in snap.baseline


def test_npz_changed_between_revisions_is_read_from_history(repo):
    # the working tree now holds a third version; history must still give the first
    npz(repo / "matrices" / "flex.npz", A=flex_A(0.5))
    snap = revision_baseline("accepted", repo)
    (mode,) = snap.baseline.entry("models/flex.yaml", "flex").modes
    assert mode.damping_ratio == pytest.approx(0.02) and mode.natural_frequency == \
        pytest.approx(5.0)


def test_reference_outside_the_repository_is_refused(repo):
    write(repo / "models" / "escape.yaml", """\
        model_format: 1
        plant:
          A: {file: ../../outside.npz}
        """)
    git(repo, "add", "-A")
    git(repo, "commit", "-q", "-m", "bad reference")
    snap = revision_baseline("HEAD", repo)
    (err,) = snap.errors
    assert "outside the repository" in str(err) and err.source == "models/escape.yaml"


def test_missing_reference_names_the_file(repo):
    git(repo, "rm", "-q", "matrices/flex.npz")
    git(repo, "commit", "-q", "-m", "lost matrix")
    (err,) = revision_baseline("HEAD", repo).errors
    assert "matrices/flex.npz" in str(err) and "does not exist" in str(err)


def test_configuration_root_below_the_top(tmp_path):
    top = tmp_path / "mono"
    (top / "control").mkdir(parents=True)
    git(top, "init", "-q")
    write(top / "control" / "models" / "yaw.yaml", ROLL)
    write(top / "elsewhere" / "yaw.yaml", ROLL)
    git(top, "add", "-A")
    git(top, "commit", "-q", "-m", "monorepo")
    snap = revision_baseline("HEAD", top / "control")
    assert snap.baseline.keys() == [("models/yaw.yaml", "yaw")]


def test_unknown_revision(repo):
    with pytest.raises(GitError, match="unknown revision 'no-such-branch'") as info:
        resolve_revision("no-such-branch", repo)
    assert isinstance(info.value, ValueError) and "fetch" in str(info.value)
    with pytest.raises(GitError, match="not a revision name"):
        revision_baseline("--output=notes.txt", repo)


def test_not_a_git_repository(tmp_path):
    plain = tmp_path / "plain"
    plain.mkdir()
    with pytest.raises(GitError, match="not inside a git repository"):
        revision_baseline("HEAD", plain)


@pytest.mark.parametrize("suffix", [".npz", ".mat", ".csv"])
def test_references_read_through_a_callback_match_the_filesystem(tmp_path, suffix):
    # The filesystem loader is the reference for the loader's read-callback hook.
    import scipy.io

    from eigengate.load.loader import load_models, load_models_from_bytes

    A = flex_A(0.03)
    data = tmp_path / "m" / f"plant{suffix}"
    data.parent.mkdir()
    if suffix == ".npz":
        npz(data, A=A)
    elif suffix == ".mat":
        scipy.io.savemat(data, {"A": A})
    else:
        data.write_text("\n".join(",".join(repr(float(x)) for x in row) for row in A) + "\n")
    key = "" if suffix == ".csv" else ", key: A"
    model = tmp_path / "models" / "flex.yaml"
    write(model, f"model_format: 1\nplant:\n  A: {{file: ../m/plant{suffix}{key}}}\n")
    (ref,) = load_models(model, root=tmp_path)
    files = {"models/flex.yaml": model.read_bytes(), f"m/plant{suffix}": data.read_bytes()}

    def read(rel):
        if rel not in files:
            raise FileNotFoundError(rel)
        return files[rel]

    (got,), refs = load_models_from_bytes(files["models/flex.yaml"], "models/flex.yaml", read)
    assert refs == [f"m/plant{suffix}"] and got.name == ref.name == "flex"
    np.testing.assert_array_equal(got.A, ref.A)
    escape = b"model_format: 1\nplant:\n  A: {file: ../../plant.npz}\n"
    with pytest.raises(Exception, match="outside the repository"):
        load_models_from_bytes(escape, "models/flex.yaml", read)
