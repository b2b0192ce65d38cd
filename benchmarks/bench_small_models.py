"""Small models (2–12 states), whole processes as a user runs them, side by side in rounds.

* cold ``eigengate check -q -j 1`` (cache removed) against a script: PyYAML's C loader,
  ``numpy.linalg.eigvals`` and the same two conditions (max Re < 0, min ζ ≥ 0.05): target
  ≤ 1.3×;
* warm ``eigengate check -q -j 1`` (nothing changed) against the cold one: target ≥ 25×
  faster, whole process;
* cold ``--jobs 2`` against ``--jobs 1`` (``--no-cache``), beside the machine's own
  two-process ceiling in the same rounds: the script on each half of the files in two
  processes at once against the whole script in one: target ≥ 0.9 × the ceiling;
* ``pytest`` with the collector (cold: cache removed; warm: the cache of the cold run)
  against a parametrised pytest file that checks each model with python-control
  (``ss``, ``poles``, ``damp``): target ≤ 0.35× (warm); beside it, pytest's own floor: as
  many items from a collector that reads nothing, the same ones failing.

eigengate runs as the installed console script beside the interpreter (``python -m
eigengate`` where there is none). Every process starts fresh, with its bytecode cached
outside the folder as on a user's machine; each side runs once per round, back to back (the
warm check three times in a row, its best counting), and each figure is the median of the per-round ratios with their range
(:func:`bench_engine.ratio`): only ratios mean anything on a shared machine.
Run: ``python benchmarks/bench_small_models.py [--files 2000] [--repeat 5]``.
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_engine import generate, ratio, rounds  # noqa: E402

SCRIPT = """\
import sys
from pathlib import Path
import numpy as np
import yaml
paths = sys.argv[2:] or sorted(Path(sys.argv[1]).glob("*.yaml"))
passed = 0
for p in paths:
    with open(p, "rb") as fh:
        doc = yaml.load(fh, Loader=yaml.CSafeLoader)
    ev = np.linalg.eigvals(np.array(doc["plant"]["A"], dtype=float))
    wn = np.abs(ev)
    zeta = np.where(wn > 0, -ev.real / np.where(wn > 0, wn, 1.0), 1.0)[ev.imag != 0]
    passed += bool(ev.real.max() < 0 and (zeta.size == 0 or zeta.min() >= 0.05))
print(passed)
"""

CONTROL_TEST = """\
from pathlib import Path
import control
import numpy as np
import pytest
import yaml

FILES = sorted((Path(__file__).parent.parent / "models").glob("*.yaml"))

@pytest.mark.parametrize("path", FILES, ids=[p.stem for p in FILES])
def test_model(path):
    with open(path, "rb") as fh:
        doc = yaml.load(fh, Loader=yaml.CSafeLoader)
    plant = doc["plant"]
    sys_ = control.ss(plant["A"], plant["B"], plant["C"], np.zeros((1, 2)))
    poles = control.poles(sys_)
    wn, zeta, _ = control.damp(sys_, doprint=False)
    assert poles.real.max() < 0
    assert zeta[np.asarray(poles).imag != 0].min(initial=1.0) >= 0.05
"""


#: pytest's own floor for the collector row: as many items as model files, from a collector
#: that reads nothing, the same ones failing (with a one-line message) as in the real run.
FLOOR_CONFTEST = """\
import pytest

FAILING = set({failing!r})


class Nothing(pytest.Item):
    def runtest(self):
        if self.name in FAILING:
            raise AssertionError("does not meet its requirements")

    def reportinfo(self):
        return self.path, 0, self.name


class Listed(pytest.File):
    def collect(self):
        for name in self.path.read_text().split():
            yield Nothing.from_parent(self, name=name)


def pytest_collect_file(parent, file_path):
    if file_path.name == "names.txt":
        return Listed.from_parent(parent, path=file_path)
"""


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--files", type=int, default=2000)
    ap.add_argument("--repeat", type=int, default=5, help="rounds")
    ap.add_argument("--no-pytest", action="store_true", help="leave out the pytest row")
    args = ap.parse_args(argv)

    work = Path(tempfile.mkdtemp(prefix="eigengate-small-bench-"))
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    env["PYTHONPYCACHEPREFIX"] = str(work / "pycache")
    env["PYTHONPATH"] = os.pathsep.join(
        [str(Path(__file__).resolve().parent.parent / "plugin"), env.get("PYTHONPATH", "")])
    try:
        repo = work / "repo"
        (repo / ".git").mkdir(parents=True)
        (repo / "models").mkdir()
        paths = generate(repo / "models", args.files, states=(2, 12), shift=(1.0, 2.5))
        (repo / "pyproject.toml").write_text(
            '[tool.eigengate]\ninclude = ["models/*.yaml"]\n\n[tool.pytest.ini_options]\n'
            'addopts = ["-p", "no:cacheprovider"]\n', encoding="utf-8")
        control_repo = work / "control"
        (control_repo / "tests").mkdir(parents=True)
        (control_repo / "models").symlink_to(repo / "models")
        (control_repo / "tests" / "test_models.py").write_text(CONTROL_TEST, encoding="utf-8")
        (control_repo / "pytest.ini").write_text("[pytest]\naddopts = -p no:cacheprovider\n",
                                                 encoding="utf-8")
        floor_repo = work / "floor"
        floor_repo.mkdir()
        (floor_repo / "pytest.ini").write_text("[pytest]\naddopts = -p no:cacheprovider "
                                               "-p no:eigengate\n", encoding="utf-8")
        (floor_repo / "names.txt").write_text("\n".join(p.stem for p in paths), encoding="utf-8")
        script = work / "script.py"
        script.write_text(SCRIPT, encoding="utf-8")
        half = len(paths) // 2
        halves = [[str(p) for p in paths[:half]], [str(p) for p in paths[half:]]]

        def run(cmd, cwd=repo) -> subprocess.CompletedProcess:
            return subprocess.run(cmd, cwd=cwd, env=env, capture_output=True, text=True)

        # The console script a user runs (``pip install`` puts it beside the interpreter);
        # ``python -m eigengate`` only where it is missing. PYTHONPATH puts this checkout's
        # plugin/ first either way.
        installed = Path(sys.executable).with_name("eigengate")
        command = ([str(installed)] if installed.is_file() and os.access(installed, os.X_OK)
                   else [sys.executable, "-m", "eigengate"])

        def check(*extra: str):
            return run([*command, "check", "-q", *extra, str(repo)])

        def cold():
            shutil.rmtree(repo / ".eigengate-cache", ignore_errors=True)
            return check("--jobs", "1")

        def warm():
            return check("--jobs", "1")

        def script_one():
            return run([sys.executable, str(script), str(repo / "models")])

        def script_two():
            procs = [subprocess.Popen([sys.executable, str(script), "-", *h], cwd=repo, env=env,
                                      stdout=subprocess.PIPE) for h in halves]
            return sum(int(p.communicate()[0]) for p in procs)

        def pytest_cold():
            shutil.rmtree(repo / ".eigengate-cache", ignore_errors=True)
            return run([sys.executable, "-m", "pytest", "-q"])

        def pytest_warm():
            return run([sys.executable, "-m", "pytest", "-q"])

        def pytest_control():
            return run([sys.executable, "-m", "pytest", "-q"], cwd=control_repo)

        def pytest_floor():
            return run([sys.executable, "-m", "pytest", "-q"], cwd=floor_repo)

        # warm the bytecode caches of every side once
        for f in (script_one, cold, warm, script_two):
            f()
        sides = [script_one, cold, warm, lambda: check("--jobs", "1", "--no-cache"),
                 lambda: check("--jobs", "2", "--no-cache"), script_two]
        if not args.no_pytest:
            # the floor fails the models the collector fails (names from a first run)
            failing = sorted(line.split("::")[-1].split(" ")[0] for line in
                             pytest_cold().stdout.splitlines() if line.startswith("FAILED"))
            (floor_repo / "conftest.py").write_text(FLOOR_CONFTEST.format(failing=failing),
                                                    encoding="utf-8")
            pytest_control()
            pytest_floor()
            sides += [pytest_control, pytest_cold, pytest_warm, pytest_floor]
        t0 = time.perf_counter()
        times, values = rounds(args.repeat, *sides, inner={2: 3})
        t_script, t_cold, t_warm, t_j1, t_j2, t_two = times[:6]
        passed = int(values[0].stdout)
        summary = values[1].stdout.strip().splitlines()[-2:]
        print(f"{args.files} model files, 2-12 states ({passed} pass the script's conditions); "
              f"{args.repeat} rounds in {time.perf_counter() - t0:.0f} s; load average "
              f"{os.getloadavg()[0]:.1f}")
        print(f"  eigengate: {' / '.join(s.strip() for s in summary if s.strip())}")
        print(f"cold check -j 1 {min(t_cold):.2f} s vs script {min(t_script):.2f} s (best): "
              f"{ratio(t_cold, t_script)} (target <= 1.3x)")
        print(f"warm check {min(t_warm):.2f} s: {ratio(t_cold, t_warm)} faster than cold "
              f"(target >= 25x)")
        share = sorted((a / b) / (x / y) for a, b, x, y in zip(t_j1, t_j2, t_script, t_two))
        print(f"--jobs 2 {min(t_j2):.2f} s vs --jobs 1 {min(t_j1):.2f} s: {ratio(t_j1, t_j2)} "
              f"faster; the machine's ceiling (script in 2 processes vs 1) {ratio(t_script, t_two)}; "
              f"share of the ceiling per round median {share[len(share) // 2]:.2f} "
              f"(rounds {share[0]:.2f}-{share[-1]:.2f}) (target >= 0.9)")
        if not args.no_pytest:
            t_ctl, t_pc, t_pw, t_floor = times[6:10]
            print(f"pytest: collector warm {min(t_pw):.2f} s, cold {min(t_pc):.2f} s vs "
                  f"python-control parametrised {min(t_ctl):.2f} s: warm {ratio(t_pw, t_ctl)}, "
                  f"cold {ratio(t_pc, t_ctl)} (target <= 0.35x); pytest's own floor (as many "
                  f"items doing nothing, as many failing) {min(t_floor):.2f} s: "
                  f"{ratio(t_floor, t_ctl)}")
            print(f"  collector: {values[7].stdout.strip().splitlines()[-1]}; python-control: "
                  f"{values[6].stdout.strip().splitlines()[-1]}")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
