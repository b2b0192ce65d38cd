"""The reviewer's report of the example repository, made by the real command line."""

import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from support import cli_env

from test_html import Doc, decode_png  # the same HTML reader as the report tests

EXAMPLE = Path(__file__).resolve().parents[2] / "example_repo"


def test_example_repository_report(mpl, example_report):
    # the suite's one run of example_repo/ (``check -q --no-cache -o html:report.html
    # --pole-maps maps``, conftest.example_report); mpl first: it skips without matplotlib
    repo = example_report / "repo"
    report = example_report / "report.html"
    doc = Doc(report.read_text(encoding="utf-8"))
    # 19 sections: lift axis, 6 drive-speed points, heading, mast, heater, humidity, vent,
    # inverter current loop and dc link, cart, panel array, the boom at two points, and of
    # the 12 points of the belt-tension grid the one with findings (its table stands for the
    # others).
    assert len(doc.sections) == 19
    assert "m-models-conveyor-belt-tension-yaml-belt-tension-speed-1-5-load-800" in doc.sections
    assert len(doc.rows) == 19
    failing = [row for row in doc.rows if "mast-sway-damper" in row[2]]
    assert len(failing) == 1
    html = report.read_text(encoding="utf-8")
    table = html.split('<table class="eg-index eg-grid">', 1)[1].split("</table>", 1)[0]
    rows = re.findall(r'<tr class="eg-(\w+)"><td>(.*?)</td>', table)
    # worst first: the regressed point (linked to its section), then the 3 worst passing ones
    assert [status for status, _ in rows] == ["fail", "pass", "pass", "pass"]
    assert "speed=1.5,load=800</a>" in rows[0][1] and "FAILED (regressed)" in table
    sizes = [decode_png(img["src"]) for img in doc.images]
    assert sizes and all(200 <= w <= 1200 and 150 <= h <= 1000 for w, h in sizes)
    assert "engineering aid for model regression checks" in doc.all_text
    maps = sorted(p.name for p in (repo / "maps").iterdir())
    assert maps == ["models-conveyor-belt_tension.yaml--belt-tension-speed-1.5-load-800.png",
                    "models-conveyor-belt_tension.yaml--belt-tension-speed-1.5-load-800.svg",
                    "models-mast-sway.yaml--mast-sway-damper.png",
                    "models-mast-sway.yaml--mast-sway-damper.svg"]
    svg = (repo / "maps" / maps[3]).read_text(encoding="utf-8")
    assert svg.count("eg-pole-move") >= 2  # the sway pair moved away from its baseline poles


def test_color_only_when_asked_or_on_a_terminal(tmp_path):
    repo = tmp_path / "example_repo"
    shutil.copytree(EXAMPLE, repo, ignore=shutil.ignore_patterns(".eigengate-cache",
                                                                "__pycache__"))
    env = cli_env()  # waivers judged on a fixed date, not the calendar
    plain = subprocess.run([sys.executable, "-m", "eigengate", "check", "-q"], cwd=repo,
                           capture_output=True, text=True, env=env, timeout=300)
    assert "\x1b[" not in plain.stdout  # not a terminal
    colored = subprocess.run([sys.executable, "-m", "eigengate", "check", "-q", "--color",
                              "always"], cwd=repo, capture_output=True, text=True, env=env,
                             timeout=300)
    assert "\x1b[1;31mFAIL\x1b[0m" in colored.stdout
