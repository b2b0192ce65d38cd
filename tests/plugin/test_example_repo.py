"""The example repository under pytest: its tests and model files run, and only the
deliberate regressions (the retuned mast damper, one retuned point of the belt-tension
grid) fail."""

import shutil
import subprocess
import sys
from pathlib import Path

from support import cli_env

EXAMPLE = Path(__file__).resolve().parents[2] / "example_repo"


def test_only_the_deliberate_regression_fails(tmp_path):
    repo = tmp_path / "example_repo"
    shutil.copytree(EXAMPLE, repo, ignore=shutil.ignore_patterns(".eigengate-cache",
                                                                "__pycache__"))
    env = cli_env()  # waivers judged on a fixed date, not the calendar
    out = subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider",
                          "-W", "error", "-rA"], cwd=repo, capture_output=True, text=True, env=env,
                         timeout=300)
    text = out.stdout + out.stderr
    assert out.returncode == 1, text
    failed = sorted(line.split()[1] for line in text.splitlines() if line.startswith("FAILED"))
    assert failed == ["models/conveyor/belt_tension.yaml::belt-tension[speed=1.5,load=800]",
                      "models/mast/sway.yaml::mast-sway-damper",
                      "tests/test_retunes.py::TestMastDamper::test_model_file_meets_its_spec"]
    # the grid's points as parameters of a test, one test id per point
    assert "PASSED tests/test_retunes.py::test_belt_tension_grid_decays[speed=1.5,load=800]" \
        in text
    assert "sway_rate" in text and "EG203 damping-regressed" in text
    assert "error" not in text.splitlines()[-1]  # no collection or set-up errors
