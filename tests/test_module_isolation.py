"""Modules a chunk or a revision brings in are set aside without touching eigengate's own modules
or the interpreter's installed packages: a second copy of an eigengate module would be a second
copy of its classes (``isinstance`` and ``except`` then miss), and an extension module such as
numpy's cannot be imported twice in one process."""

import sys
import types

import pytest

from eigengate.scan import cluster, gitrev


def _fake(monkeypatch, name: str, file) -> None:
    module = types.ModuleType(name)
    module.__file__ = str(file)
    monkeypatch.setitem(sys.modules, name, module)


def test_a_chunk_forgets_only_the_repository_modules(tmp_path, monkeypatch):
    root = tmp_path / "repo"
    venv = root / ".venv"
    (venv / "lib").mkdir(parents=True)
    (root / "plantdyn").mkdir()
    before = set(sys.modules)
    _fake(monkeypatch, "plantdyn_field", root / "plantdyn" / "field.py")      # a vector field
    _fake(monkeypatch, "eigengate._fake_own", root / "plugin" / "own.py")     # eigengate itself
    _fake(monkeypatch, "fake_installed", venv / "lib" / "fake_installed.py")  # the venv's
    _fake(monkeypatch, "fake_elsewhere", tmp_path / "elsewhere.py")          # outside the root
    monkeypatch.setattr(sys, "prefix", str(venv))
    cluster._forget_modules(before, str(root.resolve()))
    assert "plantdyn_field" not in sys.modules
    for kept in ("eigengate._fake_own", "fake_installed", "fake_elsewhere"):
        assert kept in sys.modules, kept


class _Blobs:
    def read(self, oid: str) -> bytes:
        return b"VALUE = 1\n"


def test_a_revision_tree_leaves_eigengate_in_place(monkeypatch):
    files = {"eigengate/__init__.py": ("100644", "a", 10),
             "plantdyn/__init__.py": ("100644", "b", 10)}
    _fake(monkeypatch, "plantdyn", "/nowhere/plantdyn/__init__.py")
    own = sys.modules["eigengate"]
    tree = gitrev._PythonTree(files, _Blobs(), "HEAD")
    try:
        tree.root()
        assert sys.modules.get("eigengate") is own  # not stashed: no second copy later
        assert "plantdyn" not in sys.modules        # the working tree's module set aside
    finally:
        tree.close()
    assert sys.modules["eigengate"] is own
    assert sys.modules["plantdyn"].__file__ == "/nowhere/plantdyn/__init__.py"
