"""The model JSON Schema refuses what the loader refuses, so an editor that reads it flags a
mistake as it is typed: each input of the corpus below is refused by both (and the good
examples, docs and example repository included, are accepted by both: tests/test_loader.py)."""

from __future__ import annotations

import json
from importlib import resources

import pytest

from eigengate.errors import ModelError
from eigengate.load.loader import load_models

BASE = {"model_format": 1, "name": "m", "plant": {"states": ["x", "v"],
                                                   "A": [[0, 1], [-4, -0.4]]}}

#: (what is wrong, requirements or top-level keys merged into BASE)
REFUSED = [
    ("misspelt key and a word for a flag",
     {"requirements": {"min_dampign": 0.3, "stable": "yes please"}}),
    ("damping ratio above 1", {"requirements": {"min_damping": 1.5}}),
    ("negative damping ratio", {"requirements": {"min_damping": -0.1}}),
    ("negative decay rate", {"requirements": {"min_decay_rate": -1}}),
    ("zero frequency bound", {"requirements": {"max_frequency": 0}}),
    ("damping ratio as text", {"requirements": {"min_damping": "0.3"}}),
    ("unknown equilibrium type", {"requirements": {"equilibrium": "stable_focus"}}),
    ("pole region with an unknown key", {"requirements": {"pole_region": {"min_zeta": 0.2}}}),
    ("empty pole region", {"requirements": {"pole_region": {}}}),
    ("phase margin over 180°", {"requirements": {"min_phase_margin_deg": 200}}),
    ("sensitivity peak below 1", {"requirements": {"max_sensitivity_peak": 0.5}}),
    ("disk margin over 2", {"requirements": {"min_disk_margin": 3}}),
    ("fractional equilibrium count", {"requirements": {"equilibrium_count": 1.5}}),
    ("direction count negative", {"requirements": {"directions": {"stable": -1}}}),
    ("pseudospectral abscissa without its epsilon",
     {"requirements": {"max_pseudospectral_abscissa": {"max": -1}}}),
    ("robust with too few samples",
     {"requirements": {"robust": {"stable": True, "samples": 1}}}),
    ("transfer function and state space at once",
     {"plant": {"A": [[1]], "num": [1], "den": [1, 1]}}),
    ("unknown top-level key", {"requirement": {"stable": True}}),
    ("absolute matrix file", {"plant": {"states": ["x"], "A": {"file": "/etc/a.npz"}}}),
    ("matrix file in the home folder", {"plant": {"states": ["x"], "A": {"file": "~/a.npz"}}}),
    ("matrix file with a drive", {"plant": {"states": ["x"], "A": {"file": "C:/a.npz"}}}),
]


@pytest.fixture(scope="module")
def validator():
    import jsonschema

    schema = json.loads(resources.files("eigengate").joinpath(
        "schema/model-v1.schema.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator.check_schema(schema)
    return jsonschema.Draft202012Validator(schema)


def _document(extra: dict) -> dict:
    doc = json.loads(json.dumps(BASE))
    for key, value in extra.items():
        if key == "plant":
            doc["plant"] = value
        else:
            doc[key] = value
    return doc


@pytest.mark.parametrize("what, extra", REFUSED, ids=[w for w, _ in REFUSED])
def test_refused_by_the_schema_and_by_the_loader(what, extra, validator, tmp_path):
    doc = _document(extra)
    assert list(validator.iter_errors(doc)), f"the schema accepts {what}: {doc}"
    (tmp_path / ".git").mkdir()
    path = tmp_path / "m.json"
    path.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(ModelError):
        load_models(path, root=tmp_path)


def test_the_base_document_and_false_switches_are_accepted(validator, tmp_path):
    for extra in ({}, {"requirements": {"stable": True, "min_damping": False}},
                  {"requirements": {"min_damping": 0.0, "pole_region": {"min_damping": 1}}},
                  {"requirements": {"equilibrium_at": {"x": [0, 0], "type": "stable-focus"}}}):
        doc = _document(extra)
        assert not list(validator.iter_errors(doc)), (extra, list(validator.iter_errors(doc)))
    assert not list(validator.iter_errors(_document({"requirements": {"stable": "marginal"}})))


def test_every_requirement_key_is_typed(validator):
    from eigengate.rules.parsing import REQUIREMENT_KEYS

    props = validator.schema["$defs"]["requirements"]["properties"]
    assert set(props) == set(REQUIREMENT_KEYS)
    assert validator.schema["$defs"]["requirements"]["additionalProperties"] is False
    assert all(p != {} for p in props.values())
