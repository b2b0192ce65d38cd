"""Loop-margin benchmark: ``eigengate check -j 1`` against a python-control script, whole processes.

Generates ``--loops`` model files (default 200), each a SISO loop: a plant of two to four
real or damped poles, four in ten with a lightly damped structural mode above them (ζ 0.005
to 0.05; transfer function) under a PI controller ``(kp s + ki)/s``,
with ``min_gain_margin_db`` and ``min_phase_margin_deg`` requirements (invented data). Times,
as separate processes started from the shell each round:

* ``eigengate check -j 1 FOLDER`` with its result cache removed before the run;
* the script a team would write by hand: read each file with the PyYAML C loader, build
  ``control.tf`` for plant and controller, call ``control.stability_margins`` on ``C·P`` and
  compare the two margins with the file's requirements.

Both sides run back to back in each of ``--repeat`` rounds; the figure is the median of the
per-round ratios with their range (see bench_engine.ratio). Target: ≤ 1.0×. The two sides'
verdict counts are compared, so a fast wrong answer does not count. Run:
``python benchmarks/bench_margins.py [--loops 200] [--repeat 7]``.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_engine import ratio  # noqa: E402

PLUGIN = Path(__file__).resolve().parent.parent / "plugin"

HAND_SCRIPT = r'''
import sys
from pathlib import Path

import control
import numpy as np
import yaml

passed = failed = 0
for p in sorted(Path(sys.argv[1]).glob("*.yaml")):
    with open(p, "rb") as fh:
        doc = yaml.load(fh, Loader=yaml.CSafeLoader)
    plant, ctrl = doc["plant"], doc["feedback"]["controller"]
    loop = control.tf(ctrl["num"], ctrl["den"]) * control.tf(plant["num"], plant["den"])
    gm, pm, _, _ = control.stability_margins(loop)[:4]
    req = doc["requirements"]
    gm_db = 20 * np.log10(gm) if np.isfinite(gm) and gm > 0 else np.inf
    # the same conditions as the requirements: the phase at least that far from -180 deg
    # (a crossover past -180 after a resonance gives a negative pm), the gain margin in dB
    ok = gm_db >= req["min_gain_margin_db"] and abs(pm) >= req["min_phase_margin_deg"]
    passed += bool(ok)
    failed += not ok
print(passed, failed)
'''


def generate(folder: Path, count: int, seed: int = 11) -> list[Path]:
    """Write ``count`` PI loop model files (plants of 2–6 poles, some lightly damped)."""
    import numpy as np
    import yaml

    rng = np.random.default_rng(seed)
    paths = []
    for i in range(count):
        poles: list[complex] = []
        for _ in range(int(rng.integers(1, 3))):  # one or two factors: real pole or pair
            if rng.random() < 0.5:
                poles.append(-float(rng.uniform(0.2, 20.0)))
            else:
                wn, zeta = float(rng.uniform(0.5, 30.0)), float(rng.uniform(0.05, 0.7))
                poles += [complex(-zeta * wn, wn * np.sqrt(1 - zeta ** 2)),
                          complex(-zeta * wn, -wn * np.sqrt(1 - zeta ** 2))]
        if len(poles) < 2:
            poles.append(-float(rng.uniform(0.2, 20.0)))
        if rng.random() < 0.4:  # a lightly damped structural mode above the others
            wn = float(max(abs(p) for p in poles) * rng.uniform(3.0, 30.0))
            zeta = float(rng.uniform(0.005, 0.05))
            poles += [complex(-zeta * wn, wn * np.sqrt(1 - zeta ** 2)),
                      complex(-zeta * wn, -wn * np.sqrt(1 - zeta ** 2))]
        den = np.real(np.poly(poles))
        gain = float(den[-1] * rng.uniform(0.5, 3.0))  # DC gain 0.5..3
        wc = float(min(abs(p) for p in poles)) * rng.uniform(0.2, 1.5)
        kp = float(rng.uniform(0.2, 2.0))
        ki = kp * wc * float(rng.uniform(0.1, 0.6))
        doc = {
            "model_format": 1,
            "name": f"pi-loop-{i:04d}",
            "plant": {"num": [round(gain, 6)], "den": [round(float(x), 6) for x in den],
                      "inputs": ["drive"], "outputs": ["speed"]},
            "feedback": {"controller": {"num": [round(kp, 6), round(ki, 6)], "den": [1.0, 0.0]}},
            "loop": {"at": "plant_input"},
            "requirements": {"min_gain_margin_db": 6.0, "min_phase_margin_deg": 30.0},
        }
        p = folder / f"loop{i:04d}.yaml"
        p.write_text(yaml.safe_dump(doc, sort_keys=False), encoding="utf-8")
        paths.append(p)
    return paths


def _env(work: Path, plugin: Path | None) -> dict[str, str]:
    """The environment of both sides: byte code cached (in the work folder, so the
    repository stays clean) as on a user's machine, whatever this shell says."""
    env = dict(os.environ)
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    env["PYTHONPYCACHEPREFIX"] = str(work / "pycache")
    if plugin is not None:
        env["PYTHONPATH"] = str(plugin) + os.pathsep + env.get("PYTHONPATH", "")
    return env


def run_eigengate(work: Path, models: Path, plugin: Path = PLUGIN
                  ) -> tuple[float, tuple[int, int]]:
    """Wall time of a cold ``eigengate check -j 1`` process, and its (passed, failed) models."""
    shutil.rmtree(work / ".eigengate-cache", ignore_errors=True)
    t0 = time.perf_counter()
    out = subprocess.run([sys.executable, "-m", "eigengate", "check", "-j", "1", "-f", "json",
                          str(models)], cwd=work, env=_env(work, plugin), capture_output=True,
                         text=True)
    wall = time.perf_counter() - t0
    if out.returncode not in (0, 1):
        raise RuntimeError(f"eigengate check failed ({out.returncode}): {out.stderr[-2000:]}")
    report = json.loads(out.stdout)
    failed = sum(1 for f in report["files"] for m in f.get("models", [])
                 if any(not v.get("passed", True) for v in m.get("verdicts", [])))
    total = sum(len(f.get("models", [])) for f in report["files"])
    return wall, (total - failed, failed)


def run_hand(work: Path, models: Path) -> tuple[float, tuple[int, int]]:
    script = work / "hand_margins.py"
    t0 = time.perf_counter()
    out = subprocess.run([sys.executable, str(script), str(models)], cwd=work,
                         env=_env(work, None), capture_output=True, text=True, check=True)
    wall = time.perf_counter() - t0
    passed, failed = (int(x) for x in out.stdout.split())
    return wall, (passed, failed)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--loops", type=int, default=200)
    ap.add_argument("--repeat", type=int, default=7, help="rounds")
    ap.add_argument("--plugin", type=Path, default=PLUGIN,
                    help="the plugin/ folder to time (default: this checkout's; another "
                    "revision's, exported with git archive, gives the figure before a change)")
    args = ap.parse_args(argv)

    work = Path(tempfile.mkdtemp(prefix="eigengate-bench-margins-"))
    try:
        (work / ".git").mkdir()  # the folder is its own repository root
        (work / "hand_margins.py").write_text(HAND_SCRIPT, encoding="utf-8")
        models = work / "models"
        models.mkdir()
        generate(models, args.loops)
        run_eigengate(work, models, args.plugin)  # fill the file-system and byte-code caches of both
        run_hand(work, models)
        t_eng, t_hand, v_eng, v_hand = [], [], None, None
        for _ in range(args.repeat):
            t, v_hand = run_hand(work, models)
            t_hand.append(t)
            t, v_eng = run_eigengate(work, models, args.plugin)
            t_eng.append(t)
        print(f"margins: {args.loops} SISO PI loops (gain and phase margin requirements); "
              f"python-control script {min(t_hand):.3f} s, eigengate check -j 1 "
              f"{min(t_eng):.3f} s (best, whole processes); ratio {ratio(t_eng, t_hand)} "
              f"(target <= 1.0x); passed/failed: eigengate {v_eng}, python-control {v_hand}")
        if v_eng != v_hand:
            print("verdicts differ between the two sides", file=sys.stderr)
            return 1
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
