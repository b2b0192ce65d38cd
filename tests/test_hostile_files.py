"""One bad file never stops the others: every hostile file of this corpus becomes EG001 for
that file, in-process and through the command line, and a run over a repository holding all
of them still checks and reports every good model. Also: files outside the repository are
never read (nor their contents echoed), and the command line's own output errors are one line.
"""

import io
import json
import os
import subprocess
import sys
import zipfile
from pathlib import Path

import numpy as np
import pytest

from eigengate.scan.config import Config
from eigengate.scan.engine import check_file
from support import oscillator, run_cli, write

GOOD = ["models/good_a.yaml", "models/deeper/good_b.yaml"]
SECRET = "hunter2-do-not-echo"


def _npz_claiming(path: Path, n: int) -> None:
    """A small .npz whose A.npy header claims an n×n float64 array (no data follows)."""
    buf = io.BytesIO()
    np.lib.format.write_array_header_1_0(buf, {"descr": "<f8", "fortran_order": False,
                                               "shape": (n, n)})
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as zf:
        zf.writestr("A.npy", buf.getvalue())


def _sparse_mat(path: Path, n: int) -> None:
    """A sparse .mat whose element header declares 2³¹ − 1 stored entries (nzmax) for a
    matrix that holds n: refused from the header (a 10⁵-state sparse file itself is now read
    sparse, tests/sparse/). Level-5 layout: 128-byte header, miMATRIX tag, array flags."""
    import struct

    import scipy.io
    import scipy.sparse

    scipy.io.savemat(path, {"A": scipy.sparse.eye(n, format="csc")})
    raw = bytearray(path.read_bytes())
    struct.pack_into("<I", raw, 128 + 8 + 12, 2**31 - 1)
    path.write_bytes(bytes(raw))


def _ref(name: str) -> str:
    return f"model_format: 1\nplant:\n  A: {{file: {name}}}\nrequirements:\n  stable: true\n"


# name → (what to write: text, bytes or a callable(path, outside_folder)), expected words
HOSTILE = {
    "models/int400.yaml": ("model_format: 1\nplant:\n  A: [[" + "9" * 400 + "]]\n",
                           "400 digits"),
    "models/int5000.yaml": ("model_format: 1\nplant:\n  A: [[" + "9" * 5000 + "]]\n",
                            "5000 digits"),
    "models/int5000.json": ('{"model_format": 1, "plant": {"A": [[' + "9" * 5000 + "]]}}",
                            "5000 digits"),
    "models/int400.toml": ("model_format = 1\n[plant]\nA = [[" + "9" * 400 + "]]\n",
                           "400 digits"),
    "models/int5000.toml": ("model_format = 1\n[plant]\nA = [[" + "9" * 5000 + "]]\n",
                            "5000 digits"),
    "models/hexbig.yaml": ("model_format: 1\nplant:\n  A: [[0x" + "f" * 300 + "]]\n",
                           "digits"),
    "models/dotted.toml": ("model_format = 1\n" + ".".join(["a"] * 200) + " = 1\n",
                           "deeper than 64"),
    "models/dotted_long.toml": ("model_format = 1\n" + ".".join(["a"] * 50_000) + " = 1\n",
                                "deeper than 64"),
    "models/tables.toml": ("model_format = 1\n" + "".join(
        "[" + ".".join(["t"] * k) + "]\n" for k in range(1, 70)), "deeper than 64"),
    "models/yaml11.yaml": ("model_format: 1\nplant:\n  A: [[1_000]]\n", "'1_000'"),
    "models/yes.yaml": ("model_format: 1\nplant:\n  A: [[-1]]\nrequirements:\n  stable: yes\n",
                        "'yes'"),
    "models/tagged.yaml": ("model_format: 1\nplant:\n  A: [[!!float 1:20]]\n", "YAML 1.2"),
    "models/csv_underscore.yaml": (_ref("u.csv"), "'1_0'"),
    "models/csv_fullwidth.yaml": (_ref("w.csv"), "'\uff11'"),
    "models/csv_nan.yaml": (_ref("n.csv"), "'nan'"),
    "models/npz_bomb.yaml": (_ref("bomb.npz"), "more than the limit of 16000000 entries"),
    "models/mat_sparse.yaml": (_ref("sparse.mat"), "declaring 2147483647 stored entries"),
    "models/fifo.yaml": (lambda p, out: os.mkfifo(p), "not a regular file"),
    "models/loop_a.yaml": (lambda p, out: (os.symlink("loop_b.yaml", p),
                                           os.symlink("loop_a.yaml", p.with_name("loop_b.yaml"))),
                           "cannot be read"),
    "models/outside.yaml": (lambda p, out: os.symlink(out / "secret.yaml", p),
                            "outside the repository"),
    "models/bad\udcffname.yaml": ("model_format: 1\nplant:\n  A: [[-1]]\n", "not valid UTF-8"),
}
SHOWN = {"models/bad\udcffname.yaml": "models/bad\\xffname.yaml",
         "models/loop_a.yaml": "models/loop_a.yaml"}
SIDE_FILES = {"models/u.csv": "1, 2\n3, 1_0\n", "models/w.csv": "\uff11\n",
              "models/n.csv": "nan\n"}


@pytest.fixture
def hostile_repo(tmp_path_factory):
    repo = tmp_path_factory.mktemp("hostile")
    outside = tmp_path_factory.mktemp("outside")
    (outside / "secret.yaml").write_text(f"model_format: 1\nname: {SECRET}\nbad: {SECRET}\n")
    write(repo / "pyproject.toml", "[project]\nname = 'demo'\n[tool.eigengate]\n")
    for name in GOOD:
        write(repo / name, oscillator(Path(name).stem, min_damping=0.05))
    for name, text in SIDE_FILES.items():
        write(repo / name, text)
    _npz_claiming(repo / "models" / "bomb.npz", 30_000)
    _sparse_mat(repo / "models" / "sparse.mat", 1000)
    for name, (what, _) in HOSTILE.items():
        path = Path(os.fsencode(repo / name).decode("utf-8", "surrogateescape"))
        if callable(what):
            what(path, outside)
        else:
            path.write_bytes(what.encode("utf-8", "surrogateescape"))
    return repo


@pytest.mark.parametrize("name", sorted(HOSTILE))
def test_each_hostile_file_is_one_finding(hostile_repo, name):
    fr = check_file(hostile_repo / name, config=Config(root=hostile_repo))
    assert fr.error is not None, name
    assert [f.rule for f in fr.findings] == ["EG001"]
    message = fr.error.render()
    assert message.startswith(SHOWN.get(name, name)), message
    assert HOSTILE[name][1] in message, message
    assert SECRET not in message and "Traceback" not in message and "\n" not in message
    assert message.isprintable(), message


def _all_sources(out: str) -> set[str]:
    return {f["source"] for f in json.loads(out)["files"]}


@pytest.mark.parametrize("named", [False, True], ids=["scan", "named"])
def test_run_over_every_hostile_file_reports_every_good_model(hostile_repo, named):
    names = [os.fsencode(n).decode("utf-8", "surrogateescape") for n in [*HOSTILE, *GOOD]]
    args = ["check", "--format", "json", "--no-baseline"] + (names if named else [])
    # No PYTHONIOENCODING: the default (strict) stdout encoding must cope with odd names.
    env = {k: v for k, v in os.environ.items() if k != "PYTHONIOENCODING"}
    env["LC_ALL"] = "C.UTF-8"
    proc = subprocess.run([sys.executable, "-m", "eigengate", *args], cwd=hostile_repo,
                          capture_output=True, text=True, timeout=300, env=env)
    assert proc.returncode == 1, proc.stderr
    assert "internal error" not in proc.stderr and "Traceback" not in proc.stderr
    doc = json.loads(proc.stdout)
    by_source = {f["source"]: f for f in doc["files"]}
    for name in GOOD:
        assert by_source[name]["models"], name  # checked and reported
    for name in HOSTILE:
        shown = SHOWN.get(name, name)
        assert shown in by_source, (shown, sorted(by_source))
        assert [f["rule"] for f in by_source[shown]["findings"]] == ["EG001"], shown
    assert SECRET not in proc.stdout + proc.stderr


def test_text_run_over_hostile_files_is_printable(hostile_repo):
    proc = run_cli("check", "--no-baseline", "--color", "never", cwd=hostile_repo)
    assert proc.returncode == 1, proc.stderr
    assert "internal error" not in proc.stderr
    assert "models/bad\\xffname.yaml" in proc.stdout
    for name in GOOD:
        assert name in proc.stdout
    assert all(line.isprintable() for line in proc.stdout.splitlines())


def test_outside_link_named_on_the_command_line_is_not_read(hostile_repo):
    proc = run_cli("check", "--no-baseline", "models/outside.yaml", cwd=hostile_repo)
    assert proc.returncode == 1, proc.stderr
    assert "models/outside.yaml" in proc.stdout and "outside the repository" in proc.stdout
    assert SECRET not in proc.stdout + proc.stderr
    assert "secret.yaml" not in proc.stdout  # not even where it points


def _peak_rss_mb(args: list[str], cwd: Path) -> tuple[float, subprocess.CompletedProcess]:
    """Peak resident memory of ``python -m eigengate ARGS``, measured by a fresh parent with
    resource.getrusage(RUSAGE_CHILDREN) (ru_maxrss is in KiB on Linux)."""
    probe = ("import resource, subprocess, sys\n"
             "p = subprocess.run([sys.executable, '-m', 'eigengate', *sys.argv[1:]],"
             " capture_output=True, text=True)\n"
             "print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)\n"
             "print(p.returncode)\nsys.stdout.write(p.stdout)\n")
    proc = subprocess.run([sys.executable, "-c", probe, *args], cwd=cwd, capture_output=True,
                          text=True, timeout=300)
    kib, rc, *rest = proc.stdout.split("\n", 2)
    return int(kib) / 1024, subprocess.CompletedProcess(args, int(rc), "\n".join(rest), "")


@pytest.mark.skipif(sys.platform != "linux", reason="ru_maxrss units differ off Linux")
@pytest.mark.parametrize("name", ["models/npz_bomb.yaml", "models/mat_sparse.yaml",
                                  "models/int5000.toml", "models/dotted_long.toml"])
def test_peak_memory_of_the_worst_files(hostile_repo, name):
    mb, proc = _peak_rss_mb(["check", "--no-baseline", "--no-cache", name], hostile_repo)
    assert proc.returncode == 1 and "EG001" in proc.stdout
    assert mb <= 300, f"{name}: peak {mb:.0f} MB"


def test_npz_that_really_decompresses_large_is_refused_in_little_memory(tmp_path):
    # A real deflated 5000×5000 zero matrix (200 MB of data, about 0.2 MB compressed).
    write(tmp_path / "pyproject.toml", "[tool.eigengate]\n")
    write(tmp_path / "m.yaml", _ref("z.npz"))
    n = 5000
    buf = io.BytesIO()
    np.lib.format.write_array_header_1_0(buf, {"descr": "<f8", "fortran_order": False,
                                               "shape": (n, n)})
    with zipfile.ZipFile(tmp_path / "z.npz", "w", zipfile.ZIP_DEFLATED) as zf:
        with zf.open("A.npy", "w", force_zip64=True) as fh:
            fh.write(buf.getvalue())
            row = bytes(8 * n)
            for _ in range(n):
                fh.write(row)
    assert (tmp_path / "z.npz").stat().st_size < 2_000_000
    mb, proc = _peak_rss_mb(["check", "--no-baseline", "--no-cache", "m.yaml"], tmp_path)
    assert proc.returncode == 1 and "5000×5000" in proc.stdout, proc.stdout
    assert mb <= 300, f"peak {mb:.0f} MB"


# --------------------------------------------------------------------- output errors


def _demo(tmp_path: Path) -> Path:
    write(tmp_path / "repo" / "pyproject.toml", "[tool.eigengate]\n")
    for i in range(40):
        write(tmp_path / "repo" / "models" / f"m{i:02}.yaml", oscillator(f"m{i:02}", 0.05))
    return tmp_path / "repo"


@pytest.mark.parametrize("target", ["pyproject.toml/report.json", "models"])
def test_unwritable_output_is_one_line_and_exit_2(tmp_path, target):
    repo = _demo(tmp_path)
    proc = run_cli("check", "--no-baseline", "-o", f"json:{target}", cwd=repo)
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("eigengate: error: cannot write"), proc.stderr
    assert target in lines[0] and "internal error" not in proc.stderr


def test_output_does_not_create_folders_outside_the_repository(tmp_path):
    repo = _demo(tmp_path)
    proc = run_cli("check", "--no-baseline", "-o", "json:../made/up/r.json", cwd=repo)
    assert proc.returncode == 2 and "only inside the repository" in proc.stderr, proc.stderr
    assert not (tmp_path / "made").exists()
    # inside the repository a missing folder is still made
    proc = run_cli("check", "--no-baseline", "-o", "json:reports/new/r.json", cwd=repo)
    assert proc.returncode == 0, proc.stderr
    assert json.loads((repo / "reports" / "new" / "r.json").read_text())["files"]
    # and an existing folder outside is written to
    proc = run_cli("check", "--no-baseline", "-o", f"json:{tmp_path / 'r.json'}", cwd=repo)
    assert proc.returncode == 0 and (tmp_path / "r.json").is_file(), proc.stderr


def test_closed_pipe_stops_quietly(tmp_path):
    repo = _demo(tmp_path)
    env = {**os.environ, "PYTHONIOENCODING": "utf-8"}
    for args in (["check", "--no-baseline", "--no-cache"], ["rules"]):
        proc = subprocess.Popen([sys.executable, "-m", "eigengate", *args], cwd=repo, env=env,
                                stdout=subprocess.PIPE, stderr=subprocess.PIPE)
        # What `| head -1` does once it has its line; closed before anything is written, so
        # that no pipe buffer, whatever its size, takes the report.
        proc.stdout.close()
        err = proc.stderr.read().decode()
        rc = proc.wait(timeout=120)
        proc.stderr.close()
        assert err == "", err
        assert rc == 141, rc  # 128 + SIGPIPE: what shells report for a writer cut off



@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="needs FIFOs")
@pytest.mark.parametrize("runner", ["check", "check --no-cache", "pytest"])
def test_a_fifo_selected_by_name_is_a_finding_not_a_hang(tmp_path, runner):
    # include globs select files by name, without looking inside: the cache's key and the
    # loader must both refuse to open a FIFO (which would block), and a file over the size
    # limit is not read whole for its key either
    import subprocess
    import sys

    from support import cli_env

    (tmp_path / ".git").mkdir()
    write(tmp_path / "pyproject.toml", '[tool.eigengate]\ninclude = ["models/*.yaml"]\n')
    write(tmp_path / "models" / "arm.yaml", oscillator("arm", min_damping=0.05))
    os.mkfifo(tmp_path / "models" / "pipe.yaml")
    big = tmp_path / "models" / "huge.yaml"
    with open(big, "wb") as fh:
        fh.write(b"model_format: 1\n# " + b"x" * (9 << 20) + b"\n")
    cmd = [sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider"] \
        if runner == "pytest" else [sys.executable, "-m", "eigengate", *runner.split(), "."]
    out = subprocess.run(cmd, capture_output=True, text=True, cwd=tmp_path, env=cli_env(),
                         timeout=120)
    text = out.stdout + out.stderr
    assert out.returncode == 1, text
    assert "Traceback" not in text and "huge.yaml" in text
    if runner == "pytest":  # (pytest's own walk passes over what is not a regular file)
        assert "1 passed, 1 error" in text
    else:
        assert "FIFO" in text and "arm" in text
