"""The short road of the YAML reader (``model.yaml_events``) gives what the full road gives.

Reference: the full road itself (PyYAML's composer and constructor with the YAML 1.2 core
schema resolvers, ``model.yaml_core``), on generated documents in block and flow style, the
example repository's model files, and the cases the short road must decline (YAML 1.2.2
spec, 10.3.2 Tag Resolution, for what resolves to what).
"""

import math
from pathlib import Path

import pytest
import yaml
from hypothesis import given, settings
from hypothesis import strategies as st

from eigengate.errors import ModelError
from eigengate.model import yaml_core, yaml_events

ROOT = Path(__file__).resolve().parent.parent


def _full(text):
    with pytest.MonkeyPatch.context() as m:
        m.setattr(yaml_events, "may_be_plain", lambda t: False)
        return yaml_core.parse_yaml(text, "m.yaml")


def _short(text):
    loader = yaml_core._yaml_loader_class()(text)
    try:
        return yaml_events.plain_document(loader)
    finally:
        loader.dispose()


def _typed(x):
    """Data with every scalar's type (and the sign of a zero) made visible to ==."""
    if isinstance(x, dict):
        return {k: _typed(v) for k, v in x.items()}
    if isinstance(x, list):
        return [_typed(v) for v in x]
    if isinstance(x, float):
        return ("float", x.hex() if math.isfinite(x) else repr(x))
    return (type(x).__name__, x)


keys = st.text(st.characters(whitelist_categories=("L", "N"), whitelist_characters="_-"),
               min_size=1, max_size=8)
scalars = (st.floats(allow_nan=False, allow_infinity=False)
           | st.integers(-10**12, 10**12) | st.booleans() | st.none()
           | st.text(st.characters(blacklist_characters="!&*<", blacklist_categories=("Cs", "Cc")),
                     max_size=12))
documents = st.recursive(scalars, lambda inner: st.lists(inner, max_size=5)
                         | st.dictionaries(keys, inner, max_size=5), max_leaves=40)


@settings(max_examples=150, deadline=None)
@given(st.dictionaries(keys, documents, min_size=1, max_size=6), st.sampled_from([None, True, False]))
def test_generated_documents_read_the_same_on_both_roads(doc, flow):
    text = yaml.safe_dump(doc, default_flow_style=flow, allow_unicode=True, sort_keys=False)
    if not yaml_events.may_be_plain(text):
        return
    short = _short(text)
    try:
        full = _full(text)
    except ModelError:  # refused (a YAML 1.1 string that is a 1.2 number as a key, say)
        assert short is None
        return
    if short is None:  # declined: only for what the short road leaves to the full one
        assert any(k in text for k in (".inf", ".nan", "0x", "0o")) or \
            any(isinstance(v, int) and len(str(v)) > 16 for v in _leaves(doc)) or \
            _has_nonstr_key(full[0])
        return
    assert _typed(short[0]) == _typed(full[0])
    assert short[1] == full[1]


def _leaves(x):
    if isinstance(x, dict):
        for v in x.values():
            yield from _leaves(v)
    elif isinstance(x, list):
        for v in x:
            yield from _leaves(v)
    else:
        yield x


def _has_nonstr_key(x):
    if isinstance(x, dict):
        return any(not isinstance(k, str) or _has_nonstr_key(v) for k, v in x.items())
    if isinstance(x, list):
        return any(_has_nonstr_key(v) for v in x)
    return False


@pytest.mark.parametrize("text", [
    "model_format: 1\nname: m\nplant:\n  A: [[-1.0, 2], [0, -3.5e-2]]\n  B:\n  - [1]\n  - [0]\n",
    "a: 1.\nb: -.5\nc: +3.25E+4\nd: 007\ne: -0\nf: -0.0\ng: true\nh: False\ni: ~\nj: null\nk:\n",
    "when: 2001-12-14\nquoted: '1.5'\nblock: |\n  text\n  more\nfolded: >\n  a\n  b\n",
    "name: 'x: y'\nlist:\n- - 1\n  - 2\n- {a: 1, b: [2, 3]}\n- []\n- {}\n",
    "---\nk: v\n...\n",
    "1.5\n",
    "- a\n- b\n",
])
def test_hand_written_documents_read_the_same(text):
    short = _short(text)
    assert short is not None
    full = _full(text)
    assert _typed(short[0]) == _typed(full[0]) and short[1] == full[1]


@pytest.mark.parametrize("text", [
    "a: !!int 1\n", "a: &x 1\nb: *x\n", "base: {a: 1}\nm:\n  <<: {b: 2}\n",
    "a: 1\na: 2\n", "1: x\n", "true: x\n", "null: x\n", "2001-01-01: x\n", "[a]: 1\n",
    "a: .inf\n", "a: .nan\n", "a: 0x1F\n", "a: 0o17\n", "a: 12345678901234567\n",
    "a: 1\n---\nb: 2\n", "", "# only a comment\n", "a: =\n", "a: [1, 2\n", "a:\n\tb: 1\n",
])
def test_what_the_short_road_declines(text):
    assert _short(text) is None if yaml_events.may_be_plain(text) else True


def test_deep_nesting_is_left_to_the_full_road():
    text = "a: " + "[" * 70 + "]" * 70 + "\n"
    assert _short(text) is None


@settings(max_examples=100, deadline=None)
@given(st.from_regex(yaml_events._DECIMAL, fullmatch=True))
def test_a_decimal_is_a_core_schema_float(s):
    # reference: the loader's own resolver (YAML 1.2 core schema) and its float constructor
    loader = yaml_core._yaml_loader_class()("x")
    try:
        assert loader.resolve(yaml.ScalarNode, s, (True, False)) == "tag:yaml.org,2002:float"
    finally:
        loader.dispose()
    assert _typed(_full(f"v: {s}\n")[0]["v"]) == _typed(float(s))


def test_example_repository_files_read_the_same():
    files = sorted((ROOT / "example_repo").rglob("*.yaml"))
    assert files
    taken = 0
    for path in files:
        text = path.read_text(encoding="utf-8")
        try:
            full = _full(text)
        except Exception:  # noqa: BLE001 - a deliberately broken example: not this test's
            continue
        short = _short(text) if yaml_events.may_be_plain(text) else None
        if short is not None:
            taken += 1
            assert _typed(short[0]) == _typed(full[0]) and short[1] == full[1], path
    assert taken >= len(files) // 2
