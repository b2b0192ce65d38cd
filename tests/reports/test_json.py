"""JSON report: schema, determinism, JSON-safe numbers, what each level holds."""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import jsonschema
import pytest

from eigengate.reports.json import REPORT_FORMAT, render_json

from .conftest import build

ROOT = Path(__file__).resolve().parents[2]
SCHEMA_PATH = ROOT / "plugin" / "eigengate" / "schema" / "report-v1.schema.json"
DOC_PATH = ROOT / "docs" / "report-formats.md"


def _refuse_constant(name: str):
    raise ValueError(f"non-standard JSON constant {name}")


def _load(text: str) -> dict:
    # Python's json would accept NaN/Infinity; a strict reader must not meet them.
    return json.loads(text, parse_constant=_refuse_constant)


@pytest.fixture(scope="module")
def doc(results) -> dict:
    return _load(render_json(results, tool_version="9.9.9"))


def _model(doc: dict, source: str, title: str) -> dict:
    file = next(f for f in doc["files"] if f["source"] == source)
    return next(m for m in file["models"] if m["title"] == title)


def test_validates_against_the_report_schema(doc):
    schema = json.loads(SCHEMA_PATH.read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator.check_schema(schema)
    validator = jsonschema.Draft202012Validator(schema,
                                                format_checker=jsonschema.FormatChecker())
    errors = sorted(validator.iter_errors(doc), key=lambda e: list(e.absolute_path))
    assert not errors, [f"{list(e.absolute_path)}: {e.message}" for e in errors[:5]]


def test_empty_report_validates():
    schema = json.loads(SCHEMA_PATH.read_text(encoding="utf-8"))
    doc = _load(render_json([], tool_version="1"))
    jsonschema.Draft202012Validator(schema).validate(doc)
    assert doc["summary"]["files"] == 0 and doc["summary"]["passed"] is True


def test_same_input_gives_the_same_bytes(results, tmp_path):
    first = render_json(results, tool_version="1.0")
    assert render_json(results, tool_version="1.0") == first
    # A fresh run of the engine on the same files (in another folder) renders identically.
    assert render_json(build(tmp_path), tool_version="1.0") == first


def test_no_absolute_paths(results, repo):
    text = render_json(results, tool_version="1.0")
    assert str(repo) not in text
    assert repo.as_posix() not in text


def test_header_and_summary(doc):
    assert doc["report_format"] == REPORT_FORMAT == 1
    assert doc["tool"] == {"name": "eigengate", "version": "9.9.9"}
    assert doc["summary"] == {"files": 6, "invalid_files": 1, "models": 6, "failed_models": 2,
                              "errors": 4, "warnings": 1, "waived": 1, "passed": False}


def test_complex_eigenvalue_is_an_object(doc):
    m = _model(doc, "models/osc.yaml", "osc")
    (finding,) = m["findings"]
    assert finding["rule"] == "EG103" and finding["line"] == 8
    mode = finding["modes"][0]
    # Second-order standard form (common in control textbooks): ζ = 0.1, ωn = 2 rad/s,
    # s = -ζωn ± jωn√(1-ζ²).
    assert mode["eigenvalue"]["re"] == pytest.approx(-0.2)
    assert mode["eigenvalue"]["im"] == pytest.approx(2 * math.sqrt(1 - 0.01))
    assert mode["pair"] is True
    assert mode["damping_ratio"] == pytest.approx(0.1)
    assert mode["natural_frequency"] == pytest.approx(2.0)
    assert [s["state"] for s in mode["top_states"]] == ["angle", "rate"]
    assert finding["measured"] == pytest.approx(0.1) and finding["threshold"] == 0.3
    assert finding["margin"] == pytest.approx(-0.2)


def test_infinities_are_strings(doc):
    drift = _model(doc, "models/drift.yaml", "drift")
    (finding,) = drift["findings"]
    assert finding["severity"] == "warning"
    assert finding["modes"][0]["time_constant"] == "inf"
    dead = _model(doc, "models/deadbeat.yaml", "deadbeat")
    assert dead["figures"]["spectral_abscissa"] == "-inf"
    assert dead["domain"] == "discrete" and dead["sample_period"] == 0.5


def test_figures_equilibrium_and_verdicts(doc):
    m = _model(doc, "models/osc.yaml", "osc")
    assert m["status"] == "failed" and m["structure"] == "state-space"
    assert m["figures"]["spectral_abscissa"] == pytest.approx(-0.2)
    assert m["figures"]["min_damping"] == pytest.approx(0.1)
    assert m["figures"]["eigenvalue_count"] == 2 and m["figures"]["mode_count"] == 1
    assert m["equilibrium"]["type"] == "stable-focus" and m["equilibrium"]["stable"] == 2
    verdicts = {v["rule"]: v for v in m["verdicts"]}
    assert verdicts["EG101"]["passed"] is True and verdicts["EG101"]["margin"] > 0
    assert verdicts["EG103"]["passed"] is False and verdicts["EG103"]["uncertain"] is False


def test_invalid_file_and_operating_points(doc):
    broken = next(f for f in doc["files"] if f["source"] == "models/broken.yaml")
    assert broken["status"] == "invalid" and broken["models"] == []
    assert broken["error"]["field"] == "plant.A" and broken["error"]["line"] == 3
    assert [f["rule"] for f in broken["findings"]] == ["EG001"]
    fan = next(f for f in doc["files"] if f["source"] == "models/fan.json")
    assert [(m["label"], m["status"]) for m in fan["models"]] == [("still air", "passed"),
                                                                 ("storm", "failed")]
    assert fan["models"][1]["structure"] == "closed loop: output feedback"
    assert fan["findings"] == []  # model findings are listed under their model only


def test_waived_and_file_findings(doc):
    arm = next(f for f in doc["files"] if f["source"] == "models/arm.yaml")
    (model,) = arm["models"]
    assert model["findings"] == [] and model["status"] == "passed"
    assert [(w["rule"], w["waived"]) for w in model["waived"]] == [
        ("EG103", "retune pending, see review")]
    assert [f["rule"] for f in arm["findings"]] == ["EG002"]
    assert arm["status"] == "failed"


def test_documentation_names_every_key():
    schema = json.loads(SCHEMA_PATH.read_text(encoding="utf-8"))
    keys: set[str] = set()

    def walk(node):
        if isinstance(node, dict):
            keys.update(node.get("properties", {}))
            for value in node.values():
                walk(value)
        elif isinstance(node, list):
            for value in node:
                walk(value)

    walk(schema)
    documented = set(re.findall(r"`([a-z_]+)`", DOC_PATH.read_text(encoding="utf-8")))
    assert sorted(keys - documented) == []


def test_regression_modes_before(results):
    """A regression finding carries the baseline's modes; they are rendered like the others."""
    import dataclasses

    from eigengate.scan.engine import FileResult

    (f,) = results[0].findings
    regressed = dataclasses.replace(f, rule="EG203", name="damping-regressed", before=f.modes)
    doc = _load(render_json([FileResult(source=f.source, findings=(regressed,))],
                            tool_version="1"))
    schema = json.loads(SCHEMA_PATH.read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(schema).validate(doc)
    (out,) = doc["files"][0]["findings"]
    assert out["before"] == out["modes"] and len(out["before"]) == 1
