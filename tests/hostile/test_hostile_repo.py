"""The corpus as a repository: one run of the command line (a real subprocess) over every
hostile model file beside good models reports every good model, an EG001 naming each bad file,
a model for each valid one, no traceback and no internal error; hostile policies and baselines
stop the run with one line; and the worst single file stays within 300 MB of memory."""

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from eigengate.model.formats import printable_name
from hostile_files import CASES, NAMED_HOLES
from hostile_harness import make_repo
from hostile_policy import POLICIES
from support import oscillator, run_cli
from test_hostile_corpus import ACTIVE

GOOD = {f"models/good/g{i}.yaml": oscillator(f"good-{i}", min_damping=0.05) for i in range(4)}
GOOD["models/good/lift.toml"] = ("model_format = 1\nname = 'good-toml'\n[plant]\n"
                                 "A = [[-1.0, 0.5], [0.0, -2.0]]\n[requirements]\nstable = true\n")
GOOD["models/good/g.json"] = json.dumps({"model_format": 1, "name": "good-json", "plant": {
    "A": [[-3.0]]}, "requirements": {"stable": True}})
LEAKS = ("Traceback", "internal error", 'File "')


def _repo(root: Path, cases) -> Path:
    repo = make_repo(root, cases)
    for rel, text in GOOD.items():
        (repo / rel).parent.mkdir(parents=True, exist_ok=True)
        (repo / rel).write_text(text, encoding="utf-8")
    return repo


def _no_leaks(proc) -> None:
    for stream in (proc.stdout, proc.stderr):
        for leak in LEAKS:
            assert leak not in stream, stream[-3000:]


def test_a_run_over_every_hostile_file_still_reports_every_good_model(tmp_path):
    # A folder named like a model file is walked into, not reported: leave it out here.
    cases = [c for c in ACTIVE if c.path.rsplit(".", 1)[-1] in ("yaml", "toml", "json")
             and c.id != "model-is-folder"]
    repo = _repo(tmp_path / "repo", cases)
    proc = run_cli("check", "--no-cache", "--no-baseline", "--jobs", "2", "-f", "json",
                   cwd=repo, timeout=600)
    _no_leaks(proc)
    assert proc.returncode == 1, proc.stderr[-2000:]  # findings, not an internal error
    files = {f["source"]: f for f in json.loads(proc.stdout)["files"]}
    for rel in GOOD:
        assert files[rel]["status"] != "invalid" and files[rel]["models"], files[rel]
        assert all(m["verdicts"] for m in files[rel]["models"]), rel
    titles = {m["name"] for rel in GOOD for m in files[rel]["models"]}
    assert titles == {"good-0", "good-1", "good-2", "good-3", "good-toml", "good-json"}
    for case in cases:
        shown = printable_name(case.path)  # a name that is not UTF-8 is reported escaped
        found = files.get(shown)
        assert found is not None, f"{case.id}: {shown} not reported"
        if case.expect == "error":  # never "ok": one EG001 naming the file
            assert found["status"] == "invalid", (case.id, found["status"])
            assert not found["models"], case.id
            [finding] = [f for f in found["findings"] if f["rule"] == "EG001"]
            assert finding["source"] == shown and shown in finding["message"], case.id
        else:
            assert found["status"] != "invalid" and found["models"], (case.id, found)


@pytest.mark.parametrize("case", POLICIES, ids=[c.id for c in POLICIES])
def test_a_hostile_policy_or_baseline_stops_the_run_with_one_line(case, tmp_path, monkeypatch,
                                                                     capsys):
    from eigengate.cli import main

    repo = _repo(tmp_path / "repo", [])
    target = repo / case.file
    target.parent.mkdir(parents=True, exist_ok=True)
    target.write_bytes(case.text)
    monkeypatch.chdir(repo)
    code = main(["check", "--no-cache", "--jobs", "1"])
    out, err = capsys.readouterr()
    assert code == 2, (out[-500:], err)
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("eigengate: error: "), err
    assert Path(case.file).name in lines[0], err
    for word in case.words:
        assert word in lines[0], err
    assert "internal error" not in err and "Traceback" not in err


def test_names_with_control_characters_reach_no_human_readable_output(tmp_path):
    pending = [c for c in CASES if c.id in ("escape-in-name", "json-escape-name")]
    repo = _repo(tmp_path / "repo", pending)
    for fmt in ("text", "markdown"):
        proc = run_cli("check", "--no-cache", "-f", fmt, cwd=repo)
        _no_leaks(proc)
        assert "\x1b" not in proc.stdout and "\x00" not in proc.stdout, fmt
        assert not any(line.startswith("::") for line in proc.stdout.splitlines()), fmt


def test_a_model_file_the_include_patterns_miss_is_reported(tmp_path):
    repo = _repo(tmp_path / "repo", [])
    (repo / "pyproject.toml").write_text("[tool.eigengate]\ninclude = ['models/**/*.yaml']\n")
    (repo / "models/stray.yml").write_text(oscillator("stray"))
    proc = run_cli("check", "--no-cache", cwd=repo)
    _no_leaks(proc)
    assert "models/stray.yml" in proc.stdout + proc.stderr


def test_a_model_without_requirements_is_not_called_ok(tmp_path):
    repo = tmp_path / "repo"
    repo.mkdir()
    (repo / "pyproject.toml").write_text("[project]\nname = 'p'\n")
    (repo / "m.yaml").write_text("model_format: 1\nname: unstable\nplant: {A: [[2.0]]}\n")
    proc = run_cli("check", "--no-cache", cwd=repo)
    _no_leaks(proc)
    assert proc.returncode == 1 and ": ok" not in proc.stdout, proc.stdout


@pytest.mark.parametrize("where", ["unwritable", "outside"])
def test_output_errors_are_one_line(tmp_path, where):
    repo = _repo(tmp_path / "repo", [])
    target = ("/proc/eigengate-no/report.json" if where == "unwritable"
              else str(tmp_path / "elsewhere" / "deep" / "report.json"))
    proc = run_cli("check", "--no-cache", "-o", f"json:{target}", cwd=repo)
    _no_leaks(proc)
    assert proc.returncode == 2 and len(proc.stderr.strip().splitlines()) == 1, proc.stderr
    assert not (tmp_path / "elsewhere").exists()


MEASURE = textwrap.dedent("""\
    import json, resource, sys
    sys.path[:0] = sys.argv[1:3]
    from pathlib import Path
    from eigengate.errors import EigengateError
    from eigengate.load.loader import load_models
    import hostile_files
    repo = Path(sys.argv[3])
    ids = set(sys.argv[4].split(","))
    def rss():  # peak resident set in MiB: VmHWM belongs to this program's own memory, while
        try:    # getrusage's maxrss survives fork and exec, so it would report the peak of
            with open("/proc/self/status", encoding="ascii") as f:  # the parent (a busy
                for line in f:                                       # test worker) instead
                    if line.startswith("VmHWM:"):
                        return int(line.split()[1]) // 1024
        except OSError:
            pass
        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss // 1024
    start, jumps = rss(), {}
    for case in hostile_files.CASES:
        if case.id not in ids:
            continue
        before = rss()
        try:
            load_models(repo / case.path, repo, allow_python=True)
        except EigengateError:
            pass
        jumps[case.id] = rss() - before
    print(json.dumps({"start": start, "peak": rss(), "jumps": jumps}))
    """)


def test_peak_memory_of_the_worst_file_stays_within_300_mb(tmp_path):
    """One process loads every case in turn; its peak resident set (getrusage) bounds the
    peak of the worst single file, and the largest rise names that file."""
    repo = make_repo(tmp_path / "repo", ACTIVE)
    here = Path(__file__).parent
    ids = ",".join(c.id for c in ACTIVE)
    proc = subprocess.run([sys.executable, "-c", MEASURE, str(here), str(here.parent),
                           str(repo), ids], capture_output=True, text=True, timeout=600,
                          env={**os.environ, "PYTHONWARNINGS": "ignore"})
    assert proc.returncode == 0, proc.stderr[-2000:]
    figures = json.loads(proc.stdout.strip().splitlines()[-1])
    worst = max(figures["jumps"], key=figures["jumps"].get)
    print(f"peak RSS {figures['peak']} MiB (start {figures['start']} MiB); largest rise "
          f"{figures['jumps'][worst]} MiB on {worst}")
    assert figures["peak"] <= 300, figures
