"""JUnit XML report (the xunit2 family pytest writes), for CI test-result views.

One ``<testsuite name="eigengate">``; one ``<testcase>`` per model (operating point), with
``classname`` the file's repository path with ``/`` turned into ``.`` and ``name`` the model
title. A model with error findings gets one ``<failure>``: ``message`` is the first line of
the first finding, the text is every error finding in full with its mode table. An invalid
file is one testcase (named after the file) with an ``<error>``; the file's own findings
(expired or unused waivers, policy findings) are a testcase of the same name. Warnings, waived
findings and the key figures of the model go to ``<system-out>``. Nothing is skipped, and no
testcase has ``<properties>`` (xunit2 does not allow them). Times are 0: the report does not
depend on the clock. An operating-point grid has a testcase for each of its worst points with
findings (``rules.grid_summary.MAX_DETAILED``) and one more for all its other points, whose
``<system-out>`` is the grid's table (worst first) and whose failure holds their errors.
"""

from __future__ import annotations

import re
import textwrap
import xml.etree.ElementTree as ET
from pathlib import PurePosixPath
from typing import Any, Iterable, Sequence

from .escape import printable
from .render import own_findings
from .text import finding_lines, grid_lines, model_lines

__all__ = ["render_junit"]

#: Characters XML 1.0 cannot hold, even escaped.
_ILLEGAL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")


def _clean(text: str) -> str:
    return _ILLEGAL.sub("\ufffd", text)


def _classname(source: str) -> str:
    return source.replace("\\", "/").strip("/").replace("/", ".")


def _finding_text(findings: Sequence[Any], discrete: bool) -> str:
    blocks = [textwrap.dedent("\n".join(finding_lines(f, discrete))) for f in findings]
    return _clean("\n\n".join(blocks) + "\n")


def _first_line(f: Any) -> str:
    return printable(f"{f.rule} {f.name}: {f.message.splitlines()[0] if f.message else ''}")


class _Suite:
    """Collects testcases and the counts the suite element states."""

    def __init__(self) -> None:
        self.suite = ET.Element("testsuite", name="eigengate")
        self.tests = self.failures = self.errors = 0

    def case(self, classname: str, name: str, failing: Sequence[Any], discrete: bool,
             out: str, *, error: bool = False) -> None:
        case = ET.SubElement(self.suite, "testcase", classname=printable(classname),
                             name=printable(name), time="0.000")
        self.tests += 1
        if failing:
            kind = "error" if error else "failure"
            first = failing[0]
            more = f" (+{len(failing) - 1} more)" if len(failing) > 1 else ""
            el = ET.SubElement(case, kind, message=_first_line(first) + more,
                               type=f"{first.rule} {first.name}")
            el.text = _finding_text(failing, discrete)
            if error:
                self.errors += 1
            else:
                self.failures += 1
        if out:
            ET.SubElement(case, "system-out").text = _clean(out)


def _errors(findings: Iterable[Any]) -> list[Any]:
    return [f for f in findings if f.severity == "error"]


def render_junit(results: Iterable[Any]) -> str:
    """Render :class:`~eigengate.scan.engine.FileResult` objects as JUnit XML.

    Returns
    -------
    str
        A UTF-8 XML document (with declaration), one testcase per model, ending in a newline.
    """
    s = _Suite()
    for fr in results:
        classname = _classname(fr.source)
        file_name = PurePosixPath(fr.source.replace("\\", "/")).name or fr.source
        grid = fr.grid
        detailed = grid.detailed() if grid is not None else frozenset()
        rest: list[Any] = []  # a grid's points beyond the detailed ones
        for r in fr.results:
            m = r.model
            if grid is not None and m.title not in detailed:
                rest.append(r)  # one testcase for all of them, below
                continue
            out = textwrap.dedent("\n".join(model_lines(r, verbose=True))) + "\n"
            s.case(classname, m.title, _errors(r.findings), m.discrete, out)
        if grid is not None:
            flagged = sum(1 for r in rest if r.findings)
            what = f"{len(rest) - flagged} passing points" + (
                f", {flagged} more with findings" if flagged else "")
            out = textwrap.dedent("\n".join(grid_lines(grid))) + "\n"
            s.case(classname, f"{grid.name}[grid: {what}]",
                   [f for r in rest for f in _errors(r.findings)], False, out)
        own = own_findings(fr)
        if own or fr.error is not None:
            failing = _errors(own)
            text = "\n".join(_finding_text([f], False) for f in own if f.severity != "error")
            s.case(classname, file_name, failing, False, text, error=fr.error is not None)
    s.suite.set("tests", str(s.tests))
    s.suite.set("failures", str(s.failures))
    s.suite.set("errors", str(s.errors))
    s.suite.set("skipped", "0")
    s.suite.set("time", "0.000")
    root = ET.Element("testsuites", name="eigengate", tests=str(s.tests),
                      failures=str(s.failures), errors=str(s.errors), skipped="0",
                      time="0.000")
    root.append(s.suite)
    ET.indent(root, space="  ")
    body = ET.tostring(root, encoding="unicode")
    return '<?xml version="1.0" encoding="utf-8"?>\n' + body + "\n"
