"""The loader's short roads give exactly what the roads they shorten give.

Each short road is compared with the general one on generated inputs (hypothesis) and on the
repository's model files: the inline-matrix check (``model.matrices._plain_rows`` against
``_general_matrix``: the same array, bit for bit, or the same error), a Model built without
its frozen ``__init__`` (``core.new_model`` against ``Model(...)``), the line reader's quick
matrix pattern (against its exact pattern and the full PyYAML road), the per-process cache of
requirement layers (against a fresh parse) and a plain absolute file name read as it is
(against the same file reached through ``Path`` and ``os.path.realpath``). Reference: the
general road in each case ("common practice": a fast path is checked against the code it
shortcuts); numpy's ``abs().max()`` for a matrix's largest entry.
"""

import dataclasses
import math
import os
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from eigengate.errors import ModelError
from eigengate.load import loader
from eigengate.model import core, filenames, matrices, yaml_block
from eigengate.rules import parsing
from test_yaml_events import _full, _typed

ROOT = Path(__file__).resolve().parent.parent


def _outcome(fn, *args, **kwargs):
    """What ``fn`` gives, or the fields of the ModelError it raises."""
    try:
        return "ok", fn(*args, **kwargs)
    except ModelError as exc:
        return "error", (exc.source, exc.field, exc.problem, exc.line, exc.hint)


def _array(arr):
    return arr.dtype.str, arr.shape, arr.tobytes()


entries = (st.floats(allow_nan=True, allow_infinity=True) | st.integers(-10**6, 10**6)
           | st.sampled_from([True, False, None, "1.5", "x", 1e200, -1e-160, 1j, -0.0, 0,
                              [1.0], (1.0,)]))
plain_entries = st.floats(-1e6, 1e6) | st.integers(-9, 9)
rows_of = st.integers(0, 4).flatmap(lambda w: st.lists(
    st.lists(plain_entries, min_size=w, max_size=w), min_size=1, max_size=5))
values = (rows_of | st.lists(st.lists(entries, max_size=4), max_size=4)
          | st.lists(entries, max_size=4) | entries)


@settings(max_examples=400, deadline=None)
@given(values)
def test_inline_matrix_check_is_the_general_one(value):
    fast = _outcome(matrices.as_matrix, value, "m.yaml", "plant.A", line=3)
    general = _outcome(matrices._general_matrix, value, "m.yaml", "plant.A", 3, False)
    assert fast[0] == general[0]
    if fast[0] == "ok":
        assert _array(fast[1]) == _array(general[1])
        arr, top = matrices.matrix_and_top(value, "m.yaml", "plant.A", 3)
        assert _array(arr) == _array(general[1])
        assert top == (float(np.abs(arr).max()) if arr.size else 0.0)
    else:
        assert fast == general


@settings(max_examples=100, deadline=None)
@given(st.lists(st.lists(st.floats(-1e-149, 1e-149), min_size=2, max_size=2), min_size=2,
                max_size=2))
def test_scale_check_from_the_known_top_is_the_general_one(rows):
    arr, top = matrices.matrix_and_top(rows, "m.yaml", "plant.A", 3)

    def bad(problem, hint=None):
        return ModelError("m.yaml", "plant.A", problem, line=3, hint=hint)

    assert _outcome(matrices.check_scale_top, arr, top, bad) == \
        _outcome(matrices._check_scale, arr, bad)


@settings(max_examples=100, deadline=None)
@given(st.dictionaries(st.sampled_from([f.name for f in dataclasses.fields(core.Model)
                                        if f.name not in ("name", "A", "B", "C", "D",
                                                          "lines")]),
                       st.none() | st.integers() | st.text(max_size=3), max_size=6))
def test_new_model_is_the_dataclass_one(extra):
    a = np.eye(2)
    fields = dict(name="m", A=a, B=a, C=a, D=a, lines={"plant.A": 3}, **extra)
    built, made = core.new_model(**fields), core.Model(**fields)
    assert type(built) is core.Model
    assert list(vars(built).items()) == list(vars(made).items())


decimals = st.sampled_from(["1.0", "-2.5", "+0.5", "1.", ".5", "-.5e-3", "1.5e+3", "1.e5",
                            "1e5", "1", "-0.0", "0.0", "1.0.0", "--1.0", "1.0e", "e.5", ".",
                            "+.", "1.5E2", "00.10", "1_0.0", "7.25"])


@st.composite
def block_matrices(draw):
    indent = " " * draw(st.sampled_from([0, 2, 4]))
    rows = draw(st.lists(st.lists(decimals, min_size=1, max_size=4), min_size=1, max_size=4))
    body = "".join(indent + "- - " + row[0] + "\n"
                   + "".join(indent + "  - " + x + "\n" for x in row[1:]) for row in rows)
    if indent:
        return "model_format: 1\nplant:\n  A:\n" + body + "name: m\n"
    return "model_format: 1\nA:\n" + body + "name: m\n"


@settings(max_examples=400, deadline=None)
@given(block_matrices())
def test_quick_matrix_pattern_reads_what_the_exact_one_reads(text):
    quick = yaml_block.block_document(text)
    with pytest.MonkeyPatch.context() as m:
        m.setattr(yaml_block, "_QUICK", yaml_block._TOKEN)
        exact = yaml_block.block_document(text)
    assert (quick is None) == (exact is None), text
    if quick is not None:
        assert _typed(quick[0]) == _typed(exact[0]), text
        assert list(quick[1].items()) == list(exact[1].items()), text
        full = _full(text)
        assert _typed(quick[0]) == _typed(full[0]), text
        assert quick[1] == full[1], text


layer_values = st.sampled_from([True, False, 1, 1.0, 0, 0.0, -0.0, 0.05, 0.2, 2, -0.1,
                                "marginal", "yes", None, float("nan"), 10, 100.5])
layer_keys = st.sampled_from(["stable", "min_damping", "min_decay_rate", "max_frequency",
                              "no_saddle", "stabel"])


@settings(max_examples=300, deadline=None)
@given(st.dictionaries(layer_keys, layer_values, max_size=4))
def test_cached_requirement_layer_is_a_fresh_parse(raw):
    fresh = _outcome(parsing._parse_layer, raw, "m.yaml", "requirements.",
                     {"requirements": 5})
    for _ in range(2):  # the first call may fill the cache, the second reads it
        got = _outcome(parsing.parse_requirement_layer, raw, "m.yaml", "requirements.",
                       {"requirements": 5})
        assert got[0] == fresh[0]
        if got[0] == "ok":
            assert repr(got[1]) == repr(fresh[1])
            assert [type(r) for r in got[1][0]] == [type(r) for r in fresh[1][0]]
        else:
            assert got == fresh


def test_requirement_layers_that_differ_only_in_types_or_zero_signs_stay_apart():
    first = parsing.parse_requirement_layer({"min_damping": 0.0}, "m.yaml")
    second = parsing.parse_requirement_layer({"min_damping": -0.0}, "m.yaml")
    assert math.copysign(1, first[0][0].zeta) == 1
    assert math.copysign(1, second[0][0].zeta) == -1
    as_int = parsing.parse_requirement_layer({"max_frequency": 10}, "m.yaml")
    as_float = parsing.parse_requirement_layer({"max_frequency": 10.0}, "m.yaml")
    assert repr(as_int) == repr(as_float)  # both parse to a float threshold
    with pytest.raises(ModelError, match="must be true, false or 'marginal', got 1"):
        parsing.parse_requirement_layer({"stable": 1}, "m.yaml")
    assert parsing.parse_requirement_layer({"stable": True}, "m.yaml")[0]


@given(st.lists(st.sampled_from(["a", "b.yaml", ".x", "c.tar.gz", "d.", "..", ".", "",
                                 "e f.yml"]), min_size=1, max_size=4))
def test_plain_names_are_what_path_makes_of_them(parts):
    name = "/" + "/".join(parts)
    if filenames.plain_name(name):
        assert str(Path(name)) == name
        assert filenames.name_parts(name) == (Path(name).stem, Path(name).suffix)
    assert filenames.name_parts(str(Path(name))) == (Path(name).stem, Path(name).suffix)


def _dump(x, depth=0):
    """A model (or anything in it) as plain data: arrays by dtype, shape and bytes."""
    if isinstance(x, np.ndarray):
        return ("array", x.dtype.str, x.shape, x.tobytes())
    if dataclasses.is_dataclass(x) and not isinstance(x, type):
        return (type(x).__name__, [(f.name, _dump(getattr(x, f.name), depth + 1))
                                   for f in dataclasses.fields(x)])
    if isinstance(x, dict):
        return [(k, _dump(v, depth + 1)) for k, v in x.items()]
    if isinstance(x, (list, tuple)):
        return [_dump(v, depth + 1) for v in x]
    if isinstance(x, float):
        return ("float", x.hex() if math.isfinite(x) else repr(x))
    if hasattr(x, "records"):  # ModelInputs: what a baseline stores of it
        return ("inputs", repr(x.records()))
    if callable(x) or depth > 8:
        return type(x).__name__
    return (type(x).__name__, repr(x))


def _load_dump(path, root):
    got = _outcome(loader.load_models_with_refs, path, root=root)
    if got[0] == "ok":
        models, refs = got[1]
        return "ok", [_dump(m) for m in models], refs
    return got


_MODEL = """model_format: 1
plant:
  A:
  - - -1.5
    - 0.25
  - - 0.5
    - -2.0
  B:
  - - 1.0
  - - 0.0
  C:
  - - 1.0
    - 0.0
requirements:
  stable: true
  min_damping: 0.05
"""


def test_plain_names_load_what_the_path_road_loads(tmp_path, monkeypatch):
    (tmp_path / "pyproject.toml").write_text("")
    models = tmp_path / "models"
    models.mkdir()
    (models / "good.yaml").write_text(_MODEL)
    (models / "bad.yaml").write_text(_MODEL.replace("0.25", "true"))
    (models / "odd.name.yml").write_text(_MODEL)
    outside = tmp_path.parent / (tmp_path.name + "-outside.yaml")
    outside.write_text(_MODEL)
    (models / "inside-link.yaml").symlink_to(models / "good.yaml")
    (models / "outside-link.yaml").symlink_to(outside)
    (models / "linked").symlink_to(models, target_is_directory=True)
    monkeypatch.chdir(tmp_path)
    for name in ("good.yaml", "bad.yaml", "odd.name.yml", "inside-link.yaml",
                 "outside-link.yaml", "missing.yaml", "linked/good.yaml"):
        plain = str(models / name)  # absolute, plain: read as it is
        assert filenames.plain_name(plain)
        general = os.path.join("models", ".", name)  # relative, through Path
        assert _load_dump(plain, tmp_path) == _load_dump(general, tmp_path), name
        assert _load_dump(Path(plain), tmp_path) == _load_dump(general, tmp_path), name


@pytest.mark.parametrize("path", sorted((ROOT / "example_repo" / "models").rglob("*.*")),
                         ids=lambda p: p.name)
def test_repository_models_load_the_same_by_plain_name_and_by_path(path, monkeypatch):
    root = ROOT / "example_repo"
    monkeypatch.chdir(root)
    general = os.path.join(".", os.path.relpath(path, root))
    assert _load_dump(str(path), root) == _load_dump(general, root)
