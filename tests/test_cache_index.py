"""The result cache's record of file status: an unchanged repository is not read again, and
no change slips through it."""

import os

import pytest
from support import oscillator, write

import eigengate.scan.cache as cache_mod
from eigengate.scan.cache import read_pack
from eigengate.scan.config import load_config
from eigengate.scan.runner import scan


@pytest.fixture
def repo(tmp_path):
    (tmp_path / ".git").mkdir()
    write(tmp_path / "pyproject.toml", "[tool.eigengate.requirements]\nmin_damping = 0.3\n")
    for name in ("arm", "mast", "wrist"):
        write(tmp_path / "models" / f"{name}.yaml", oscillator(name, None))
    return tmp_path


def _recorded(repo):
    (pack,) = (repo / ".eigengate-cache").rglob("*.pack")
    return read_pack(pack.read_bytes()).head["files"]


def test_unchanged_files_are_neither_read_nor_hashed_again(repo, monkeypatch):
    monkeypatch.setattr(cache_mod, "_RACY_NS", 0)  # the files were written just now
    config = load_config(start=repo)
    first = scan([repo], config, jobs=1)
    assert first.analysed == 3 and sorted(_recorded(repo)) == [
        "models/arm.yaml", "models/mast.yaml", "models/wrist.yaml"]

    def no_read(*args, **kwargs):
        raise AssertionError(f"read a file the cache knows unchanged: {args[0]}")

    monkeypatch.setattr("eigengate.scan.discovery._sniff", no_read)
    monkeypatch.setattr("eigengate.scan.runner.open", no_read, raising=False)
    again = scan([repo], config, jobs=1)
    assert again.cache_hits == 3 and again.analysed == 0
    assert [f.findings for f in again.files] == [f.findings for f in first.files]


def test_a_file_rewritten_with_its_old_size_and_times_is_read_again(repo, monkeypatch):
    monkeypatch.setattr(cache_mod, "_RACY_NS", 0)
    config = load_config(start=repo)
    scan([repo], config, jobs=1)
    path = repo / "models" / "mast.yaml"
    old, st = path.read_text(), path.stat()
    # a damping term -0.4 -> -4.0: the same number of bytes; zeta = 4/(2*2) = 1 for
    # x'' + 4 x' + 4 x (second-order standard form)
    new = old.replace("-0.4", "-4.0")
    assert new != old and len(new) == len(old)
    path.write_text(new)
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns))  # the change time still moves
    again = scan([repo], config, jobs=1)
    assert again.analysed == 1 and again.cache_hits == 2
    mast = next(f for f in again.files if f.source.endswith("mast.yaml"))
    assert mast.passed and mast.results[0].spectrum.min_damping == pytest.approx(1.0, abs=1e-6)


def test_a_file_changed_just_before_the_check_is_read_but_its_status_not_recorded(repo,
                                                                                 monkeypatch):
    # a window far wider than the time since the fixture wrote the files, however slow the
    # machine: they changed "just before" the check (the real 2 s is tested at its boundary)
    monkeypatch.setattr(cache_mod, "_RACY_NS", 10**18)
    config = load_config(start=repo)
    first = scan([repo], config, jobs=1)
    assert first.analysed == 3 and _recorded(repo) == {}
    again = scan([repo], config, jobs=1)  # served from the cache by their bytes
    assert again.cache_hits == 3 and again.analysed == 0


@pytest.mark.parametrize("age_ns, recorded", [
    (cache_mod._RACY_NS + 1, True),    # changed one ns more than the window before the start
    (cache_mod._RACY_NS, False),       # exactly the window: still racy (strictly older only)
    (cache_mod._RACY_NS - 1, False),
    (0, False)])
def test_the_racy_window_boundary(tmp_path, age_ns, recorded):
    # The racy-timestamp rule of version-control indexes: a status is recorded only when the
    # file's last change (the later of mtime and ctime) lies strictly more than _RACY_NS
    # before the check began. A fake status pins the times, so no clock decides the test.
    assert cache_mod._RACY_NS == 2_000_000_000
    c = cache_mod.ResultCache(tmp_path, "digest")
    changed = c._started - age_ns
    for mtime, ctime in ((changed, changed - 5), (changed - 5, changed)):
        st = os.stat_result((0o100644, 7, 0, 1, 0, 0, 10, 0, 0, 0),
                            {"st_mtime_ns": mtime, "st_ctime_ns": ctime, "st_atime_ns": 0})
        c.note_key("models/a.yaml", st, "k1")
        assert (c.known_key("models/a.yaml", st) == "k1") is recorded
        c._noted["files"].clear()
