"""SARIF report: the official 2.1.0 schema, rule table, locations, fingerprints."""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import jsonschema
import pytest

from eigengate.scan.engine import FileResult
from eigengate.rules.findings import Finding
from eigengate.reports.sarif import FINGERPRINT_KEY, render_sarif
from eigengate.rules.catalogue import RULES

#: The official OASIS SARIF 2.1.0 schema, vendored unchanged in tests/reference (its README
#: names the source and the checksum).
SCHEMA = Path(__file__).resolve().parents[1] / "reference" / "sarif-schema-2.1.0.json"


def _log(results) -> dict:
    return json.loads(render_sarif(results, tool_version="1.2.3"))


@pytest.fixture(scope="module")
def log(results) -> dict:
    return _log(results)


def test_validates_against_the_official_schema(log):
    schema = json.loads(SCHEMA.read_text(encoding="utf-8"))
    assert schema["title"] == "Static Analysis Results Format (SARIF) Version 2.1.0 JSON Schema"
    cls = jsonschema.validators.validator_for(schema)
    validator = cls(schema, format_checker=jsonschema.FormatChecker())
    errors = list(validator.iter_errors(log))
    assert not errors, [f"{list(e.absolute_path)}: {e.message}" for e in errors[:5]]
    validator.validate(_log([]))
    # the schema is not vacuous: a wrong version and a result without a message are refused
    broken = json.loads(json.dumps(log))
    broken["version"] = "2.0.0"
    assert any(list(e.absolute_path) == ["version"] for e in validator.iter_errors(broken))
    broken = json.loads(json.dumps(log))
    del broken["runs"][0]["results"][0]["message"]
    assert not validator.is_valid(broken)


def test_one_run_with_the_driver(log):
    assert log["version"] == "2.1.0"
    (run,) = log["runs"]
    driver = run["tool"]["driver"]
    assert driver["name"] == "eigengate" and driver["version"] == "1.2.3"
    assert "informationUri" not in driver


def test_rules_are_every_rule_sorted_by_stable_id(log):
    rules = log["runs"][0]["tool"]["driver"]["rules"]
    assert [r["id"] for r in rules] == sorted(RULES)
    eg103 = next(r for r in rules if r["id"] == "EG103")
    assert eg103["name"] == "damping-ratio"
    assert eg103["fullDescription"]["text"] == RULES["EG103"].summary
    # the first sentence of the summary
    assert eg103["shortDescription"]["text"] == "Every oscillatory mode has damping ratio ζ = -Re(s)/|s| ≥ ζmin."
    assert eg103["defaultConfiguration"]["level"] == "error"
    for result in log["runs"][0]["results"]:
        assert rules[result["ruleIndex"]]["id"] == result["ruleId"]


def test_results_levels_and_locations(log, repo):
    results = log["runs"][0]["results"]
    assert sorted((r["ruleId"], r["level"]) for r in results) == [
        ("EG001", "error"), ("EG002", "error"), ("EG101", "warning"), ("EG102", "error"),
        ("EG103", "error"), ("EG103", "error")]
    for r in results:
        artifact = r["locations"][0]["physicalLocation"]["artifactLocation"]
        assert artifact["uriBaseId"] == "%SRCROOT%"
        assert artifact["uri"].startswith("models/")
    text = json.dumps(log)
    assert str(repo) not in text and repo.as_posix() not in text
    osc = next(r for r in results if r["locations"][0]["physicalLocation"]["artifactLocation"]
               ["uri"] == "models/osc.yaml")
    assert osc["locations"][0]["physicalLocation"]["region"] == {"startLine": 8}


def test_message_and_properties_carry_the_modes(log):
    osc = next(r for r in log["runs"][0]["results"] if r["ruleId"] == "EG103"
               and "suppressions" not in r)
    assert "ζ 0.1" in osc["message"]["text"] and "-0.2±1.98997j" in osc["message"]["text"]
    props = osc["properties"]
    assert props["threshold"] == 0.3 and props["margin"] == pytest.approx(-0.2)
    assert props["modes"][0]["eigenvalue"]["re"] == pytest.approx(-0.2)
    drift = next(r for r in log["runs"][0]["results"] if r["ruleId"] == "EG101")
    assert drift["properties"]["modes"][0]["time_constant"] == "inf"


def test_waived_finding_is_suppressed(log):
    (waived,) = [r for r in log["runs"][0]["results"] if "suppressions" in r]
    assert waived["ruleId"] == "EG103"
    assert waived["suppressions"] == [{"kind": "external", "status": "accepted",
                                       "justification": "retune pending, see review"}]


def _finding(**kw) -> Finding:
    base = dict(rule="EG103", name="damping-ratio", severity="error", source="models/x y.yaml",
                line=None, model="x", label="hot", message="too little damping",
                requirement="min_damping: 0.3", measured=0.1, threshold=0.3, margin=-0.2)
    return Finding(**{**base, **kw})


def test_start_line_only_when_known():
    f = _finding()
    result = _log([FileResult(source=f.source, findings=(f,))])["runs"][0]["results"][0]
    physical = result["locations"][0]["physicalLocation"]
    assert "region" not in physical
    assert physical["artifactLocation"]["uri"] == "models/x%20y.yaml"


def test_fingerprints_are_stable_and_distinct(log):
    prints = [r["partialFingerprints"][FINGERPRINT_KEY] for r in log["runs"][0]["results"]]
    assert len(set(prints)) == len(prints)
    f = _finding()
    moved = dataclasses.replace(f, measured=0.05, margin=-0.25, line=12, message="worse")
    other = dataclasses.replace(f, label="cold")

    def fp(x):
        return _log([FileResult(source=x.source, findings=(x,))])["runs"][0]["results"][0][
            "partialFingerprints"][FINGERPRINT_KEY]

    assert fp(f) == fp(moved)  # the same problem, measured differently
    assert fp(f) != fp(other)  # another operating point


def test_same_input_gives_the_same_bytes(results):
    assert render_sarif(results, tool_version="1") == render_sarif(results, tool_version="1")
