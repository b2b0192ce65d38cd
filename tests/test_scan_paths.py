"""The no-change check and the pool, as whole processes: a warm check writes its reports from
the cached records alone (numpy and scipy never imported, the same bytes as the cold check),
and ``--jobs 2`` leaves no process behind when it returns."""

import subprocess
import sys
from pathlib import Path

import pytest

from support import cli_env, lift_axis, oscillator, write

#: Runs the command line like ``python -m eigengate``; at exit (the command has returned) it
#: exits 99 naming any heavy module that was imported, and 98 naming any child process of
#: this one still alive (Linux: read from /proc).
_GUARDED = """\
import os, sys
def heavy():
    return sorted({m.split('.')[0] for m in sys.modules} & {'numpy', 'scipy'}) or sorted(
        {m for m in sys.modules} & {'eigengate.analysis.modes', 'eigengate.scan.cluster',
                                    'eigengate.rules.requirements'})
def children():
    me, out = str(os.getpid()), []
    for pid in (p for p in os.listdir('/proc') if p.isdigit()):
        try:
            with open(f'/proc/{pid}/stat') as fh:
                fields = fh.read().rsplit(')', 1)[1].split()
        except OSError:
            continue
        if fields[1] == me and fields[0] != 'Z':
            out.append(pid)
    return out
from eigengate.cli import main
status = main(sys.argv[2:])
sys.stdout.flush()
if sys.argv[1] == 'light' and heavy():
    sys.stderr.write('heavy modules imported: ' + ' '.join(heavy()) + '\\n')
    os._exit(99)
if sys.argv[1] == 'alone' and children():
    sys.stderr.write('child processes left: ' + ' '.join(children()) + '\\n')
    os._exit(98)
os._exit(status)
"""

_FORMATS = ("text", "json", "sarif", "junit", "markdown", "annotations")


def _repository(root: Path, copies: int = 3) -> Path:
    (root / ".git").mkdir(parents=True)
    for i in range(copies):
        write(root / "models" / f"osc{i}.yaml", oscillator(f"osc{i}"))  # fails EG103
        write(root / "models" / f"lift{i}.yaml", lift_axis(2.08))  # passes
    write(root / "models" / "broken.yaml", "model_format: 1\nname: [\n")  # invalid YAML
    return root


def _guarded(mode: str, root: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", _GUARDED, mode, "check", *args, str(root)],
                          capture_output=True, text=True, cwd=root, env=cli_env(), timeout=300)


def _reports(root: Path, name: str) -> list[str]:
    out = root.parent / name
    out.mkdir()
    return [f"--output={f}:{out / f}" for f in _FORMATS]


def test_warm_check_imports_neither_numpy_nor_scipy_and_writes_the_same_bytes(tmp_path):
    root = _repository(tmp_path / "repo")
    cold = _guarded("any", root, "--jobs", "1", *_reports(root, "cold"))
    assert cold.returncode == 1, cold.stderr  # the oscillators fail: findings, exit 1
    assert "EG103" in cold.stdout and "broken.yaml" in cold.stdout
    warm = _guarded("light", root, "--jobs", "1", *_reports(root, "warm"))
    assert warm.returncode == 1, warm.stderr  # 99 would be numpy or scipy imported
    assert warm.stdout == cold.stdout
    for f in _FORMATS:
        assert (tmp_path / "warm" / f).read_bytes() == (tmp_path / "cold" / f).read_bytes(), f


def test_changed_file_is_analysed_again_so_the_guard_can_fail(tmp_path):
    # The guard above is not vacuous: a check that has to analyse imports numpy.
    root = _repository(tmp_path / "repo")
    assert _guarded("any", root, "--jobs", "1").returncode == 1
    write(root / "models" / "lift0.yaml", lift_axis(1.2))
    again = _guarded("light", root, "--jobs", "1")
    assert again.returncode == 99 and "numpy" in again.stderr


@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="reads /proc (Linux)")
def test_jobs_2_leaves_no_process_behind(tmp_path):
    root = _repository(tmp_path / "repo", copies=12)  # above the pool's threshold of files
    pooled = _guarded("alone", root, "--jobs", "2", "--no-cache")
    assert pooled.returncode == 1, pooled.stderr  # 98 would be a child process still alive
    single = subprocess.run([sys.executable, "-m", "eigengate", "check", "--jobs", "1",
                             "--no-cache", str(root)], capture_output=True, text=True,
                            cwd=root, env=cli_env(), timeout=300)
    assert pooled.stdout == single.stdout  # the pool changes nothing in the findings


_LIGHT_CONFTEST = """\
import sys

def pytest_collection_finish(session):
    heavy = sorted({m.split('.')[0] for m in sys.modules} & {'numpy', 'scipy'})
    with open('collected-with.txt', 'w') as fh:
        fh.write(' '.join(heavy) or 'nothing heavy')
"""


def _pytest(root: Path) -> tuple[str, str]:
    out = subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "eigengate.pytest.plugin",
                          "-p", "no:cacheprovider"], capture_output=True, text=True, cwd=root,
                         env=cli_env(PYTEST_DISABLE_PLUGIN_AUTOLOAD="1"), timeout=300)
    return out.stdout.strip().splitlines()[-1], (root / "collected-with.txt").read_text()


def test_pytest_collector_serves_unchanged_files_from_the_cache_without_numpy(tmp_path):
    root = _repository(tmp_path / "repo")
    (root / "pyproject.toml").write_text('[tool.eigengate]\ninclude = ["models/*.yaml"]\n',
                                         encoding="utf-8")
    (root / "conftest.py").write_text(_LIGHT_CONFTEST, encoding="utf-8")
    cold, cold_heavy = _pytest(root)
    assert "3 failed, 3 passed, 1 error" in cold and "numpy" in cold_heavy
    warm, warm_heavy = _pytest(root)  # the cache written by the first session
    assert warm_heavy == "nothing heavy"
    assert warm.split(" in ")[0] == cold.split(" in ")[0]
    # and the command line reads what pytest wrote: its warm check needs no analysis
    check = _guarded("light", root, "--jobs", "1")
    assert check.returncode == 1, check.stderr
    assert "EG103" in check.stdout
