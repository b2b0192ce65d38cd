"""The package type-checks: mypy finds no error over plugin/eigengate at the settings of
[tool.mypy] in pyproject.toml, and none in strict mode on the public face
(eigengate/__init__.py)."""

import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]

pytest.importorskip("mypy", reason="mypy is in the test extras")


def mypy(tmp_path, *args):
    return subprocess.run([sys.executable, "-m", "mypy", "--cache-dir", str(tmp_path / "cache"),
                           "--config-file", str(REPO / "pyproject.toml"), *args],
                          capture_output=True, text=True, cwd=REPO, timeout=600)


def test_package_has_no_type_errors(tmp_path):
    out = mypy(tmp_path, "plugin/eigengate")
    assert out.returncode == 0, out.stdout + out.stderr
    assert out.stdout.startswith("Success: no issues found")


def test_public_face_is_strict_clean(tmp_path):
    out = mypy(tmp_path, "--strict", "--follow-imports=silent", "plugin/eigengate/__init__.py")
    assert out.returncode == 0, out.stdout + out.stderr
