"""Model files with a vector_field block: opt-in import, operating points, sweeps, equilibrium
requirements and bad input (always a ModelError or a finding, never a traceback)."""

import shutil
import sys
from pathlib import Path

import pytest
import yaml

from eigengate.scan.config import Config
from eigengate.scan.engine import check_file, check_model
from eigengate.errors import ModelError
from eigengate.load.loader import load_models

FIELDS = Path(__file__).with_name("fields.py")

# An invented orchard-irrigation boom, hanging from a pivot like a damped pendulum.
PENDULUM = {
    "model_format": 1, "name": "boom",
    "vector_field": {
        "function": "fields:pendulum", "parameters": {"b": 0.2},
        "states": ["theta", "omega"], "inputs": ["torque"],
        "at": [{"label": "hanging", "x": [0.0, 0.0], "u": [0.0]},
               {"label": "inverted", "x": [3.141592653589793, 0.0],
                "requirements": {"stable": False, "equilibrium": "saddle"}}],
        "equilibria": {"box": {"theta": [-1.0, 4.0], "omega": [-1.0, 1.0]}, "starts": 16},
    },
    "requirements": {"stable": True, "equilibrium_count": 2},
}


@pytest.fixture
def repo(tmp_path):
    (tmp_path / "pyproject.toml").write_text("[tool.eigengate]\n", encoding="utf-8")
    (tmp_path / "dynamics").mkdir()
    (tmp_path / "dynamics" / "__init__.py").write_text("", encoding="utf-8")
    shutil.copy(FIELDS, tmp_path / "dynamics" / "fields.py")
    return tmp_path


def write(repo, doc, name="boom.yaml"):
    text = yaml.safe_dump(doc, sort_keys=False).replace("fields:", "dynamics.fields:")
    (repo / "models").mkdir(exist_ok=True)
    path = repo / "models" / name
    path.write_text(text, encoding="utf-8")
    return path


def by_label(models):
    return {m.label: {v.rule: v for v in check_model(m).verdicts} for m in models}


def test_python_import_is_opt_in(repo):
    path = write(repo, PENDULUM)
    with pytest.raises(ModelError) as info:
        load_models(path)
    text = str(info.value)
    assert text.startswith("models/boom.yaml") and "vector_field.function" in text
    assert "allow_python = true" in text and "[tool.eigengate]" in text
    # the CLI path passes Config.allow_python
    assert check_file(path, config=Config(root=repo)).findings[0].rule == "EG001"
    assert check_file(path, config=Config(root=repo, allow_python=True)).passed


def test_operating_points_become_models_and_sys_path_is_restored(repo):
    before = list(sys.path)
    models = load_models(write(repo, PENDULUM), allow_python=True)
    assert sys.path == before
    assert [m.label for m in models] == ["hanging", "inverted"]
    assert models[0].structure == "linearised vector field (complex step)"
    v = by_label(models)
    assert v["hanging"]["EG101"].passed and v["hanging"]["EG403"].passed
    assert "EG403" not in v["inverted"]  # set-level requirements: once per parameter set
    assert v["inverted"]["EG106"].passed and "EG101" not in v["inverted"]


def test_sweep_labels_and_equilibrium_requirements(repo):
    doc = {"model_format": 1, "name": "oscillator",
           "vector_field": {"function": "fields:van_der_pol", "states": ["x", "v"],
                            "at": [{"label": "origin", "x": [0.0, 0.0]}],
                            "sweep": {"mu": [0.5, 3.0]}},
           "requirements": {"equilibrium_at": {"x": [0, 0], "type": "unstable-focus"}}}
    v = by_label(load_models(write(repo, doc), allow_python=True))
    assert set(v) == {"mu=0.5, origin", "mu=3, origin"}
    assert v["mu=0.5, origin"]["EG402"].passed  # Van der Pol: focus for 0 < μ < 2
    bad = v["mu=3, origin"]["EG402"]
    assert not bad.passed and "found unstable-node" in bad.message  # node for μ > 2


def test_found_equilibria_become_the_operating_points(repo):
    doc = {"model_format": 1, "name": "bistable",
           "vector_field": {"function": "fields:cubic", "parameters": {"a": 1.0},
                            "states": ["p", "q"],
                            "equilibria": {"box": {"p": [-2, 2], "q": [-1, 1]}}},
           "requirements": {"equilibrium_count": 3, "no_saddle_in_box": True,
                            "equilibria_stable": True}}
    models = load_models(write(repo, doc), allow_python=True)
    assert [m.label for m in models] == ["x*=[-1, 0]", "x*=[0, 0]", "x*=[1, 0]"]
    first = by_label(models)["x*=[-1, 0]"]
    assert first["EG403"].passed
    assert not first["EG401"].passed and "saddle at [0, 0]" in first["EG401"].message
    assert not first["EG404"].passed


def test_box_without_equilibrium(repo):
    doc = {"model_format": 1, "vector_field": {
        "function": "fields:no_equilibrium", "states": ["p", "q"],
        "equilibria": {"box": {"p": [-1, 1], "q": [-1, 1]}, "starts": 8}}}
    with pytest.raises(ModelError, match="found no equilibrium in the box: 8 starts"):
        load_models(write(repo, doc), allow_python=True)
    doc["requirements"] = {"equilibria_stable": True}  # now a failing, uncertain verdict
    (model,) = load_models(write(repo, doc), allow_python=True)
    v = {x.rule: x for x in check_model(model).verdicts}["EG404"]
    assert not v.passed and v.uncertain and "no equilibrium found" in v.message
    doc["requirements"] = {"equilibrium_count": 0}
    (model,) = load_models(write(repo, doc), allow_python=True)
    assert check_model(model).passed


@pytest.mark.parametrize("function, words", [
    ("fields:wrong_shape", "returned shape (3,), expected (2,)"),
    ("fields:gives_nan", "returned a non-finite value"),
    ("fields:raises", "raised ZeroDivisionError: rotor speed is zero"),
    ("fields:missing", "is not a function of module"),
    ("nowhere.at_all:f", "cannot be imported from the repository root"),
    ("not a reference", "must be 'package.module:function'"),
])
def test_bad_vector_fields_are_model_errors(repo, function, words):
    doc = {"model_format": 1, "vector_field": {"function": function, "states": ["p", "q"],
                                               "at": [{"label": "rest", "x": [0.0, 0.0]}]}}
    with pytest.raises(ModelError) as info:
        load_models(write(repo, doc), allow_python=True)
    text = str(info.value)
    assert words in text and text.startswith("models/boom.yaml")
    assert "vector_field.function" in text and "Traceback" not in text


@pytest.mark.parametrize("change, words", [
    ({"plant": {"A": [[1.0]]}}, "cannot be combined with vector_field"),
    ({"vector_field": {"function": "fields:cubic", "states": ["p", "q"]}},
     "needs at (operating points) or equilibria"),
    ({"requirements": {"min_phase_margin_deg": 30}}, "a vector field has no loop"),
    ({"vector_field": {**PENDULUM["vector_field"], "at": [{"label": "a", "x": [0.0]}]}},
     "must be a list of 2 finite numbers"),
    ({"vector_field": {**PENDULUM["vector_field"],
                       "equilibria": {"box": {"theta": [1, 0], "omega": [0, 1]}}}},
     "must have low < high"),
])
def test_bad_vector_field_blocks(repo, change, words):
    with pytest.raises(ModelError, match=words.replace("(", r"\(").replace(")", r"\)")):
        load_models(write(repo, {**PENDULUM, **change}), allow_python=True)


def test_user_jacobian_and_a_module_of_the_same_name_elsewhere(repo, tmp_path_factory):
    doc = {**PENDULUM, "vector_field": {**PENDULUM["vector_field"],
                                        "jacobian": "fields:pendulum_jacobian"}}
    models = load_models(write(repo, doc), allow_python=True)
    assert models[0].structure == "linearised vector field (jacobian function)"
    other = tmp_path_factory.mktemp("other")  # another repository with its own dynamics pkg
    (other / "pyproject.toml").write_text("", encoding="utf-8")
    (other / "dynamics").mkdir()
    (other / "dynamics" / "__init__.py").write_text("", encoding="utf-8")
    (other / "dynamics" / "fields.py").write_text(
        "import numpy as np\ndef pendulum(x, u, b=0.0):\n    return np.array([x[1], -4*x[0]])\n",
        encoding="utf-8")
    doc = {"model_format": 1, "vector_field": {"function": "fields:pendulum",
                                               "states": ["t", "w"],
                                               "at": [{"label": "rest", "x": [0.0, 0.0]}]}}
    (model,) = load_models(write(other, doc), allow_python=True)
    assert model.A[1, 0] == pytest.approx(-4.0)  # its own module, not the first repository's
