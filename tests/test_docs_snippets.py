"""The snippets of docs/*.md and README.md run, so documented output cannot drift.

Conventions of the docs (DEVELOPERS.md "Docs"):

- A ```yaml block whose first line is ``# path`` is a model file. When the example repository
  has that file, the block's lines appear in it in order (a line ``…`` stands for lines left
  out); otherwise the block is written to a repository of its own and must load.
- ``<!-- doc: output of `COMMAND` -->`` on the line before a block: the block is what
  COMMAND prints when run in the example repository (``eigengate`` and ``pytest`` are run
  with the interpreter under test); its lines appear in that output in order, ``…`` standing
  for lines left out, a first line ``$ …`` for the command itself.
- A ```python block runs as it is, unless ``<!-- doc: partial -->`` is on the line before it
  (a fragment that needs a project around it).
"""

from __future__ import annotations

import re
import shlex
import subprocess
import sys
from pathlib import Path

import pytest
from support import cli_env

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "example_repo"
FILES = sorted((ROOT / "docs").glob("*.md")) + [ROOT / "README.md"]
FENCE = re.compile(r"(?:^(<!-- doc: [^\n]*-->)\n)?^```(\w*)\n(.*?)^```", re.S | re.M)
OMITTED = "…"


def _blocks():
    for path in FILES:
        text = path.read_text(encoding="utf-8")
        for m in FENCE.finditer(text):
            line = text.count("\n", 0, m.start(2)) + 1
            yield pytest.param(m.group(1) or "", m.group(2), m.group(3),
                               id=f"{path.name}:{line}")


BLOCKS = list(_blocks())


def _in_order(expected: list[str], actual: list[str], where: str) -> None:
    """Each expected line (``…`` skipped) is a line of ``actual``, in order."""
    at = 0
    for want in expected:
        if want.strip() == OMITTED:
            continue
        try:
            at = actual.index(want.rstrip(), at) + 1
        except ValueError:
            raise AssertionError(f"{where}: not found in order: {want!r}\n--- actual:\n"
                                 + "\n".join(actual)) from None


_OUTPUTS: dict[str, list[str]] = {}


def _output(command: str) -> list[str]:
    if command not in _OUTPUTS:
        words = shlex.split(command)
        if words[0] == "eigengate":
            words = [sys.executable, "-m", "eigengate", *words[1:]]
        elif words[0] == "pytest":
            words = [sys.executable, "-m", "pytest", "-p", "no:cacheprovider", *words[1:]]
        done = subprocess.run(words, cwd=EXAMPLE, capture_output=True, text=True,
                              env=cli_env(), timeout=600)
        _OUTPUTS[command] = [x.rstrip() for x in (done.stdout + done.stderr).splitlines()]
    return _OUTPUTS[command]


@pytest.mark.parametrize("mark, lang, body", BLOCKS)
def test_snippet(mark, lang, body, tmp_path):
    lines = body.splitlines()
    if "doc: partial" in mark:
        return
    output = re.search(r"doc: output of `([^`]+)`", mark)
    if output:
        if lines and lines[0].startswith("$ "):
            lines = lines[1:]
        _in_order(lines, _output(output.group(1)), output.group(1))
        return
    if lang == "yaml" and lines and re.fullmatch(r"# [\w./-]+\.ya?ml", lines[0]):
        rel = lines[0][2:]
        if (EXAMPLE / rel).is_file():
            _in_order(lines[1:], (EXAMPLE / rel).read_text(encoding="utf-8").splitlines(), rel)
        else:
            from eigengate.load.loader import load_models

            (tmp_path / ".git").mkdir()
            path = tmp_path / rel
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_text(body, encoding="utf-8")
            assert load_models(path, root=tmp_path)
        return
    if lang == "python":
        exec(compile(body, "<doc>", "exec"), {"__name__": "doc_snippet"})


def test_the_conventions_are_used():
    marks = [b.values[0] for b in BLOCKS]
    assert sum("doc: output of" in m for m in marks) >= 3
    assert any("doc: partial" in m for m in marks)
