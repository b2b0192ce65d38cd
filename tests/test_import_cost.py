"""Importing eigengate must not load numpy, scipy or python-control (a pytest plugin loads in
every test run of its users)."""

import subprocess
import sys


HEAVY = ('numpy', 'scipy', 'control', 'yaml', 'dask', 'distributed')


def test_import_loads_no_heavy_library():
    code = ("import sys, eigengate, eigengate.cli, eigengate.errors; "
            f"print(sorted(m for m in {HEAVY!r} if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_a_local_check_never_loads_dask(tmp_path):
    """dask is the cluster extra's: a local run of the command line (the pool included)
    imports neither dask nor distributed, even where they are installed."""
    from support import oscillator, write

    (tmp_path / ".git").mkdir()
    for k in range(20):  # enough files for the process pool
        write(tmp_path / f"m{k:02d}.yaml", oscillator(f"m{k}"))
    code = ("import sys; from eigengate.cli import main; "
            f"status = main(['check', {str(tmp_path)!r}, '-q', '--jobs', '2']); "
            "print(status, sorted(m for m in ('dask', 'distributed') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=tmp_path)
    assert out.stdout.strip().splitlines()[-1] == "1 []"  # EG103 findings, and no dask


def test_public_names_resolve():
    import eigengate

    for name in eigengate.__all__:
        assert getattr(eigengate, name) is not None


def test_requirement_names_known_without_their_classes_agree_with_the_classes():
    # a warm re-check validates cached records against the names without importing the
    # requirement modules; the names must be exactly the classes' (checked here)
    from eigengate.scan.records import REQUIREMENT_NAMES, requirement_classes

    assert REQUIREMENT_NAMES == set(requirement_classes())
