"""Importing eigengate must not load numpy, scipy or python-control (a pytest plugin loads in
every test run of its users)."""

import subprocess
import sys


def test_import_loads_no_heavy_library():
    code = ("import sys, eigengate, eigengate.cli, eigengate.errors; "
            "print(sorted(m for m in ('numpy', 'scipy', 'control', 'yaml') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_public_names_resolve():
    import eigengate

    for name in eigengate.__all__:
        assert getattr(eigengate, name) is not None
