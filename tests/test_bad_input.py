"""Every kind of bad model input gives one readable line: file, field, found and expected.

Each test checks that the message names the file and the field, says what was found or
expected, and carries no traceback-like text or chained exception.
"""

import json
import os
from pathlib import Path

import numpy as np
import pytest

from eigengate.model import formats as _formats, limits as _limits, matrixfiles as _matrixfiles
from eigengate.errors import ModelError
from eigengate.load.loader import load_document, load_models

BASE = """\
model_format: 1
plant:
  A: [[0.0, 1.0], [-2.0, -0.3]]
  B: [[0.0], [1.0]]
  C: [[1.0, 0.0]]
  inputs: [pump]
  outputs: [level]
"""


@pytest.fixture
def repo(tmp_path):
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'demo'\n")
    (tmp_path / "models").mkdir()
    return tmp_path


def fails(repo: Path, text: str | bytes, *expected: str, name: str = "models/tank.yaml") -> str:
    """Load ``text`` from ``name`` and return the message, checking the common promises."""
    path = repo / name
    path.parent.mkdir(parents=True, exist_ok=True)
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return check(lambda: load_models(path), name, *expected)


def check(call, name: str, *expected: str) -> str:
    with pytest.raises(ModelError) as info:
        call()
    message = str(info.value)
    assert message.startswith(name), message
    for part in expected:
        assert part in message, f"{part!r} not in {message!r}"
    for leak in ("Traceback", 'File "', "Error:", "\n"):
        assert leak not in message, message
    # No chained exception would show under the message.
    assert info.value.__cause__ is None
    assert info.value.__context__ is None or info.value.__suppress_context__
    return message


def test_non_numeric_entry(repo):
    fails(repo, BASE.replace("[-2.0, -0.3]", "[-2.0, fast]"), "plant.A", "'fast'",
          "real numbers", ":3:")


def test_complex_entry_in_memory():
    check(lambda: load_document({"model_format": 1, "plant": {"A": [[1 + 2j]]}},
                                source="models/tank.yaml"), "models/tank.yaml", "plant.A",
          "complex")


def test_complex_array_in_npz(repo):
    np.savez(repo / "models" / "c.npz", A=np.array([[1 + 1j]]))
    fails(repo, "model_format: 1\nplant: {A: {file: c.npz}}\n", "plant.A", "complex")


@pytest.mark.parametrize("value, shown", [(".nan", "nan"), (".inf", "inf"), ("-.inf", "-inf")])
def test_nan_and_inf(repo, value, shown):
    fails(repo, BASE.replace("-0.3", value), "plant.A", f"entry (2,2) is {shown}", "finite")


def test_nan_in_json(repo):
    fails(repo, '{"model_format": 1, "plant": {"A": [[NaN]]}}', "NaN", "not a JSON number",
          name="models/tank.json")


@pytest.mark.parametrize("edit, field, expected", [
    (("B: [[0.0], [1.0]]", "B: [[0.0], [1.0], [2.0]]"), "plant.B", "must have 2 rows"),
    (("C: [[1.0, 0.0]]", "C: [[1.0, 0.0, 0.0]]"), "plant.C", "must have 2 columns"),
    (("C: [[1.0, 0.0]]", "C: [[1.0, 0.0]]\n  D: [[1.0, 2.0]]"), "plant.D", "must be 1×1"),
    (("C: [[1.0, 0.0]]", "C: [[1.0, 0.0]]\n  E: [[1.0]]"), "plant.E", "must be 2×2"),
    (("A: [[0.0, 1.0], [-2.0, -0.3]]", "A: [[0.0, 1.0]]"), "plant.A", "must be square, got 1×2"),
    (("A: [[0.0, 1.0], [-2.0, -0.3]]", "A: [[0.0, 1.0], [-2.0]]"), "plant.A", "equal length"),
])
def test_inconsistent_plant_dimensions(repo, edit, field, expected):
    fails(repo, BASE.replace(*edit), field, expected)


@pytest.mark.parametrize("feedback, field, expected", [
    ("state_gain: [[1.0]]", "feedback.state_gain", "must be 1×2 (driven inputs × plant states), "
     "got 1×1"),
    ("output_gain: [[1.0, 2.0]]", "feedback.output_gain", "must be 1×1 (driven inputs × "
     "measured outputs), got 1×2"),
    ("controller: {A: [[-1]], B: [[1, 1]], C: [[1]]}", "feedback.controller.B",
     "must have 1 columns (one per measured plant output), got 2"),
    ("controller: {A: [[-1]], B: [[1]], C: [[1], [2]]}", "feedback.controller.C",
     "must have 1 rows (one per driven plant input), got 2"),
    ("controller: {A: [[-1]], B: [[1], [2]], C: [[1]]}", "feedback.controller.B",
     "must have 1 rows"),
])
def test_inconsistent_gain_dimensions(repo, feedback, field, expected):
    fails(repo, BASE + "feedback:\n  " + feedback + "\n", field, expected)


def test_empty_matrix(repo):
    fails(repo, "model_format: 1\nplant:\n  A: []\n", "plant.A", "must not be empty, got a 0×0")


@pytest.mark.parametrize("text, field, suggestion", [
    (BASE + "feedbak: {state_gain: [[1, 1]]}\n", "feedbak", "did you mean 'feedback'?"),
    (BASE.replace("  B:", "  Bb:"), "plant.Bb", "did you mean 'B'?"),
    (BASE + "feedback: {state_gains: [[1, 1]]}\n", "feedback.state_gains",
     "did you mean 'state_gain'?"),
    (BASE + "operating_points: [{label: a, plnt: {}}]\n", "operating_points[0] (label 'a').plnt",
     "did you mean 'plant'?"),
    ("model_format: 1\nplant: {A: {file: x.npz, kye: A}}\n", "plant.A", "did you mean 'key'?"),
])
def test_unknown_field_suggests(repo, text, field, suggestion):
    fails(repo, text, field, "is not a field of" if "kye" not in text else "unknown key",
          suggestion)


@pytest.mark.parametrize("period, expected", [
    ("0", "got 0"), ("-0.5", "got -0.5"), ("fast", "got 'fast'"), (".nan", "got nan")])
def test_non_positive_sample_period(repo, period, expected):
    fails(repo, BASE + f"domain: discrete\nsample_period: {period}\n", "sample_period",
          "must be a positive number of seconds", expected)


def test_missing_sample_period(repo):
    fails(repo, BASE + "domain: discrete\n", "sample_period", "is missing",
          "discrete model needs")


def test_sample_period_on_continuous_model(repo):
    fails(repo, BASE + "sample_period: 0.1\n", "sample_period", "continuous model has no sample")


def test_unknown_domain(repo):
    fails(repo, BASE + "domain: discreet\n", "domain", "'discreet'", "did you mean 'discrete'?")


@pytest.mark.parametrize("version, found", [("2", "is 2"), ("'1'", "is '1'"), ("true", "True")])
def test_unknown_format_version(repo, version, found):
    fails(repo, BASE.replace("model_format: 1", f"model_format: {version}"), "model_format",
          found, "reads model_format 1")


def test_missing_format_version(repo):
    fails(repo, BASE.replace("model_format: 1\n", ""), "model_format", "is missing")


def test_unreadable_file(repo):
    (repo / "models" / "tank.yaml").mkdir()  # a folder where a file should be
    check(lambda: load_models(repo / "models" / "tank.yaml"), "models/tank.yaml",
          "cannot be read")


def test_missing_file(repo):
    check(lambda: load_models(repo / "models" / "tank.yaml"), "models/tank.yaml",
          "cannot be read", "No such file")


@pytest.mark.parametrize("text", ["", "  \n\n"])
def test_empty_file(repo, text):
    fails(repo, text, "is empty")


def test_comments_only(repo):
    fails(repo, "# nothing yet\n", "holds no data")


def test_binary_file(repo):
    fails(repo, b"model_format: 1\n\x00\x01\x02", "looks binary", "NUL byte at byte offset 16")


def test_non_utf8_file(repo):
    fails(repo, "model_format: 1\nname: caf".encode() + b"\xe9\n", "not UTF-8",
          "byte 0xe9 at byte offset 25")


def test_unknown_suffix(repo):
    fails(repo, BASE, "unknown file type '.ini'", ".yaml", name="models/tank.ini")


@pytest.mark.parametrize("text", ["- 1\n- 2\n", "just words\n"])
def test_top_level_not_a_mapping(repo, text):
    fails(repo, text, "mapping of fields at the top level")


@pytest.mark.parametrize("name, text, where", [
    ("models/tank.yaml", "model_format: 1\nplant: {A: [[1, 2]\n", "line 3"),
    ("models/tank.json", '{"model_format": 1,\n "plant": }', "line 2, column 11"),
    ("models/tank.toml", "model_format = 1\n[plant\n", "line 2"),
])
def test_syntax_errors_give_line_and_column(repo, name, text, where):
    fails(repo, text, "is not valid", where, name=name)


def test_duplicate_key_yaml(repo):
    fails(repo, BASE.replace("  C:", "  B: [[1.0], [0.0]]\n  C:"), "plant.B",
          "is given twice, on lines 4 and 5")


def test_duplicate_key_json(repo):
    text = '{"model_format": 1,\n "plant": {"A": [[-1]],\n  "A": [[-2]]}}'
    fails(repo, text, "plant.A", "is given twice, on lines 2 and 3", name="models/tank.json")


def test_duplicate_key_toml(repo):
    fails(repo, "model_format = 1\nmodel_format = 1\n", "not valid TOML", "line 2",
          name="models/tank.toml")


@pytest.mark.parametrize("tag", ["!!python/object/apply:os.system ['echo hi']",
                                 "!!python/name:os.system", "!!binary aGk=", "!!set {a: null}"])
def test_yaml_object_tags_refused(repo, tag):
    fails(repo, BASE + f"description: {tag}\n", "description", "YAML tag", "refuses")


def test_yaml_alias_bomb_refused(repo, monkeypatch):
    monkeypatch.setattr(_limits, "MAX_VALUES", 1000)
    rows = ["a0: &a0 [1, 1, 1, 1, 1, 1, 1, 1, 1, 1]"]
    rows += [f"a{i}: &a{i} [*a{i-1}, *a{i-1}, *a{i-1}, *a{i-1}, *a{i-1}]" for i in range(1, 6)]
    fails(repo, "model_format: 1\n" + "\n".join(rows) + "\n", "expands to more than 1000")


def test_pickled_npz(repo):
    np.savez(repo / "models" / "obj.npz", A=np.array([{"hidden": "code"}], dtype=object))
    fails(repo, "model_format: 1\nplant: {A: {file: obj.npz, key: A}}\n", "plant.A", "obj.npz",
          "pickled object data")


def test_reference_parent_folder_outside(repo):
    fails(repo, "model_format: 1\nplant: {A: {file: ../../x.npz}}\n", "plant.A.file",
          "'../../x.npz'", "outside the repository")


def test_reference_absolute_path(repo):
    target = (repo / "models" / "abs.npz").as_posix()
    np.savez(target, A=np.eye(1))
    fails(repo, f"model_format: 1\nplant: {{A: {{file: '{target}'}}}}\n", "plant.A.file",
          "absolute path", "relative to the model file")


def test_reference_symlink_pointing_out(repo, tmp_path_factory):
    outside = tmp_path_factory.mktemp("elsewhere") / "secret.npz"
    np.savez(outside, A=np.eye(1))
    try:
        os.symlink(outside, repo / "models" / "link.npz")
    except OSError:
        pytest.skip("cannot create symlinks here")
    fails(repo, "model_format: 1\nplant: {A: {file: link.npz}}\n", "plant.A.file", "'link.npz'",
          "outside the repository")


def test_missing_referenced_file(repo):
    fails(repo, "model_format: 1\nplant: {A: {file: data/none.npz}}\n", "plant.A.file",
          "'models/data/none.npz'", "does not exist")


def test_reference_missing_key(repo):
    np.savez(repo / "models" / "two.npz", A=np.eye(2), B=np.ones((2, 1)))
    fails(repo, "model_format: 1\nplant: {A: {file: two.npz, key: AA}}\n", "plant.A.key",
          "'AA'", "holds A, B", "did you mean 'A'?")
    fails(repo, "model_format: 1\nplant: {A: {file: two.npz}}\n", "plant.A.key",
          "must name the array", "holds 2: A, B")


def test_reference_in_memory_document():
    check(lambda: load_document({"model_format": 1, "plant": {"A": {"file": "a.npz"}}},
                                source="models/tank.yaml"), "models/tank.yaml", "plant.A.file",
          "not read from a file")


def test_bad_csv_reference(repo):
    (repo / "models" / "a.csv").write_text("1, 2\n3, x\n")
    fails(repo, "model_format: 1\nplant: {A: {file: a.csv}}\n", "plant.A", "line 2, column 2",
          "'x', not a plain finite number")


def test_oversized_model_file(repo, monkeypatch):
    monkeypatch.setattr(_formats, "MAX_MODEL_FILE_BYTES", 64)
    fails(repo, BASE, f"is {len(BASE.encode())} bytes", "limit of 64 bytes")


def test_oversized_matrix_file(repo, monkeypatch):
    monkeypatch.setattr(_matrixfiles, "MAX_MATRIX_FILE_BYTES", 16)
    np.savez(repo / "models" / "big.npz", A=np.eye(3))
    fails(repo, "model_format: 1\nplant: {A: {file: big.npz}}\n", "plant.A.file",
          "'models/big.npz'", "limit of 16 bytes")


def test_both_plant_forms(repo):
    fails(repo, BASE + "  num: [1]\n  den: [1, 1]\n", "plant.num", "together with plant.A",
          "not both")


def test_neither_plant_form(repo):
    fails(repo, "model_format: 1\nplant: {inputs: [a]}\n", "plant", "got neither")


def test_improper_transfer_function(repo):
    fails(repo, "model_format: 1\nplant: {num: [1, 0, 0], den: [1, 1]}\n", "plant.num",
          "improper: numerator degree 2 exceeds denominator degree 1")


def test_feedback_names_unknown_signal(repo):
    fails(repo, BASE + "feedback: {output_gain: [[1]], outputs: [levle]}\n", "feedback.outputs",
          "'levle'", "plant outputs: level", "did you mean 'level'?")
    fails(repo, BASE + "feedback: {state_gain: [[1, 1]], inputs: [valve]}\n", "feedback.inputs",
          "'valve'", "plant inputs: pump")


def test_feedback_needs_exactly_one_kind(repo):
    fails(repo, BASE + "feedback: {state_gain: [[1, 1]], output_gain: [[1]]}\n", "feedback",
          "exactly one of", "got state_gain, output_gain")


def test_ill_posed_loop(repo):
    fails(repo, BASE.replace("  inputs:", "  D: [[1.0]]\n  inputs:")
          + "feedback: {output_gain: [[-1.0]]}\n", "feedback.output_gain", "ill-posed",
          "condition number")


def test_controller_domain_mismatch(repo):
    fails(repo, BASE + "domain: discrete\nsample_period: 0.1\nfeedback:\n  controller: "
          "{num: [1], den: [1, 0.5], sample_period: 0.2}\n", "feedback.controller.sample_period",
          "is 0.2", "plant's sample period is 0.1")


def test_operating_point_without_label(repo):
    fails(repo, BASE + "operating_points:\n  - label: low\n  - plant: {A: [[-1, 0], [0, -1]]}\n",
          "operating_points[1].label", "is missing", ":10:")


def test_operating_points_duplicate_labels(repo):
    fails(repo, BASE + "operating_points:\n  - label: low\n  - label: low\n",
          "operating_points[1].label", "is 'low'", "already used by operating_points[0]")


def test_operating_point_error_names_the_point(repo):
    fails(repo, BASE + "operating_points:\n  - label: v=30\n    plant:\n      A: [[1, 2, 3]]\n",
          "operating_points[0] (label 'v=30').plant.A", "must be square, got 1×3", ":11:")


def test_signal_names_wrong_count(repo):
    fails(repo, BASE.replace("inputs: [pump]", "inputs: [pump, valve]"), "plant.inputs",
          "must name 1 signals, got 2")


def test_json_schema_style_inputs_are_refused_clearly(repo):
    fails(repo, json.dumps({"model_format": 1, "plant": {"A": [[1]], "states": "x"}}),
          "plant.states", "must be a list of names", name="models/tank.json")
