"""JUnit XML report: well-formed, one testcase per model, counts, failures, errors."""

from __future__ import annotations

import xml.etree.ElementTree as ET

import pytest
from junitparser import Error, Failure, JUnitXml

from eigengate.scan.engine import FileResult
from eigengate.rules.findings import Finding
from eigengate.reports.junit import render_junit


@pytest.fixture(scope="module")
def xml_text(results) -> str:
    return render_junit(results)


@pytest.fixture(scope="module")
def suite(xml_text) -> ET.Element:
    root = ET.fromstring(xml_text.encode("utf-8"))
    assert root.tag == "testsuites"
    (suite,) = root
    return suite


def _cases(suite) -> dict[tuple[str, str], ET.Element]:
    return {(c.get("classname"), c.get("name")): c for c in suite.iter("testcase")}


def test_one_suite_and_counts(suite):
    assert suite.get("name") == "eigengate"
    # 6 models in 5 valid files, the invalid file, and arm.yaml's own expired waiver.
    assert suite.get("tests") == "8"
    assert suite.get("failures") == "3"  # osc, fan[storm], arm.yaml (EG002)
    assert suite.get("errors") == "1"   # broken.yaml
    assert suite.get("skipped") == "0"
    assert len(list(suite.iter("testcase"))) == 8


def test_testcase_names(suite):
    assert set(_cases(suite)) == {
        ("models.osc.yaml", "osc"), ("models.broken.yaml", "broken.yaml"),
        ("models.fan.json", "fan[still air]"), ("models.fan.json", "fan[storm]"),
        ("models.drift.yaml", "drift"), ("models.deadbeat.yaml", "deadbeat"),
        ("models.arm.yaml", "arm | wrist"), ("models.arm.yaml", "arm.yaml")}


def test_failure_has_first_line_and_mode_table(suite):
    case = _cases(suite)[("models.osc.yaml", "osc")]
    (failure,) = case.findall("failure")
    assert failure.get("message") == ("EG103 damping-ratio: 1 mode violates damping ratio "
                                      "≥ 0.3: worst 0.1 (margin -0.2)")
    assert failure.get("type") == "EG103 damping-ratio"
    assert "states angle 0.50, rate 0.50" in failure.text and "-0.2±1.98997j" in failure.text
    assert "key" not in case.attrib and case.find("properties") is None
    out = case.find("system-out").text
    assert "spectral abscissa -0.2 1/s" in out and "stable-focus" in out


def test_invalid_file_is_an_error(suite):
    case = _cases(suite)[("models.broken.yaml", "broken.yaml")]
    (error,) = case.findall("error")
    assert error.get("type") == "EG001 invalid-model"
    assert "must be square" in error.get("message")
    assert case.find("failure") is None


def test_passing_and_warning_models_do_not_fail(suite):
    cases = _cases(suite)
    for key in [("models.fan.json", "fan[still air]"), ("models.drift.yaml", "drift"),
                ("models.arm.yaml", "arm | wrist")]:
        assert cases[key].find("failure") is None and cases[key].find("error") is None
    assert "warn  EG101" in cases[("models.drift.yaml", "drift")].find("system-out").text
    assert "waived  EG103" in cases[("models.arm.yaml", "arm | wrist")].find("system-out").text


def test_junitparser_reads_it(xml_text, tmp_path):
    path = tmp_path / "report.xml"
    path.write_text(xml_text, encoding="utf-8")
    xml = JUnitXml.fromfile(str(path))
    kinds = {}
    for suite in xml:
        assert suite.name == "eigengate"
        for case in suite:
            kinds[case.name] = [type(r) for r in case.result]
    assert kinds["osc"] == [Failure] and kinds["broken.yaml"] == [Error]
    assert kinds["fan[still air]"] == [] and kinds["deadbeat"] == []


def test_text_that_xml_cannot_hold_is_replaced():
    f = Finding(rule="EG003", name="unused-waiver", severity="error", source="pyproject.toml",
                line=None, model="", label=None, message="bell \x07 and <tag> & more")
    text = render_junit([FileResult(source="pyproject.toml", findings=(f,))])
    case = ET.fromstring(text.encode("utf-8")).find(".//testcase")
    assert case.get("classname") == "pyproject.toml"
    message = case.find("failure").get("message")
    # control characters are shown as escapes (eigengate.reports.escape), markup is XML-escaped
    assert message == "EG003 unused-waiver: bell \\x07 and <tag> & more"
    assert "bell \\x07" in case.find("failure").text


def test_empty_and_deterministic(results):
    root = ET.fromstring(render_junit([]).encode("utf-8"))
    assert root.find("testsuite").get("tests") == "0"
    assert render_junit(results) == render_junit(results)
