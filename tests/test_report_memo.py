"""The report memo: a check of an unchanged repository prints the report the last check of the
same inputs printed, and any change of an input (a model file's bytes or status, a matrix
file, a file that may become a model file, a policy, the baseline, the date, the command
line) runs the check in full."""

import os
import sys
import textwrap
import time

import pytest
from support import FIXED_TODAY, cli_env, oscillator, run_main, write

import eigengate.scan.cache as cache_mod
import eigengate.scan.runner as runner_mod
import eigengate.scan.status_records as records_mod


@pytest.fixture
def repo(tmp_path, monkeypatch):
    monkeypatch.setattr(cache_mod, "_RACY_NS", 0)  # the files were written just now
    monkeypatch.setattr(records_mod, "RACY_NS", 0)
    (tmp_path / ".git").mkdir()
    write(tmp_path / "pyproject.toml", "[tool.eigengate.requirements]\nstable = true\n")
    write(tmp_path / "models" / "arm.yaml", oscillator("arm"))  # fails min_damping 0.3
    write(tmp_path / "models" / "mast.yaml", oscillator("mast", 0.05))  # ζ = 0.1: passes
    # A = diag(-2, -3) read from a matrix file: eigenvalues -2 and -3 (a stable node)
    write(tmp_path / "models" / "pump.yaml", "model_format: 1\nname: pump\n"
          "plant: {A: {file: pump_a.csv}}\n")
    write(tmp_path / "models" / "pump_a.csv", "-2, 0\n0, -3\n")
    write(tmp_path / "models" / "notes.yaml", "title: not a model\n")
    return tmp_path


def _count_calls(monkeypatch, name: str, *modules) -> list:
    """A list that grows by one at each call of function ``name`` of the first of
    ``modules``, replaced by a counting one in all of them."""
    calls = []
    real = getattr(modules[0], name)

    def counted(*args, **kwargs):
        calls.append(1)
        return real(*args, **kwargs)

    for module in modules:
        monkeypatch.setattr(module, name, counted)
    return calls


@pytest.fixture
def scans(monkeypatch):
    """How many times a check ran its scan (a check answered by the memo runs none)."""
    return _count_calls(monkeypatch, "scan", runner_mod)


def _check(repo, *args, env=None):
    r = run_main("check", *args, str(repo), cwd=repo, env=env)
    return r.returncode, r.stdout, r.stderr


def _fresh(repo, *args, env=None):
    """The same check with the cache (and so the memo) bypassed: what the memo must match."""
    return _check(repo, "--no-cache", *args, env=env)


def _memos(repo):
    return sorted((repo / ".eigengate-cache").rglob("*.memo"))


def test_an_unchanged_repository_is_answered_by_the_last_report(repo, scans):
    first = _check(repo)
    assert len(scans) == 1 and len(_memos(repo)) == 1
    assert first[0] == 1 and "arm" in first[1]  # a failing model: the status is kept too
    again = _check(repo)
    assert len(scans) == 1  # no scan: the report came from the memo
    assert again == first == _fresh(repo)


def test_other_options_have_their_own_reports(repo, scans):
    text, as_json = _check(repo), _check(repo, "--format", "json")
    assert len(scans) == 2 and text[1] != as_json[1]
    assert _check(repo) == text and _check(repo, "--format", "json") == as_json
    assert _check(repo, "-q") == _fresh(repo, "-q")
    assert len(scans) == 4  # the quiet report was not recorded before (and --no-cache scans)


def _edit_model(repo):
    path = repo / "models" / "mast.yaml"
    path.write_text(path.read_text().replace("-0.4", "-4.0"))  # ζ = 4/(2·2) = 1


def _touch_model(repo):
    path = repo / "models" / "mast.yaml"
    st = path.stat()
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns - 1_000_000_000))  # same bytes


def _edit_matrix(repo):
    write(repo / "models" / "pump_a.csv", "2, 0\n0, -3\n")  # eigenvalue 2: unstable


def _new_model(repo):
    write(repo / "models" / "boom.yaml", oscillator("boom"))


def _remove_model(repo):
    (repo / "models" / "arm.yaml").unlink()


def _plain_file_becomes_model(repo):
    write(repo / "models" / "notes.yaml", oscillator("notes"))


def _policy_changes(repo):
    write(repo / "pyproject.toml", "[tool.eigengate.requirements]\nstable = true\n"
          "min_damping = 0.2\n")


def _nested_policy(repo):
    write(repo / "models" / "eigengate.toml", "[requirements]\nmin_damping = 0.5\n")


def _baseline_accepted(repo):
    assert run_main("baseline", "accept", str(repo), cwd=repo).returncode in (0, 1)


@pytest.mark.parametrize("change", [
    _edit_model, _touch_model, _edit_matrix, _new_model, _remove_model,
    _plain_file_becomes_model, _policy_changes, _nested_policy, _baseline_accepted])
def test_any_change_of_an_input_runs_the_check_in_full(repo, scans, change):
    before = _check(repo)
    assert _check(repo) == before  # answered, and its discovery's walk kept for the next
    change(repo)
    ran = len(scans)  # accepting a baseline scans too
    after = _check(repo)
    assert len(scans) == ran + 1, "the memo answered a check whose inputs changed"
    assert _check(repo) == after and len(scans) == ran + 1  # and is recorded in turn
    assert after == _fresh(repo)
    if change is not _touch_model:
        assert after[1] != before[1]  # the change shows in the report


def test_another_date_is_another_check(repo, scans):
    write(repo / "models" / "arm.yaml", oscillator("arm") + textwrap.dedent("""\
        waivers:
          - rule: EG103
            reason: retune planned for the next release
            expires: 2026-12-31
        """))
    _check(repo)
    later = {"EIGENGATE_TODAY": "2027-01-05"}  # the waiver has expired
    after = _check(repo, env=later)
    assert len(scans) == 2 and "expired" in after[1]
    assert _check(repo, env={"EIGENGATE_TODAY": FIXED_TODAY})[1] != after[1]
    assert len(scans) == 2  # both dates' reports are kept
    assert after == _fresh(repo, env=later)


@pytest.mark.parametrize("damage", [
    lambda raw: raw[:-10],                                   # cut short
    lambda raw: raw[:-50] + bytes([raw[-50] ^ 1]) + raw[-49:],  # a bit flipped
    lambda raw: b"",
    lambda raw: raw[:22] + b"0" * 40 + raw[62:],             # another checksum
])
@pytest.mark.parametrize("which", ["*.memo", "*.report"])
def test_a_damaged_memo_is_ignored_and_written_again(repo, scans, damage, which):
    first = _check(repo)
    (memo,) = sorted((repo / ".eigengate-cache").rglob(which))
    memo.write_bytes(damage(memo.read_bytes()))
    assert _check(repo) == first and len(scans) == 2
    assert _check(repo) == first and len(scans) == 2  # written again whole


def test_the_oldest_reports_give_way(repo, scans, monkeypatch):
    import eigengate.scan.report_memo as memo_mod

    monkeypatch.setattr(memo_mod, "KEEP", 2)
    for args in ((), ("-q",), ("--format", "json")):
        _check(repo, *args)
    assert len(sorted((repo / ".eigengate-cache").rglob("*.report"))) == 2
    _check(repo, "--format", "json")
    _check(repo, "-q")
    assert len(scans) == 3  # the two latest are answered
    _check(repo)
    assert len(scans) == 4  # the first gave way


def test_each_configuration_has_its_own_memo(repo, scans):
    first = _check(repo)
    _policy_changes(repo)
    second = _check(repo)
    assert len(scans) == 2 and second != first and len(_memos(repo)) == 2
    write(repo / "pyproject.toml", "[tool.eigengate.requirements]\nstable = true\n")
    assert _check(repo) == first and len(scans) == 2  # the first one's memo answers again


def test_files_changed_within_the_racy_window_record_no_memo(repo, scans, monkeypatch):
    monkeypatch.setattr(cache_mod, "_RACY_NS", 10**18)  # every file changed "just now"
    first = _check(repo)
    assert _memos(repo) == []
    assert _check(repo) == first and len(scans) == 2


@pytest.mark.parametrize("args", [("--no-cache",), ("--output", "json:{repo}/r.json"),
                                  ("--figures", "{repo}/figs")])
def test_checks_that_write_files_or_bypass_the_cache_always_run(repo, scans, args):
    args = [a.format(repo=repo) for a in args]
    _check(repo, *args)
    _check(repo, *args)
    assert len(scans) == 2


def test_a_no_change_check_imports_neither_numpy_nor_scipy(tmp_path):
    # a whole process, as a user runs it; the files must be older than the 2 s racy window
    # of the cache's status records before the first check records them. The policy's
    # requirements table is not even parsed (the memo needs its digest only).
    import subprocess

    (tmp_path / ".git").mkdir()
    write(tmp_path / "pyproject.toml", "[tool.eigengate.requirements]\nstable = true\n")
    write(tmp_path / "models" / "arm.yaml", oscillator("arm"))
    time.sleep(2.1)
    probe = ("import sys\nfrom eigengate.cli import main\nstatus = main(sys.argv[1:])\n"
             "heavy = sorted({m.split('.')[0] for m in sys.modules} & {'numpy', 'scipy', 'yaml'}"
             " | {m for m in sys.modules if m.startswith('eigengate.rules.requirements')})\n"
             "sys.stderr.write(f'\\nheavy={heavy} status={status}\\n')\n"
             "parsing = sorted({'tomllib', 'typing'} & set(sys.modules))\n"
             "sys.stderr.write(f'parsing={parsing}\\n')\n")
    runs = [subprocess.run([sys.executable, "-c", probe, "check", str(tmp_path)],
                           capture_output=True, text=True, cwd=tmp_path, env=cli_env())
            for _ in range(3)]
    assert "'numpy'" in runs[0].stderr and "status=1" in runs[0].stderr
    assert "heavy=[] status=1" in runs[1].stderr and "'tomllib'" in runs[1].stderr
    # the third takes the policy's table as the second kept it: no TOML read, no typing
    assert "heavy=[] status=1" in runs[2].stderr and "parsing=[]" in runs[2].stderr
    assert runs[2].stdout == runs[1].stdout == runs[0].stdout and "arm" in runs[0].stdout


def test_a_broken_requirements_table_is_still_refused(repo, scans):
    _check(repo)
    write(repo / "pyproject.toml", "[tool.eigengate.requirements]\nmin_dampign = 0.3\n")
    status, out, err = _check(repo)
    assert status == 2 and "min_dampign" in err and "min_damping" in err and out == ""
    assert len(scans) == 1


@pytest.mark.parametrize("args, says", [(("--cluster", "scheduler:8786"), "--cluster"),
                                        (("--jobs", "0"), "--jobs"),
                                        (("--output", "nonsense"), "--output")])
def test_the_options_are_checked_before_the_memo_answers(repo, scans, args, says):
    _check(repo)
    status, out, err = _check(repo, *args)
    assert status == 2 and says in err and out == ""


@pytest.fixture
def discoveries(monkeypatch):
    """How many times a check walked the repository's folders to find its model files."""
    import eigengate.scan.discovery as discovery_mod

    return _count_calls(monkeypatch, "find_model_files", discovery_mod, runner_mod)


def test_an_unchanged_walk_is_not_walked_again(repo, scans, discoveries):
    first = _check(repo)  # (it made the cache folder: hidden, as discovery leaves it)
    assert _check(repo) == first == _check(repo) and len(scans) == 1
    assert len(discoveries) == 1  # the same names everywhere, every candidate's status: no walk
    _new_model(repo)  # a name more in its folder: walked again, and the new file found
    after = _check(repo)
    assert len(discoveries) == 3  # the memo's walk (a miss: a new file), then the scan's
    assert len(scans) == 2 and "boom" in after[1] and after == _fresh(repo)


def test_a_renamed_model_file_is_walked_again(repo, scans, discoveries):
    first = _check(repo)
    (repo / "models" / "arm.yaml").rename(repo / "models" / "arm2.yaml")  # same status
    after = _check(repo)
    assert len(scans) == 2 and after != first and after == _fresh(repo)


def test_a_nested_pyproject_that_becomes_a_policy_is_seen(repo, scans, discoveries):
    write(repo / "models" / "pyproject.toml", "[project]\nname = 'models'\n")
    first = _check(repo)
    assert _check(repo) == first == _check(repo) and len(scans) == 1
    assert len(discoveries) == 1  # the checks after the first read its walk
    # edited in place (its folder's status unchanged): its own status tells
    write(repo / "models" / "pyproject.toml", "[project]\nname = 'models'\n\n"
          "[tool.eigengate.requirements]\nmin_damping = 0.5\n")
    after = _check(repo)
    assert len(scans) == 2 and after != first and after == _fresh(repo)


@pytest.mark.skipif(not hasattr(os, "symlink"), reason="needs symbolic links")
def test_a_folder_with_a_link_is_always_walked(repo, scans, discoveries):
    os.symlink(repo / "models" / "arm.yaml", repo / "models" / "arm_link.yaml")
    first = _check(repo)
    assert _check(repo) == first == _check(repo) and len(scans) == 1  # the memo answers ...
    assert len(discoveries) == 3  # ... after walking: a link's target is not in its status
    assert first == _fresh(repo)


def test_a_walk_within_the_racy_window_is_not_kept(repo, scans, discoveries, monkeypatch):
    monkeypatch.setattr(records_mod, "RACY_NS", 10**18)  # the files changed "just now"
    first = _check(repo)
    assert _check(repo) == first == _check(repo) and len(scans) == 1
    assert len(discoveries) == 3


def test_the_digest_tells_apart_how_names_split_between_its_lists(tmp_path):
    """The memo's digest joins thousands of names instead of encoding them as JSON (issue
    16); the lists' lengths go first, so names moved from one list to the next, or a name
    split in two, make another digest."""
    from eigengate.scan.config import load_config
    from eigengate.scan.report_memo import ReportMemo

    (tmp_path / ".git").mkdir()
    memo = ReportMemo(load_config(start=tmp_path), {"paths": ["."]})
    seen = {memo._digest(rels, keys, unselected, refs) for rels, keys, unselected, refs in [
        (["a", "b"], ["k1", "k2"], [], {}),
        (["a"], ["b", "k1", "k2"], [], {}),
        (["a", "b"], ["k1"], ["k2"], {}),
        (["a\0b"], ["k1", "k2"], [], {}),
        (["a", "b"], ["k1", "k2"], [""], {}),
        (["a", "b"], ["k1", "k2"], [], {"m.mtx": "d1"}),
        (["a", "b\udcff"], ["k1", "k2"], [], {}),  # a name that is not UTF-8 on disk
    ]}
    assert len(seen) == 7
    assert memo._digest(["a", "b"], ["k1", "k2"], [], {}) in seen  # the same inputs: the same
