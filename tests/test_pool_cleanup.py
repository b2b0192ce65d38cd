"""Nothing of the process pool outlives the scan: every worker joined, and the forkserver and
resource tracker that a pool started stopped again (issue 16)."""

import multiprocessing

import pytest
from support import oscillator, write

from eigengate.scan import pool as pool_mod
from eigengate.scan.config import load_config
from eigengate.scan.runner import POOL_THRESHOLD, scan


@pytest.fixture
def repo(tmp_path):
    (tmp_path / ".git").mkdir()
    write(tmp_path / "pyproject.toml", "[tool.eigengate.requirements]\nstable = true\n")
    for i in range(POOL_THRESHOLD + 4):  # enough files for a pool
        write(tmp_path / "models" / f"m{i:02d}.yaml", oscillator(f"m{i:02d}"))
    return tmp_path


def test_a_pool_leaves_no_process_behind(repo):
    import numpy  # noqa: F401 - loaded here, so the pool takes the forkserver road

    before = pool_mod._helpers_running()
    result = scan([repo], load_config(start=repo), jobs=2, use_cache=False)
    assert result.analysed == POOL_THRESHOLD + 4
    assert all(fr.results for fr in result.files)
    assert multiprocessing.active_children() == []
    assert pool_mod._helpers_running() == before  # what the pool started, it stopped


def test_helpers_never_imported_are_not_running(monkeypatch):
    # a forked pool imports neither helper module: their absence means neither runs
    monkeypatch.delitem(__import__("sys").modules, "multiprocessing.forkserver", raising=False)
    monkeypatch.delitem(__import__("sys").modules, "multiprocessing.resource_tracker",
                        raising=False)
    assert pool_mod._helpers() == (None, None)
    assert pool_mod._helpers_running() == (False, False)
