"""Nested policies in a monorepo: the nearest policy judges a model (``extend = true`` layers
it on its parent), however the run is started: a root scan, file arguments from the root or
from a sub-folder (as a pre-commit hook passes them), a run inside the sub-folder, and the
pytest collector. Each policy keeps its own baseline next to it."""

import json

import numpy  # noqa: F401  # imported once, before the in-process pytester runs
import pytest
import scipy.linalg  # noqa: F401
import yaml  # noqa: F401
# the checks run in this process (support.run_main): their output is the subject here
from support import oscillator, run_main, write

import eigengate.pytest.collector  # noqa: F401
import eigengate.scan.engine  # noqa: F401
import eigengate.load.loader  # noqa: F401

pytest_plugins = ["pytester"]

# s² + 0.4 s + 4 (support.oscillator): ζ = 0.1, decay rate 0.2 1/s (second-order standard
# form, common in control textbooks). Every file states no requirement: the policies do.
ROOT_POLICY = """\
    [tool.eigengate]
    include = ["**/*.yaml"]
    [tool.eigengate.requirements]
    stable = true
    """
TEAM_POLICY = """\
    [project]
    name = "team-a"
    [tool.eigengate]
    [tool.eigengate.requirements]
    min_damping = 0.3
    """
SUB_POLICY = """\
    [tool.eigengate]
    extend = true
    [tool.eigengate.requirements]
    min_decay_rate = 0.3
    [tool.eigengate.severity]
    EG103 = "warning"
    """
#: What each model gets: the root's stable = true passes ζ = 0.1; team A's min_damping 0.3
#: fails it (EG103) and does not inherit stable; sub inherits team A's requirement (as a
#: warning there) and adds a decay rate 0.3 > 0.2 (EG102).
EXPECTED = {
    "models/r.yaml": [],
    "teamA/models/a.yaml": [("EG103", "error")],
    "teamA/sub/m.yaml": [("EG102", "error"), ("EG103", "warning")],
}


def build(root):
    (root / ".git").mkdir()
    write(root / "pyproject.toml", ROOT_POLICY)
    write(root / "teamA" / "pyproject.toml", TEAM_POLICY)
    write(root / "teamA" / "sub" / "pyproject.toml", SUB_POLICY)
    for rel in EXPECTED:
        write(root / rel, oscillator(rel.split("/")[-1][:-5], None))
    return root


def verdicts(out):
    data = json.loads(out.stdout)
    return {fr["source"]: sorted((f["rule"], f["severity"]) for f in m["findings"])
            for fr in data["files"] for m in fr["models"]}


@pytest.fixture
def mono(tmp_path):
    return build(tmp_path)


def test_a_root_scan_judges_each_model_by_its_nearest_policy(mono):
    out = run_main("check", "--format", "json", "--no-baseline", cwd=mono)
    assert out.returncode == 1, out.stderr
    assert verdicts(out) == EXPECTED


@pytest.mark.parametrize("where, args", [
    ("", list(EXPECTED)),                                           # file arguments, root
    ("", ["--only-model-files", *EXPECTED, "README.md"]),          # the hook, from the root
    ("teamA/sub", ["--only-model-files", "m.yaml", "../models/a.yaml", "../../models/r.yaml"]),
    ("teamA/sub", []),                                              # a plain run inside sub
    ("teamA", []),
])
def test_every_way_of_starting_the_run_gives_the_same_verdicts(mono, where, args):
    (mono / "README.md").write_text("notes\n", encoding="utf-8")
    out = run_main("check", "--format", "json", "--no-baseline", *args, cwd=mono / where)
    assert out.returncode == 1, out.stderr
    assert verdicts(out) == EXPECTED


def test_each_policy_keeps_its_own_baseline(mono):
    out = run_main("baseline", "accept", cwd=mono)
    assert out.returncode == 0, out.stdout + out.stderr
    keys = {}
    for folder in ("", "teamA", "teamA/sub"):
        data = json.loads((mono / folder / ".eigengate" / "baseline.json").read_text())
        keys[folder] = sorted(data["models"])
    assert keys == {"": ["models/r.yaml"], "teamA": ["teamA/models/a.yaml"],
                    "teamA/sub": ["teamA/sub/m.yaml"]}
    # from the sub-folder, the sub-project's model is compared with its own baseline
    again = run_main("check", "m.yaml", cwd=mono / "teamA" / "sub")
    assert "without a baseline entry" not in again.stdout + again.stderr
    assert "EG208" not in again.stdout


def test_the_pytest_collector_agrees(pytester):
    build(pytester.path)
    result = pytester.runpytest("-p", "no:cacheprovider", "-p", "eigengate")
    result.assert_outcomes(passed=1, failed=2)
    text = result.stdout.str()
    failing = {line.split("::")[0].split()[-1] for line in result.stdout.lines
               if line.startswith("FAILED ")}
    assert failing == {"teamA/models/a.yaml", "teamA/sub/m.yaml"}
    assert "EG102" in text and "EG103" in text


def test_pytest_accepts_into_each_policys_baseline(pytester):
    build(pytester.path)
    result = pytester.runpytest("-p", "no:cacheprovider", "--eigengate-accept")
    assert result.ret == 1  # the failing models still fail; their entries are kept
    for folder, source in (("", "models/r.yaml"), ("teamA", "teamA/models/a.yaml"),
                           ("teamA/sub", "teamA/sub/m.yaml")):
        data = json.loads((pytester.path / folder / ".eigengate" / "baseline.json").read_text())
        assert sorted(data["models"]) == [source]


def test_a_bad_nested_policy_is_a_usage_error_naming_its_file(mono, pytester):
    write(mono / "teamA" / "pyproject.toml", '[tool.eigengate]\nextend = "yes"\n')
    out = run_main("check", cwd=mono)
    assert out.returncode == 2
    assert out.stderr.strip() == (
        "eigengate: error: teamA/pyproject.toml: [tool.eigengate] extend must be true or "
        "false, got 'yes' (true layers this policy on the one of the folder above)")
    build(pytester.path)
    write(pytester.path / "teamA" / "pyproject.toml", '[tool.eigengate]\nextend = "yes"\n')
    result = pytester.runpytest("-p", "no:cacheprovider")
    assert result.ret == pytest.ExitCode.INTERRUPTED  # collection stops, naming the policy
    assert "eigengate: teamA/pyproject.toml: [tool.eigengate] extend must be true or false" \
        in result.stdout.str()


def test_a_changed_nested_policy_is_not_served_from_the_cache(mono, monkeypatch):
    import eigengate.scan.cache as cache_mod
    from eigengate.scan.config import load_config
    from eigengate.scan.runner import scan

    monkeypatch.setattr(cache_mod, "_RACY_NS", 0)  # the files were written just now
    first = scan([mono], load_config(start=mono), jobs=1)
    assert first.analysed == 3
    # team A's requirement relaxed to ζ ≥ 0.05: the oscillator's ζ = 0.1 now passes it
    write(mono / "teamA" / "pyproject.toml", TEAM_POLICY.replace("0.3", "0.05"))
    again = scan([mono], load_config(start=mono), jobs=1)
    a = next(f for f in again.files if f.source == "teamA/models/a.yaml")
    assert a.findings == () and again.cache_hits == 1  # only the root's model was reused


def test_a_nested_policy_added_later_judges_its_folder_at_once(mono, monkeypatch):
    import eigengate.scan.cache as cache_mod
    from eigengate.scan.config import load_config
    from eigengate.scan.runner import scan

    monkeypatch.setattr(cache_mod, "_RACY_NS", 0)  # the files were written just now
    (mono / "teamA" / "pyproject.toml").unlink()
    (mono / "teamA" / "sub" / "pyproject.toml").unlink()
    first = scan([mono], load_config(start=mono), jobs=1)
    assert all(f.findings == () for f in first.files)  # the root's stable = true passes all
    write(mono / "teamA" / "pyproject.toml", TEAM_POLICY)
    again = scan([mono], load_config(start=mono), jobs=1)
    found = {f.source: sorted(x.rule for x in f.findings) for f in again.files}
    assert found == {"models/r.yaml": [], "teamA/models/a.yaml": ["EG103"],
                     "teamA/sub/m.yaml": ["EG103"]}


def test_pytest_run_inside_the_sub_folder_agrees(pytester, monkeypatch):
    build(pytester.path)
    monkeypatch.chdir(pytester.path / "teamA" / "sub")
    result = pytester.runpytest("-p", "no:cacheprovider", "--rootdir", ".", "m.yaml")
    result.assert_outcomes(failed=1)
    text = result.stdout.str()
    # the same source as from the root, and the same verdicts as EXPECTED
    assert "teamA/sub/m.yaml:" in text and "FAIL  EG102" in text and "warn  EG103" in text


def test_waivers_and_overrides_of_a_nested_policy_are_relative_to_its_folder(mono):
    write(mono / "teamA" / "pyproject.toml", TEAM_POLICY + """\
        [[tool.eigengate.overrides]]
        paths = ["sub/**"]
        requirements = { min_damping = 0.05 }
        [[tool.eigengate.waivers]]
        rule = "EG103"
        paths = ["models/a.yaml"]
        reason = "retune in review"
        """)
    for where, args in (("", []), ("teamA/models", ["a.yaml"])):
        out = run_main("check", "--format", "json", "--no-baseline", *args, cwd=mono / where)
        data = json.loads(out.stdout)
        models = {fr["source"]: m for fr in data["files"] for m in fr["models"]}
        a = models["teamA/models/a.yaml"]
        assert a["findings"] == [] and [w["rule"] for w in a["waived"]] == ["EG103"]
        if not args:
            # sub extends team A: the override (ζ ≥ 0.05) passes ζ = 0.1; EG102 still fails
            sub = models["teamA/sub/m.yaml"]
            assert sorted(f["rule"] for f in sub["findings"]) == ["EG102"]
