"""Baselines of a grid compare point by point; a grid that gains or loses points says which
(through the real command line)."""

import json

from gridcase import stacked_repo
from support import run_cli


def _check(repo):
    return run_cli("check", "--no-cache", "-o", "json:report.json", cwd=repo)


def test_one_retuned_point_regresses_and_only_it(tmp_path):
    stacked_repo(tmp_path)
    (tmp_path / "pyproject.toml").write_text("[tool.eigengate]\n", encoding="utf-8")
    assert run_cli("baseline", "accept", cwd=tmp_path).returncode == 0
    # k2 = 1 → 0.6 at speed=2, load=0.5: ζ = (0.5 + k2) / (2 √3) falls from 0.433 to 0.318
    stacked_repo(tmp_path, retune=((1, 1), 0.6))
    out = _check(tmp_path)
    assert out.returncode == 1, out.stdout + out.stderr
    assert "hoist[speed=2,load=0.5]: FAILED" in out.stdout
    assert out.stdout.count(": FAILED") == 1
    assert "EG203 damping-regressed" in out.stdout
    doc = json.loads((tmp_path / "report.json").read_text(encoding="utf-8"))
    grid = doc["files"][0]["grid"]
    assert grid["points"][0]["id"] == "speed=2,load=0.5" and grid["points"][0]["regressed"]
    assert [p["status"] for p in grid["points"]].count("failed") == 1


def test_a_grid_that_loses_and_gains_points_says_which(tmp_path):
    stacked_repo(tmp_path)
    (tmp_path / "pyproject.toml").write_text("[tool.eigengate]\n", encoding="utf-8")
    assert run_cli("baseline", "accept", cwd=tmp_path).returncode == 0
    stacked_repo(tmp_path, speeds=(1.0, 2.0, 3.0, 5.0))  # speed 4 dropped, speed 5 added
    out = _check(tmp_path)
    text = out.stdout
    for load in ("0", "0.5", "1"):
        assert f"the grid lost the point speed=4,load={load}" in text
        assert f"the grid gained the point speed=5,load={load}" in text
    assert "speed=3,load=0" not in text.split("grid speed")[0]  # unchanged points say nothing
    assert "EG209" in text and "EG208" in text
