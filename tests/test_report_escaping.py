"""Strings from model files cannot inject terminal escape sequences or CI workflow commands
into the human-readable reports (text, Markdown, JUnit; the annotations escape by their own
syntax). The command line runs as a real subprocess."""

import json
import re
import xml.etree.ElementTree as ET

import pytest

from eigengate.reports.escape import printable
from support import run_cli, write

# A name with an ANSI colour sequence, a line break followed by a workflow command, a bell,
# a right-to-left override and a C1 control; states with a carriage return and a tab.
HOSTILE = r'''model_format: 1
name: "evil\e[31mRED\e[0m\n::error file=ci.yaml::pwned\a\u202Egnp\u0085x"
plant:
  states: ["ok\r::warning::x", "b\tc"]
  A: [[0.1, 1], [0, -1]]
requirements:
  stable: true
'''
NAMED = 'models/e\x1b]0;title\x07vil.yaml'
UNSAFE = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069\u2028\u2029]")


@pytest.fixture
def repo(tmp_path):
    write(tmp_path / "pyproject.toml", "[tool.eigengate]\n")
    write(tmp_path / "models" / "evil.yaml", HOSTILE)
    (tmp_path / NAMED).write_text(HOSTILE.replace("evil", "other"), encoding="utf-8")
    return tmp_path


def _no_injection(text: str) -> None:
    assert not UNSAFE.search(text), repr(UNSAFE.search(text))
    for line in text.splitlines():
        assert not line.lstrip().startswith("::"), line


@pytest.mark.parametrize("fmt", ["text", "markdown", "junit"])
def test_human_readable_formats_escape_control_characters(repo, fmt):
    proc = run_cli("check", "--no-baseline", "--color", "never", "--format", fmt, cwd=repo)
    assert proc.returncode == 1, proc.stderr
    _no_injection(proc.stdout)
    assert "x1b" in proc.stdout and "RED" in proc.stdout  # shown, as an escape
    assert "u202e" in proc.stdout
    if fmt == "junit":
        ET.fromstring(proc.stdout.encode())  # still well-formed


def test_show_escapes_too(repo):
    proc = run_cli("show", "models/evil.yaml", cwd=repo)
    _no_injection(proc.stdout)
    assert "\\x1b[31mRED" in proc.stdout and "ok\\r::warning" in proc.stdout


def test_annotations_have_one_command_per_finding(repo):
    proc = run_cli("check", "--no-baseline", "--format", "annotations", cwd=repo)
    lines = proc.stdout.splitlines()
    # one EG101 finding per model, two models: two commands, nothing else at a line start
    assert len(lines) == 2 and all(re.match(r"::error file=models/", x) for x in lines), lines
    assert not UNSAFE.search(proc.stdout.replace("\n", ""))


def test_json_keeps_the_name_exactly(repo):
    doc = json.loads(run_cli("check", "--no-baseline", "--format", "json", cwd=repo).stdout)
    titles = {m["title"] for f in doc["files"] for m in f.get("models", [])}
    assert any(t.startswith("evil\x1b[31mRED\x1b[0m\n::error") for t in titles), titles


@pytest.mark.parametrize("raw, shown", [
    ("plain – ζ ωn 日本", "plain – ζ ωn 日本"),
    ("a\nb", "a\\nb"), ("\x1b[2J", "\\x1b[2J"), ("\x9b31m", "\\x9b31m"),
    ("\u2028::x", "\\u2028::x"), ("tab\there", "tab\\there"), ("\x7f", "\\x7f"),
])
def test_printable(raw, shown):
    assert printable(raw) == shown
