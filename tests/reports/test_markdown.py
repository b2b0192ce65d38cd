"""Markdown report as a pull-request comment: verdict, failing and regressed models first with
one entry per mode and a collapsed detail view, improvements and warnings one line each,
passing models only as a count, a size cap, stable text, escaping, caution."""

from __future__ import annotations

import dataclasses

import pytest

from eigengate.reports.markdown import MARKER, MAX_CHARS, escape, render_markdown
from eigengate.scan.engine import FileResult

ACCEPT = "eigengate baseline accept models"


@pytest.fixture(scope="module")
def text(results) -> str:
    return render_markdown(results, accept=ACCEPT, improvements=["fan (models/fan.json): ok"])


def _section(text: str, head: str) -> str:
    return text.split(head, 1)[1].split("\n### ", 1)[0].split("\n## ", 1)[0]


def test_marker_and_verdict_line_come_first(text):
    first, second = text.splitlines()[:2]
    assert first == MARKER
    # 6 files: osc and fan[storm] fail, broken is invalid; the file arm.yaml has an expired
    # waiver of its own (EG002), so its file fails while its model passes (EG103 waived)
    assert second == ("**eigengate: failed** — 6 models in 6 files: 3 failing (1 invalid "
                      "file), 4 passing; 4 error findings, 1 warning, 1 waived.")


def test_failing_models_come_first_and_passing_ones_only_as_a_count(text):
    heads = [line for line in text.splitlines() if line.startswith(("## ", "### "))]
    assert heads == ["## Failing and regressed (4)",
                     "### models/osc.yaml · osc — fails its requirements",
                     "### models/broken.yaml (invalid model file) — fails its requirements",
                     r"### models/fan.json · fan\[storm\] — fails its requirements",
                     "### models/arm.yaml — fails its requirements",
                     "## Improvements (1)",
                     "## Warnings and waivers (2)"]
    # fan[still air] and deadbeat have no finding at all; drift has a warning, arm a waiver
    assert "2 models pass every check (not listed)." in text
    assert "deadbeat" not in text  # a passing model without findings is only counted
    assert "|" not in text.replace(r"\|", "")  # no summary table of every model


def test_one_entry_per_mode_leads_with_name_and_figure(text):
    osc = _section(text, "### models/osc.yaml · osc")
    assert r"- **EG103 damping-ratio** (line 8, min\_damping: 0.3): 1 mode violates" in osc
    # ζ = 0.1 against 0.3: margin -0.2; the pair -ζωn ± jωn√(1-ζ²) = -0.2 ± 1.98997j, τ = 5 s
    # (second-order standard form, see conftest.py)
    assert "- **angle-rate mode**: EG103 damping-ratio 0.1 (threshold 0.3, margin -0.2)\n" \
           "  - eigenvalue -0.2±1.98997j · ωn 2 rad/s · ζ 0.1 · τ 5 s · states angle 0.50, " \
           "rate 0.50\n" in osc
    details = osc.split("<details>", 1)[1].split("</details>", 1)[0]
    assert "decided: certified" in details and "hint: passes with min\\_damping ≤ 0.1" in details
    assert "angle-rate mode: error bound " in details and "condition number " in details


def test_warnings_and_waivers_one_line_each(text):
    lines = _section(text, "## Warnings and waivers (2)").strip().splitlines()
    assert lines[0].startswith("- warning: models/drift.yaml · drift: **EG101 asymptotic-"
                               "stability**")
    assert lines[1].startswith(r"- waived: models/arm.yaml · arm \| wrist: **EG103 "
                               "damping-ratio** measured 0.1 (threshold 0.3, margin -0.2); "
                               "waiver no expiry")
    assert lines[1].endswith("— reason: retune pending, see review")


def test_accept_command_only_when_something_regressed(results, text):
    assert ACCEPT not in text  # nothing regressed in the sample repository
    (f,) = results[0].findings
    regressed = _regressed(results[0], "models/osc.yaml")
    out = render_markdown([regressed], accept=ACCEPT)
    assert f"accept them after review: `{ACCEPT}`" in out
    assert "— fails its requirements and regressed from the baseline" in out
    # one entry for the mode both findings name, the baseline's mode in the detail view
    assert out.count("- **angle-rate mode**:") == 1
    assert "EG203 damping-regressed 0.1 (baseline 0.3, margin -0.2)" in out
    assert "- angle-rate mode in the baseline: eigenvalue -0.2±1.98997j" in out
    assert f.modes


def _regressed(fr, source: str):
    """``fr`` with its EG103 finding doubled as a damping regression (baseline 0.3)."""
    (f,) = fr.findings
    reg = dataclasses.replace(f, rule="EG203", name="damping-regressed", requirement="baseline",
                              before=f.modes, source=source)
    (r,) = fr.results
    r = dataclasses.replace(r, findings=(dataclasses.replace(f, source=source), reg))
    return FileResult(source=source, results=(r,), findings=r.findings)


def test_escape():
    assert escape("a|b") == r"a\|b"
    assert escape("<script>") == r"\<script\>"
    assert escape("x_1 *y*\nnext") == r"x\_1 \*y\* next"


def test_empty_and_stable_between_runs(results):
    empty = render_markdown([])
    assert empty.splitlines()[1].startswith("**eigengate: passed** — 0 models in 0 files")
    assert render_markdown(results) == render_markdown(results)
    assert "20" not in render_markdown([]).replace("eigengate", "")  # no date or time in it


def test_caution_sentence(text):
    assert text.rstrip().endswith("> eigengate is an engineering aid for model regression "
                                  "checks; it is not a safety sign-off.")


def test_two_thousand_models_with_five_regressions_fit_the_cap(results):
    # 1,995 passing models (the deadbeat file copied) and 5 regressed ones spread among them,
    # plus 400 improvements and 400 warnings: the comment stays under MAX_CHARS, lists the
    # five regressions before anything else, and says what it left out
    deadbeat = next(fr for fr in results if fr.source == "models/deadbeat.yaml")
    drift = next(fr for fr in results if fr.source == "models/drift.yaml")
    bad = {137, 512, 1024, 1500, 1999}
    files, clean = [], 0
    for i in range(2000):
        source = f"models/unit_{i:04d}.yaml"
        if i in bad:
            files.append(_regressed(results[0], source))
        elif i % 5 == 0:
            files.append(dataclasses.replace(drift, source=source))
        else:
            files.append(dataclasses.replace(deadbeat, source=source))
            clean += 1
    improvements = [f"unit {i} (models/unit_{i:04d}.yaml): mode -1 → -1.2: decay rate 1 → 1.2 "
                    "1/s (+0.2, +20 %; allowed ±0.05)" for i in range(400)]
    out = render_markdown(files, accept=ACCEPT, improvements=improvements)
    assert len(out) <= MAX_CHARS
    heads = [line for line in out.splitlines() if line.startswith("### ")]
    assert heads == [f"### models/unit\\_{i:04d}.yaml · osc — fails its requirements and "
                     "regressed from the baseline" for i in sorted(bad)]
    first_other = min(out.index("## Improvements"), out.index("## Warnings"))
    assert all(out.index(h) < first_other for h in heads)
    assert f"accept them after review: `{ACCEPT}`" in out
    assert "Left out to keep this comment under 60,000 characters:" in out
    assert "warnings and waived findings; the text or JSON report has everything." in out
    assert f"{clean} models pass every check (not listed)." in out and clean > 1500
    assert out == render_markdown(files, accept=ACCEPT, improvements=improvements)


def test_a_cap_too_small_for_every_block_still_names_each_failing_model(results):
    files = [_regressed(results[0], f"models/r{i}.yaml") for i in range(40)]
    out = render_markdown(files, max_chars=6_000)
    assert len(out) <= 6_000
    named = [i for i in range(40) if f"models/r{i}.yaml" in out]
    short = [line for line in out.splitlines() if line.startswith("- models/r")]
    assert short and named[: len(short)] != []  # the later ones in one line each
    assert "failing or regressed models" in out.split("Left out", 1)[-1] or len(named) == 40
