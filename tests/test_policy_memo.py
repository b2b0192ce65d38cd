"""The policy table remembered by its file's status (``scan.policy_memo``): taken only while
the file's status is the one it was kept with, kept only when JSON holds it exactly (no TOML
dates), never trusted when damaged; the configuration it gives is the parsed one, digest
included. The reference is the TOML reader of the standard library (tomllib, PEP 680) on the
same file."""

import json
import os
import time
from pathlib import Path

import pytest

from support import FIXED_TODAY, write

import eigengate.scan.status_records as records_mod

_POLICY = """\
[project]
name = "hydraulic-rig"

[tool.eigengate]
include = ["models/*.yaml"]
on_uncertain = "fail"
severity = {EG103 = "warning"}
[tool.eigengate.requirements]
stable = true
min_damping = 0.125
max_frequency = 1e3
"""


@pytest.fixture
def repo(tmp_path, monkeypatch):
    monkeypatch.setattr(records_mod, "RACY_NS", 0)  # the files were written just now
    (tmp_path / ".git").mkdir()
    write(tmp_path / "pyproject.toml", _POLICY)
    (tmp_path / ".eigengate-cache").mkdir()  # a cache in use
    return tmp_path


def _load(root: Path):
    from eigengate.scan.config import load_config

    return load_config(root / "pyproject.toml", defer=True, remember=True).complete()


def _kept(root: Path) -> Path:
    (found,) = (root / ".eigengate-cache").rglob("policy.table")
    return found


def _no_toml(monkeypatch):
    import eigengate.scan.policyfiles as files_mod

    def refuse(text):
        raise AssertionError("the TOML was parsed")

    monkeypatch.setattr(files_mod, "_toml_loads", refuse)


def test_the_remembered_table_gives_the_parsed_configuration(repo, monkeypatch):
    import tomllib

    from eigengate.scan.config import load_config

    parsed = load_config(repo / "pyproject.toml")  # nothing remembered, nothing kept
    assert not list((repo / ".eigengate-cache").rglob("policy.table"))
    first = _load(repo)  # parsed, and kept
    raw = json.loads(_kept(repo).read_bytes().split(b"\n", 2)[2])
    assert raw["table"] == tomllib.loads(_POLICY)["tool"]["eigengate"]
    _no_toml(monkeypatch)
    again = _load(repo)  # from the remembered table
    assert again.digest == first.digest == parsed.digest
    assert again.include == parsed.include and again.severity == parsed.severity
    assert [type(r).__name__ for r in again.requirements] == \
        [type(r).__name__ for r in parsed.requirements]


def test_an_edited_policy_is_parsed_again(repo, monkeypatch):
    first = _load(repo)
    write(repo / "pyproject.toml", _POLICY.replace("0.125", "0.25"))  # status changes
    second = _load(repo)
    assert second.digest != first.digest
    _no_toml(monkeypatch)
    assert _load(repo).digest == second.digest  # kept in its turn


@pytest.mark.parametrize("damage", [lambda raw: raw[:-3], lambda raw: b"",
                                    lambda raw: raw.replace(b"0.125", b"0.875")])
def test_a_damaged_table_is_not_trusted(repo, damage):
    first = _load(repo)
    kept = _kept(repo)
    kept.write_bytes(damage(kept.read_bytes()))
    assert _load(repo).digest == first.digest  # parsed again, not the damaged values
    assert json.loads(kept.read_bytes().split(b"\n", 2)[2])["table"]["requirements"][
        "min_damping"] == 0.125  # and written again whole


def test_a_table_with_dates_is_not_kept(repo):
    write(repo / "pyproject.toml", _POLICY + '[[tool.eigengate.waivers]]\nrule = "EG103"\n'
          'reason = "retune scheduled"\npaths = ["models/*.yaml"]\nexpires = 2027-03-01\n')
    _load(repo)
    assert not list((repo / ".eigengate-cache").rglob("policy.table"))


def test_nothing_is_kept_without_a_cache_or_within_the_racy_window(repo, monkeypatch):
    import shutil

    shutil.rmtree(repo / ".eigengate-cache")
    _load(repo)
    assert not (repo / ".eigengate-cache").exists()  # no cache folder made for it
    (repo / ".eigengate-cache").mkdir()
    monkeypatch.setattr(records_mod, "RACY_NS", 10**18)  # the file changed "just now"
    _load(repo)
    assert not list((repo / ".eigengate-cache").rglob("policy.table"))


def test_another_file_with_the_same_status_is_not_served(repo, monkeypatch):
    _load(repo)
    kept = _kept(repo)
    raw = kept.read_bytes()
    other = repo / "sub"
    other.mkdir()
    write(other / "pyproject.toml", _POLICY)
    (other / ".eigengate-cache" / kept.parent.name).mkdir(parents=True)
    (other / ".eigengate-cache" / kept.parent.name / kept.name).write_bytes(raw)  # copied
    from eigengate.scan.config import load_config

    calls = []
    import eigengate.scan.policyfiles as files_mod

    real = files_mod._toml_loads
    monkeypatch.setattr(files_mod, "_toml_loads", lambda t: calls.append(1) or real(t))
    load_config(other / "pyproject.toml", defer=True, remember=True)
    assert calls == [1]  # its path and status are not the ones kept: parsed


def test_today_iso_is_the_date_of_today(monkeypatch):
    from eigengate.rules.dates import today, today_iso

    monkeypatch.delenv("EIGENGATE_TODAY", raising=False)
    for _ in range(3):  # (a midnight between the two calls would differ: retried)
        if today_iso() == today().isoformat():
            break
        time.sleep(0.01)
    assert today_iso() == today().isoformat()  # datetime.date.isoformat, the reference
    monkeypatch.setenv("EIGENGATE_TODAY", FIXED_TODAY)
    assert today_iso() == FIXED_TODAY
    assert os.environ["EIGENGATE_TODAY"] == FIXED_TODAY
