"""Model files in, validated models out: formats, matrix files, operating points, lines, schema."""

import json
import re
from importlib import resources
from pathlib import Path

import numpy as np
import pytest

from eigengate.load import loader
from eigengate.model.formats import parse_text
from eigengate.load.loader import load_document, load_models, load_models_with_refs

ROOT = Path(__file__).resolve().parents[1]

# A fictional greenhouse vent actuator: flap angle, flap rate, motor current.
YAML = """\
model_format: 1
name: vent-flap
description: Roof vent flap of a fictional greenhouse bay.
plant:
  states: [flap_angle, flap_rate, motor_current]
  inputs: [motor_voltage]
  outputs: [flap_angle]
  A: [[0.0, 1.0, 0.0],
      [-4.0, -0.6, 2.0],
      [0.0, -1.5, -30.0]]
  B: [[0.0], [0.0], [25.0]]
  C: [[1.0, 0.0, 0.0]]
feedback:
  state_gain: [[2.0, 0.4, 0.05]]
"""

TOML = """\
model_format = 1
name = "vent-flap"
description = "Roof vent flap of a fictional greenhouse bay."

[plant]
states = ["flap_angle", "flap_rate", "motor_current"]
inputs = ["motor_voltage"]
outputs = ["flap_angle"]
A = [[0.0, 1.0, 0.0],
     [-4.0, -0.6, 2.0],
     [0.0, -1.5, -30.0]]
B = [[0.0], [0.0], [25.0]]
C = [[1.0, 0.0, 0.0]]

[feedback]
state_gain = [[2.0, 0.4, 0.05]]
"""

JSON = json.dumps({
    "model_format": 1, "name": "vent-flap",
    "description": "Roof vent flap of a fictional greenhouse bay.",
    "plant": {"states": ["flap_angle", "flap_rate", "motor_current"],
              "inputs": ["motor_voltage"], "outputs": ["flap_angle"],
              "A": [[0.0, 1.0, 0.0], [-4.0, -0.6, 2.0], [0.0, -1.5, -30.0]],
              "B": [[0.0], [0.0], [25.0]], "C": [[1.0, 0.0, 0.0]]},
    "feedback": {"state_gain": [[2.0, 0.4, 0.05]]},
}, indent=2)


def write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture
def repo(tmp_path):
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'demo'\n")
    return tmp_path


def test_same_model_in_yaml_toml_and_json(repo):
    models = [load_models(write(repo, f"models/flap.{ext}", text))[0]
              for ext, text in (("yaml", YAML), ("toml", TOML), ("json", JSON))]
    first = models[0]
    a = np.array([[0.0, 1.0, 0.0], [-4.0, -0.6, 2.0], [0.0, -1.5, -30.0]])
    np.testing.assert_array_equal(first.A, a - np.array([[0.0], [0.0], [25.0]])
                                  @ np.array([[2.0, 0.4, 0.05]]))
    for m in models:
        for attr in "ABCD":
            np.testing.assert_array_equal(getattr(m, attr), getattr(first, attr))
        assert m.states == ("flap_angle", "flap_rate", "motor_current")
        assert m.inputs == ("motor_voltage",) and m.outputs == ("flap_angle",)
        assert m.structure == "closed loop: state feedback"
        assert m.name == "vent-flap" and m.sample_period is None
    assert [m.source for m in models] == ["models/flap.yaml", "models/flap.toml",
                                          "models/flap.json"]


def test_root_is_found_from_git_or_pyproject(tmp_path):
    (tmp_path / ".git").mkdir()
    path = write(tmp_path, "a/b/flap.yaml", YAML)
    assert load_models(path)[0].source == "a/b/flap.yaml"
    assert load_models(path, root=tmp_path / "a")[0].source == "b/flap.yaml"


def test_yaml_lines_point_at_fields(repo):
    m = load_models(write(repo, "flap.yaml", YAML))[0]
    text = YAML.splitlines()
    assert text[m.lines["plant.A"] - 1].strip().startswith("A:")
    assert text[m.lines["plant.B"] - 1].strip().startswith("B:")
    assert text[m.lines["feedback.state_gain"] - 1].strip().startswith("state_gain:")
    assert m.line_of("plant.A.2") == m.lines["plant.A.2"] == 10  # third row of A


def test_toml_and_json_lines_best_effort():
    _, lines = parse_text(TOML, ".toml", "x.toml")
    assert TOML.splitlines()[lines["plant.B"] - 1].startswith("B =")
    assert TOML.splitlines()[lines["feedback.state_gain"] - 1].startswith("state_gain")
    _, lines = parse_text(JSON, ".json", "x.json")
    assert '"state_gain"' in JSON.splitlines()[lines["feedback.state_gain"] - 1]
    assert '"C"' in JSON.splitlines()[lines["plant.C"] - 1]


def test_default_name_and_discrete_transfer_function(repo):
    path = write(repo, "tank_level.yaml", "model_format: 1\ndomain: discrete\n"
                 "sample_period: 0.5\nplant: {num: [0.2], den: [1, -0.8]}\n")
    (m,) = load_models(path)
    assert m.name == "tank_level" and m.sample_period == 0.5
    assert m.structure == "transfer function"
    np.testing.assert_allclose(m.A, [[0.8]])


def test_exponent_floats_and_dates_stay_plain():
    data, _ = parse_text("model_format: 1\ndescription: 2024-05-01\nplant: {A: [[-1e3]]}\n",
                         ".yaml", "x.yaml")
    assert data["description"] == "2024-05-01"
    assert data["plant"]["A"] == [[-1000.0]]


def test_operating_points_merge_onto_the_base(repo):
    path = write(repo, "flap.yaml", YAML + """\
operating_points:
  - label: calm
  - label: gusty
    plant:
      A: [[0.0, 1.0, 0.0], [-9.0, -0.3, 2.0], [0.0, -1.5, -30.0]]
  - label: no-feedback-tuning
    feedback:
      state_gain: [[1.0, 0.0, 0.0]]
""")
    calm, gusty, tuned = load_models(path)
    assert [m.label for m in (calm, gusty, tuned)] == ["calm", "gusty", "no-feedback-tuning"]
    assert gusty.title == "vent-flap[gusty]"
    assert gusty.A[1, 0] == pytest.approx(-9.0)
    np.testing.assert_array_equal(calm.B, gusty.B)  # B comes from the base
    assert tuned.A[2, 0] == pytest.approx(-25.0)
    assert gusty.lines["plant.A"] == YAML.count("\n") + 5  # the point's own A
    assert calm.lines["plant.A"] == 8  # the base A


def test_operating_point_null_removes_a_key(repo):
    path = write(repo, "flap.yaml", YAML + """\
operating_points:
  - label: open-loop
    feedback: {state_gain: null, output_gain: [[1.5]]}
""")
    (m,) = load_models(path)
    assert m.structure == "closed loop: output feedback"


def test_npz_mat_and_csv_references(repo):
    import scipy.io
    import scipy.sparse

    a = np.array([[0.0, 1.0], [-3.0, -0.4]])
    (repo / "data").mkdir()
    np.savez(repo / "data" / "arm.npz", A=a, B=np.array([[0.0], [1.0]]))
    scipy.io.savemat(repo / "data" / "arm.mat", {"C": np.array([[1.0, 0.0]]),
                                                  "K": scipy.sparse.csr_matrix([[0.5, 0.2]])})
    scipy.io.savemat(repo / "data" / "single.mat", {"D": np.array([[0.0]])})
    (repo / "data" / "A2.csv").write_text("# flap arm at full stroke\n0, 1\n-5, -0.4 # stiffer\n")
    path = write(repo, "models/arm.yaml", """\
model_format: 1
plant:
  A: {file: ../data/arm.npz, key: A}
  B: {file: ../data/arm.npz, key: B}
  C: {file: ../data/arm.mat, key: C}
  D: {file: ../data/single.mat}
feedback:
  state_gain: {file: ../data/arm.mat, key: K}
operating_points:
  - label: base
  - label: stiff
    plant: {A: {file: ../data/A2.csv}}
""")
    (base, stiff), refs = load_models_with_refs(path)
    np.testing.assert_allclose(base.A, a - np.array([[0.0], [1.0]]) @ np.array([[0.5, 0.2]]))
    assert stiff.A[1, 0] == pytest.approx(-5.5)
    assert refs == ["data/A2.csv", "data/arm.mat", "data/arm.npz", "data/single.mat"]


def test_single_array_npz_needs_no_key(repo):
    np.savez(repo / "only.npz", np.array([[-2.0]]))
    (m,) = load_models(write(repo, "m.yaml", "model_format: 1\nplant: {A: {file: only.npz}}\n"))
    assert m.A[0, 0] == -2.0


def test_descriptor_plant_and_dynamic_controller(repo):
    path = write(repo, "m.yaml", """\
model_format: 1
plant:
  E: [[1, 0], [0, 0]]
  A: [[-1, 1], [1, -2]]
  B: [[1], [0]]
  C: [[1, 0]]
feedback:
  controller: {A: [[-3]], B: [[1]], C: [[2]], D: [[0.5]], states: [filter]}
""")
    (m,) = load_models(path)
    assert m.structure == "closed loop: dynamic controller"
    assert m.states == ("x1", "x2", "filter")
    np.testing.assert_array_equal(m.E, np.diag([1.0, 0.0, 1.0]))


def test_mimo_transfer_function_plant(repo):
    path = write(repo, "m.json", json.dumps({
        "model_format": 1,
        "plant": {"num": [[[1], [1]]], "den": [[[1, 1], [1, 1]]], "inputs": ["fan", "vent"]}}))
    (m,) = load_models(path)
    assert m.n_states == 1 and m.inputs == ("fan", "vent")


def test_load_document_in_memory():
    (m,) = load_document({"model_format": 1, "plant": {"A": [[-1.0]]}}, source="mem/x.yaml")
    assert m.name == "x" and m.source == "mem/x.yaml" and m.structure == "state-space"


def test_requirements_are_parsed(repo):
    (m,) = load_models(write(repo, "m.yaml", YAML + "requirements: {stable: true}\n"
                             "known_modes: [{eigenvalue: -30, reason: current loop}]\n"))
    from eigengate.rules.requirements import Stability

    assert m.requirements == (Stability(),)
    (k,) = m.known_modes
    assert (k.count, k.eigenvalue, k.reason) == (1, -30, "current loop")


# ------------------------------------------------------------------------- schema

def schema():
    return json.loads(resources.files("eigengate").joinpath("schema/model-v1.schema.json")
                      .read_text(encoding="utf-8"))


def doc_examples():
    text = (ROOT / "docs" / "model-format.md").read_text(encoding="utf-8")
    return [(lang, body) for lang, body in re.findall(r"```(yaml|toml|json)\n(.*?)```", text,
                                                        re.S)]


def test_schema_is_valid_draft_2020_12():
    import jsonschema

    jsonschema.Draft202012Validator.check_schema(schema())
    assert schema()["$schema"] == "https://json-schema.org/draft/2020-12/schema"


def test_schema_keys_match_the_loader():
    s = schema()
    assert set(s["properties"]) == set(loader.TOP_KEYS)
    assert set(s["$defs"]["state_space"]["properties"]) == set(loader.SS_KEYS)
    assert set(s["$defs"]["transfer_function"]["properties"]) == set(loader.TF_KEYS)
    assert set(s["$defs"]["feedback"]["properties"]) == set(loader.FEEDBACK_KEYS)
    assert set(s["$defs"]["operating_point"]["properties"]) == set(loader.POINT_KEYS)
    ctrl = s["$defs"]["controller"]["oneOf"]
    assert set(ctrl[0]["properties"]) == set(loader.CONTROLLER_SS_KEYS)
    assert set(ctrl[1]["properties"]) == set(loader.CONTROLLER_TF_KEYS)


GOOD = [("yaml", YAML), ("toml", TOML), ("json", JSON)]


@pytest.mark.parametrize("index", range(len(doc_examples()) + len(GOOD)))
def test_examples_validate_and_load(index, repo):
    import jsonschema

    lang, body = (doc_examples() + GOOD)[index]
    data, _ = parse_text(body, "." + lang, "example." + lang)
    jsonschema.Draft202012Validator(schema()).validate(data)
    assert load_models(write(repo, f"example.{lang}", body))


def _example_files():
    # The model files of the example repository, as its own policy selects them.
    from eigengate.scan.config import load_config
    from eigengate.scan.engine import discover_model_files

    config = load_config(start=ROOT / "example_repo")
    return discover_model_files([ROOT / "example_repo"], config)


EXAMPLE_FILES = _example_files()


def test_example_repository_has_the_promised_files():
    suffixes = {p.suffix for p in EXAMPLE_FILES}
    assert len(EXAMPLE_FILES) >= 10 and {".yaml", ".toml", ".json"} <= suffixes


@pytest.mark.parametrize("path", EXAMPLE_FILES, ids=lambda p: p.name)
def test_example_repository_files_validate(path):
    import jsonschema

    data, _ = parse_text(path.read_text(encoding="utf-8"), path.suffix, path.name)
    jsonschema.Draft202012Validator(schema()).validate(data)
    assert load_models(path, allow_python=True)


def test_schema_refuses_what_the_loader_refuses():
    import jsonschema

    v = jsonschema.Draft202012Validator(schema())
    both = {"model_format": 1, "plant": {"A": [[1]], "num": [1], "den": [1, 1]}}
    no_dt = {"model_format": 1, "domain": "discrete", "plant": {"A": [[0.5]]}}
    unknown = {"model_format": 1, "plant": {"A": [[1]]}, "plnat": {}}
    for doc in (both, no_dt, unknown):
        assert not v.is_valid(doc)


@pytest.mark.parametrize("row", [
    "[1.5, -2, 0, +3, 1.0e+3, 2.5E-2, .5, 5., -0.0]",
    "[.inf, -.inf, 6.8523015e+5, 0x1F]",
    "[&a 1.0, *a, 2]",
])
def test_fast_number_path_reads_yaml_like_pyyaml(row):
    # PyYAML's SafeLoader as the reference library on the spellings where YAML 1.1 and the
    # YAML 1.2 core schema agree (tests/test_yaml_numbers.py covers those where they differ).
    import yaml

    ours, _ = parse_text(f"m: [{row}]\n", ".yaml", "m.yaml")
    ref = yaml.safe_load(f"m: [{row}]\n")
    assert ours == ref
    assert [type(x) for x in ours["m"][0]] == [type(x) for x in ref["m"][0]]


def test_model_without_feedback_matches_the_checked_closed_loop_path():
    """A model with no loop closed takes the plant as built (the second pass through
    from_arrays is skipped): every field equals what from_arrays gives on the same matrices,
    for a state-space, a descriptor and a discrete transfer-function plant."""
    import dataclasses

    from eigengate.model.core import from_arrays

    docs = [
        {"model_format": 1, "plant": {"A": [[0, 1], [-2, -3]], "B": [[0], [1]],
                                      "C": [[1, 0]], "states": ["p", "v"]},
         "requirements": {"stable": True}, "on_uncertain": "pass"},
        {"model_format": 1, "plant": {"A": [[-1, 0], [0, -2]], "E": [[2, 0], [0, 1]]}},
        {"model_format": 1, "domain": "discrete", "sample_period": 0.1,
         "plant": {"num": [1], "den": [1, -0.5]}},
    ]
    for doc in docs:
        (model,) = load_document(doc, source="m.yaml")
        again = from_arrays(model.A, model.B, model.C, model.D, model.E,
                            sample_period=model.sample_period, name=model.name,
                            states=model.states, inputs=model.inputs, outputs=model.outputs,
                            source=model.source, structure=model.structure,
                            requirements=model.requirements, on_uncertain=model.on_uncertain,
                            lines=model.lines)
        for f in dataclasses.fields(model):
            if f.name in ("file_inputs", "loop_parts"):
                continue
            a, b = getattr(model, f.name), getattr(again, f.name)
            if isinstance(a, np.ndarray):
                assert a.dtype == b.dtype and np.array_equal(a, b), f.name
            else:
                assert a == b, f.name

