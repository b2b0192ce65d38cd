"""CI annotation lines: one per finding, the command form, escaping."""

from __future__ import annotations

import re

from eigengate.scan.engine import FileResult, check_file
from eigengate.rules.findings import Finding
from eigengate.reports.annotations import escape_data, escape_property, render_annotations

LINE = re.compile(r"^::(error|warning) file=[^,:]+(,line=\d+)?,title=[^,:]+::[^\r\n]*$")


def test_one_line_per_unwaived_finding(results):
    lines = render_annotations(results).splitlines()
    assert len(lines) == 5  # osc, broken, fan[storm], drift (warning), arm's EG002
    assert all(LINE.match(x) for x in lines), lines
    assert lines[0].startswith("::error file=models/osc.yaml,line=8,"
                               "title=EG103 damping-ratio::osc: 1 mode violates")
    assert "%0Amodes: angle-rate mode: eigenvalue -0.2±1.98997j · ωn 2 rad/s · ζ 0.1" in lines[0]
    assert [x.split(" ", 1)[0] for x in lines] == ["::error"] * 3 + ["::warning", "::error"]
    assert not any("EG103" in x and "arm" in x for x in lines)  # the waived one


def test_escaping_of_message_and_properties():
    assert escape_data("50% a\r\nb") == "50%25 a%0D%0Ab"
    assert escape_property("a,b:c%\n") == "a%2Cb%3Ac%25%0A"
    f = Finding(rule="EG102", name="decay-rate", severity="warning", source="m/a,b:c.yaml",
                line=None, model="m", label="x:y", message="100% slow,\nreally")
    (line,) = render_annotations([FileResult(source=f.source, findings=(f,))]).splitlines()
    assert line == ("::warning file=m/a%2Cb%3Ac.yaml,title=EG102 decay-rate::"
                    "m[x:y]: 100%25 slow,%0Areally")


def test_real_file_with_awkward_name(tmp_path):
    (tmp_path / "pyproject.toml").write_text("", encoding="utf-8")
    path = tmp_path / "a,b:c.yaml"
    path.write_text("model_format: 1\nplant:\n  A: [[0.5]]\nrequirements:\n  stable: true\n",
                    encoding="utf-8")
    (line,) = render_annotations([check_file(path, root=tmp_path)]).splitlines()
    assert line.startswith("::error file=a%2Cb%3Ac.yaml,line=5,title=EG101 "
                           "asymptotic-stability::")


def test_nothing_to_say():
    assert render_annotations([]) == ""
