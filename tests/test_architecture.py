"""The layer rule of DEVELOPERS.md, enforced: the import-linter contracts in pyproject.toml
(stages import one way, report writers independent, start-up modules free of heavy
libraries) hold for the package, and a wrong-way import breaks them."""

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
PACKAGE = REPO / "plugin" / "eigengate"
LINT = Path(sys.executable).with_name("lint-imports")

pytestmark = pytest.mark.skipif(not LINT.exists(), reason="import-linter is in the test extras")


def lint(plugin_dir: Path) -> subprocess.CompletedProcess:
    """``lint-imports`` with this repository's contracts, over the package below ``plugin_dir``."""
    env = {**os.environ, "PYTHONPATH": str(plugin_dir)}
    return subprocess.run([str(LINT), "--config", str(REPO / "pyproject.toml"), "--no-cache"],
                          capture_output=True, text=True, env=env, cwd=plugin_dir, timeout=300)


def test_contracts_are_kept():
    out = lint(REPO / "plugin")
    assert out.returncode == 0, out.stdout + out.stderr
    assert "4 kept, 0 broken" in out.stdout


@pytest.mark.parametrize("module, line, contract", [
    ("model/core.py", "from ..scan import engine", "Stages import one way"),
    ("reports/json.py", "from . import sarif", "Report writers are independent"),
    ("cli/__init__.py", "import numpy", "Start-up modules import no numpy"),
    ("cli/files.py", "import numpy", "Start-up modules import no numpy"),
    ("cli/__init__.py", "import distributed", "Start-up modules import no numpy"),
    ("scan/runner.py", "import dask", "Only scan.cluster imports dask"),
])
def test_a_wrong_way_import_breaks_a_contract(tmp_path, module, line, contract):
    shutil.copytree(PACKAGE, tmp_path / "eigengate",
                    ignore=shutil.ignore_patterns("__pycache__"))
    target = tmp_path / "eigengate" / module
    target.write_text(target.read_text(encoding="utf-8") + f"\n\ndef _wrong():\n    {line}\n",
                      encoding="utf-8")
    out = lint(tmp_path)
    assert out.returncode != 0
    assert f"{contract}" in out.stdout and "BROKEN" in out.stdout


def test_docs_import_only_the_public_face():
    """Every import a document shows is ``from eigengate import ...`` of a public name."""
    import re

    import eigengate

    texts = {p.name: p.read_text(encoding="utf-8") for p in [
        REPO / "README.md", REPO / "example_repo" / "README.md", *(REPO / "docs").glob("*.md")]}
    seen = 0
    for name, text in texts.items():
        assert not re.search(r"^\s*(from|import) eigengate\.", text, re.M), name
        for m in re.finditer(r"^\s*from eigengate import (\([^)]*\)|.*)$", text, re.M):
            for item in re.split(r"[,\s()]+", m.group(1).split("#")[0].strip()):
                if item:
                    seen += 1
                    assert item in eigengate.__all__, (name, item)
    assert seen > 10
