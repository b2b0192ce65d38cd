"""Property: whatever document or bytes a model file holds, loading it gives models or one
clear error that names the file; never another exception, never a hang.

Documents are drawn as nested mappings, lists and scalars (keys often the format's own field
names, so generation reaches deep into the loader) and written as YAML, TOML or JSON; bytes are
drawn raw and as mutations of a valid file. Derandomised and bounded so it runs in seconds and
the same way in CI.
"""

import json
import tempfile
from pathlib import Path

import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from eigengate.errors import EigengateError
from eigengate.load.loader import load_models
from hostile_cases import toml_value
from hostile_harness import time_limit

SETTINGS = settings(derandomize=True, max_examples=120, deadline=None, database=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
FIELDS = ["model_format", "name", "plant", "A", "B", "C", "D", "E", "num", "den", "states",
          "inputs", "outputs", "feedback", "state_gain", "output_gain", "controller",
          "requirements", "stable", "min_damping", "operating_points", "label", "domain",
          "sample_period", "known_modes", "count", "waivers", "rule", "reason", "loop", "at",
          "file", "key", "allowed_drift", "on_uncertain", "vector_field", "function"]
KEYS = st.sampled_from(FIELDS) | st.text(max_size=8)
SCALARS = (st.none() | st.booleans() | st.integers(-10 ** 30, 10 ** 30)
           | st.floats(allow_nan=True, allow_infinity=True) | st.text(max_size=12)
           | st.sampled_from(["discrete", "continuous", "marginal", "a.npz", "../x.csv"]))
MATRIX = st.lists(st.lists(st.floats(-1e3, 1e3) | st.integers(-5, 5), min_size=1, max_size=3),
                  min_size=1, max_size=3)
VALUES = st.recursive(SCALARS | MATRIX, lambda inner: st.lists(inner, max_size=4)
                      | st.dictionaries(KEYS, inner, max_size=5), max_leaves=25)
DOCS = st.dictionaries(KEYS, VALUES, max_size=6) | st.fixed_dictionaries(
    {"model_format": st.just(1) | SCALARS, "plant": VALUES},
    optional={"feedback": VALUES, "requirements": VALUES, "operating_points": VALUES,
              "domain": SCALARS, "sample_period": SCALARS})


def _no_none(v):
    if isinstance(v, dict):
        return {k: _no_none(x) for k, x in v.items() if x is not None}
    if isinstance(v, list):
        return [_no_none(x) for x in v if x is not None]
    return v


def _dump(doc: dict, ext: str) -> str:
    if ext == "yaml":
        return yaml.safe_dump(doc, allow_unicode=True)
    if ext == "json":
        return json.dumps(doc)  # NaN and Infinity written bare: the loader must refuse them
    return "".join(f"{json.dumps(k)} = {toml_value(v)}\n" for k, v in _no_none(doc).items())


def _load_promise(raw: bytes, ext: str) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        (root / "pyproject.toml").write_text("[project]\nname = 'p'\n")
        (root / "models").mkdir()
        path = root / "models" / f"drawn.{ext}"
        path.write_bytes(raw)
        with time_limit(60):
            try:
                models = load_models(path, root)
            except EigengateError as exc:
                message = str(exc)
                assert message.startswith("models/drawn." + ext), message
                assert "Traceback" not in message and "\n" not in message, message
                return
        assert models and all(m.source == f"models/drawn.{ext}" for m in models)
        from eigengate.scan.engine import analyse_model

        for m in models:
            analyse_model(m)


@SETTINGS
@given(DOCS, st.sampled_from(["yaml", "toml", "json"]))
def test_any_document_gives_models_or_an_error_naming_the_file(doc, ext):
    _load_promise(_dump(doc, ext).encode("utf-8", "surrogatepass"), ext)


VALID = (b"model_format: 1\nname: drawn\nplant:\n  A: [[0, 1], [-2, -0.3]]\n  B: [[0], [1]]\n"
         b"  C: [[1, 0]]\nfeedback: {output_gain: [[0.5]]}\nrequirements: {stable: true}\n")


@SETTINGS
@given(st.binary(max_size=400) | st.builds(
    lambda at, cut, noise: VALID[:at] + noise + VALID[at + cut:],
    st.integers(0, len(VALID)), st.integers(0, 8), st.binary(max_size=6)),
    st.sampled_from(["yaml", "toml", "json"]))
def test_any_bytes_give_models_or_an_error_naming_the_file(raw, ext):
    _load_promise(raw, ext)
