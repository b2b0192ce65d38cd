"""The collector's path resolution (``eigengate.pytest.cached.real_relative``) keeps each
folder's resolution and looks only at the file itself again: it must give what
``os.path.realpath`` gives (the reference: the standard library) for files, links to files
and folders, link chains, loops, missing files and relative names."""

import os

import pytest

from eigengate.load.loader import real_folder
from eigengate.pytest import cached


@pytest.fixture
def tree(tmp_path):
    (tmp_path / "repo" / "models" / "deep").mkdir(parents=True)
    (tmp_path / "outside").mkdir()
    (tmp_path / "repo" / "models" / "a.yaml").write_text("model_format: 1\n")
    (tmp_path / "outside" / "b.yaml").write_text("model_format: 1\n")
    links = {
        "repo/models/to_a.yaml": "a.yaml",
        "repo/models/to_out.yaml": "../../outside/b.yaml",
        "repo/models/chain.yaml": "to_a.yaml",
        "repo/models/loop1.yaml": "loop2.yaml",
        "repo/models/loop2.yaml": "loop1.yaml",
        "repo/models/dangling.yaml": "gone.yaml",
        "repo/linked_models": "models",
        "repo/models/deep/up": "..",
    }
    for name, target in links.items():
        os.symlink(target, tmp_path / name)
    cached._real.cache_clear()
    real_folder.cache_clear()
    return tmp_path


NAMES = ["repo/models/a.yaml", "repo/models/to_a.yaml", "repo/models/to_out.yaml",
         "repo/models/chain.yaml", "repo/models/loop1.yaml", "repo/models/dangling.yaml",
         "repo/models/missing.yaml", "repo/linked_models/a.yaml", "repo/linked_models/chain.yaml",
         "repo/models/deep/up/a.yaml", "repo/models/deep/up/deep/up/to_a.yaml",
         "repo/models/./a.yaml", "repo/models/deep/../a.yaml", "repo/models/deep/up/../a.yaml",
         "repo/models/deep/up/../models/a.yaml", "repo//models/a.yaml", "repo/models",
         "repo/models/.", "repo/models/deep/up/.."]


@pytest.mark.parametrize("name", NAMES)
def test_same_as_realpath(tree, name, monkeypatch):
    path = tree / name
    assert cached._real(str(path)) == os.path.realpath(path)
    monkeypatch.chdir(tree / "repo")  # and named relative to the working folder
    rel = os.path.relpath(path)
    cached._real.cache_clear()
    assert cached._real(rel) == os.path.realpath(rel)


def test_real_relative_inside_and_outside(tree):
    root = tree / "repo"
    assert cached.real_relative(root / "models" / "chain.yaml", root) == "models/a.yaml"
    assert cached.real_relative(root / "linked_models" / "a.yaml", root) == "models/a.yaml"
    assert cached.real_relative(root / "models" / "to_out.yaml", root) is None
    assert cached.real_relative(root / "models" / "deep" / "up" / "..", root) == "."
