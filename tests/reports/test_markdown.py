"""Markdown report: verdict line, summary table, sections, escaping, caution."""

from __future__ import annotations

import re

import pytest

from eigengate.reports.markdown import escape, render_markdown


@pytest.fixture(scope="module")
def text(results) -> str:
    return render_markdown(results)


def _cells(line: str) -> list[str]:
    """The cells of a table row, split at pipes that are not escaped."""
    return [c.strip() for c in re.split(r"(?<!\\)\|", line.strip())[1:-1]]


def test_verdict_line_comes_first(text):
    first = text.splitlines()[0]
    assert first.startswith("**eigengate: failed**")
    assert "6 files, 6 models: 2 failing, 1 invalid file; 4 errors, 1 warning, 1 waived" in first


def test_summary_table(text):
    lines = text.splitlines()
    start = lines.index("| file | model | status | spectral abscissa | min ζ | findings |")
    rows = []
    for line in lines[start + 2:]:
        if not line.startswith("|"):
            break
        rows.append(_cells(line))
    assert all(len(r) == 6 for r in rows)
    assert ["models/osc.yaml", "osc", "failed", "-0.2 1/s", "0.1", "EG103"] in rows
    assert ["models/broken.yaml", "–", "invalid", "–", "–", "EG001"] in rows
    assert ["models/deadbeat.yaml", "deadbeat", "passed", "-∞ 1/s", "1", "–"] in rows
    assert ["models/drift.yaml", "drift", "warning", "0 1/s", "1", "EG101"] in rows
    assert ["models/arm.yaml", r"arm \| wrist", "passed", "-0.2 1/s", "0.1", "–"] in rows


def test_sections_for_models_with_findings_only(text):
    heads = [line for line in text.splitlines() if line.startswith("### ")]
    assert heads == ["### models/osc.yaml · osc — failed",
                     "### models/broken.yaml — invalid model file",
                     r"### models/fan.json · fan\[storm\] — failed",
                     "### models/drift.yaml · drift — warning",
                     r"### models/arm.yaml · arm \| wrist — passed",
                     "### models/arm.yaml — failed"]


def test_mode_table_in_the_failing_section(text):
    section = text.split("### models/osc.yaml · osc")[1].split("###")[0]
    assert r"**EG103 damping-ratio** (error, line 8, min\_damping: 0.3)" in section
    rows = [_cells(x) for x in section.splitlines() if x.strip().startswith("|")]
    assert rows[0] == ["mode", "eigenvalue", "ζ", "ωn [rad/s]", "τ [s]", "participating states"]
    assert rows[2] == [r"\#1", "-0.2±1.98997j", "0.1", "2", "5", "angle 0.50, rate 0.50"]
    drift = text.split("### models/drift.yaml")[1].split("###")[0]
    assert "| ∞ |" in drift  # τ of the integrator


def test_waived_finding_shows_its_reason(text):
    assert "  - waived: retune pending, see review" in text


def test_caution_sentence(text):
    assert text.rstrip().endswith("> eigengate is an engineering aid for model regression "
                                  "checks; it is not a safety sign-off.")


def test_escape():
    assert escape("a|b") == r"a\|b"
    assert escape("<script>") == r"\<script\>"
    assert escape("x_1 *y*\nnext") == r"x\_1 \*y\* next"


def test_empty_and_deterministic(results):
    empty = render_markdown([])
    assert empty.startswith("**eigengate: passed** — 0 files, 0 models")
    assert render_markdown(results) == render_markdown(results)


def test_regression_shows_the_baseline_modes(results):
    import dataclasses

    from eigengate.scan.engine import FileResult

    (f,) = results[0].findings
    regressed = dataclasses.replace(f, rule="EG203", name="damping-regressed", before=f.modes)
    text = render_markdown([FileResult(source=f.source, findings=(regressed,))])
    assert "  in the baseline:" in text
    assert text.count(r"| \#1 | -0.2±1.98997j |") == 2
