"""The line reader of block-style YAML (``model.yaml_block``) gives what the other roads give.

Reference: the full road (PyYAML's composer and constructor with the YAML 1.2 core schema
resolvers, ``model.yaml_core``) and the event road (``model.yaml_events``), on generated
documents dumped in block style (with comments, blank lines and indentations added), on
hand-written documents in the forms the line reader reads, and on every YAML model file of
the repository. For each: the line reader declines, or data, types (int, float, bool, str,
None, the sign of a zero) and the field-line map are identical. What resolves to what: YAML
1.2.2 spec, 10.3.2 Tag Resolution, through the loader's own resolver.
"""

from pathlib import Path

import pytest
import yaml
from hypothesis import given, settings
from hypothesis import strategies as st

from eigengate.errors import ModelError
from eigengate.model import limits, yaml_block, yaml_events
from test_yaml_events import _full, _short as _events, _typed  # the two roads, and types

ROOT = Path(__file__).resolve().parent.parent


def _same_or_declined(text):
    """The line reader's answer for ``text`` is None or the other roads' (data, types,
    lines and the order of both); returns whether it read the text."""
    block = yaml_block.block_document(text)
    if block is None:
        return False
    full = _full(text)  # the line reader never accepts what the full road refuses
    assert _typed(block[0]) == _typed(full[0]), text
    assert list(block[0]) == list(full[0])
    assert block[1] == full[1], text
    events = _events(text) if yaml_events.may_be_plain(text) else None
    if events is not None:
        assert _typed(block[0]) == _typed(events[0]), text
        assert list(block[1].items()) == list(events[1].items()), text
    return True


keys = st.text(st.characters(whitelist_categories=("Lu", "Ll", "Nd"), whitelist_characters="_-",
                             max_codepoint=127), min_size=1, max_size=8)
words = st.text(st.sampled_from("abcXYZ019 _.-+/()=,;'~"), min_size=1, max_size=12)
scalars = (st.floats(allow_nan=False, allow_infinity=False) | st.integers(-10**18, 10**18)
           | st.booleans() | st.none() | words
           | st.sampled_from(["true", "True", "null", "~", "yes", "on", "1e5", "-0", "+1",
                              "2001-12-14", "1_000", "0x1F", ".5", "1.", "-.inf", "a b",
                              "x: y", "a #b", "-x", "- x", "", " a", "12:30"]))
matrices = st.integers(1, 5).flatmap(lambda n: st.lists(
    st.lists(st.floats(-1e6, 1e6) | st.integers(-9, 9), min_size=n, max_size=n),
    min_size=1, max_size=5))


def _nest(inner):
    return st.lists(inner, max_size=4) | st.dictionaries(keys, inner, max_size=4)


documents = st.recursive(scalars | matrices, _nest, max_leaves=30)


friendly = (st.floats(allow_nan=False, allow_infinity=False) | st.integers(-10**9, 10**9)
            | st.booleans() | st.none()
            | st.from_regex(r"[a-z][a-z0-9_ ()/=,;+-]{0,10}[a-z0-9)]", fullmatch=True))
names = st.from_regex(r"[a-z][a-z0-9_]{0,6}", fullmatch=True).filter(
    lambda k: k not in ("true", "false", "null"))


def _nest_friendly(inner):
    return st.lists(inner, min_size=1, max_size=4) | st.dictionaries(names, inner, min_size=1,
                                                                     max_size=4)


friendly_documents = st.recursive(friendly | matrices, _nest_friendly, max_leaves=30)


def _decorate(text, data):
    """``text`` with comments, blank lines and trailing blanks added where YAML allows them."""
    out = []
    for i, line in enumerate(text.splitlines()):
        kind = data.draw(st.integers(0, 9), label=f"line {i}")
        if kind == 0:
            out.append("# a comment: [not, flow] 'nor' a quote")
        elif kind == 1:
            out.append("")
        elif kind == 2:
            out.append("   ")
        if kind == 3:
            line += "  # note"
        elif kind == 4:
            line += "   "
        out.append(line)
    return "\n".join(out) + data.draw(st.sampled_from(["\n", "", "\n\n", "\n# end\n"]))


@settings(max_examples=300, deadline=None)
@given(st.dictionaries(keys, documents, min_size=1, max_size=6), st.sampled_from([2, 3, 4]),
       st.data())
def test_generated_block_documents_read_the_same_as_on_the_other_roads(doc, indent, data):
    text = yaml.safe_dump(doc, default_flow_style=False, sort_keys=False, indent=indent,
                          width=10**6)
    text = _decorate(text, data)
    try:
        _full(text)
    except ModelError:  # refused: the line reader must decline it too
        assert yaml_block.block_document(text) is None, text
        return
    _same_or_declined(text)


@settings(max_examples=300, deadline=None)
@given(st.dictionaries(names, friendly_documents, min_size=1, max_size=6),
       st.sampled_from([2, 4]), st.data())
def test_generated_documents_of_the_read_forms_read_the_same(doc, indent, data):
    # scalars that need no quotes: most of these documents are read by the line reader
    text = _decorate(yaml.safe_dump(doc, default_flow_style=False, sort_keys=False,
                                    indent=indent, width=10**6), data)
    try:
        _full(text)
    except ModelError:
        assert yaml_block.block_document(text) is None, text
        return
    _same_or_declined(text)


# the forms the line reader reads, in the arrangements a hand-written file may give them
READ = [
    "model_format: 1\nname: m\nplant:\n  A:\n  - - -1.0\n    - 2\n  - - 0.5\n    - -3.5e-2\n",
    "a:\n- 1.0\n- 2.0\n- 3.0\nb: 1\n",
    "a:\n  - 1.0\n  - 2.0\nb:\n  c:\n    - - 1.\n      - .5\n    - - 0\n      - 1e5\n",
    "points:\n- label: a\n  plant:\n    A:\n    - - -1.0\n- label: b\n  id: x-2\n",
    "points:\n  - label: a\n    k: 1\n  -\n    label: b\n  - - 1\n    - 2\n  -\n  - ~\n",
    "a:\nb: ~\nc: null\nd: Null\ne: true\nf: FALSE\ng: text with words, (and) more\n",
    "a: +3.25E+4\nb: 007\nc: -0\nd: -0.0\ne: 1e5\nf: 12345678901234\ng: yes\nh: on\n",
    "# head\n\na: 1  # one\n   # indented comment\nb:  # then a block\n  c: 2\n\n",
    "a:\n- - - 1.0\n    - 2.0\n  - - 3.0\n- -\n  - 4.0\n-\n  - 5.0\n",
    "a:\n  - k:\n    - 1.0\n    - 2.0\n    j: 3\n  - k:\n      m: 1\n",
    "a:   1.5\nb:\n-   x\n-   - 2.0\n    - 3.0\n",
    "a: x\n",
    "a:\n",
    "a: 1\nb:\n  - 1.0\n  - 2.0",
    "requirements:\n  stable: true\n  min_damping: 0.05\nwaivers:\n- rule: EG101\n  reason: "
    "known slow mode, see the note\n",
]


@pytest.mark.parametrize("text", READ)
def test_hand_written_block_documents_are_read_the_same(text):
    assert _same_or_declined(text), "declined a form the line reader reads"


@pytest.mark.parametrize("text", [
    "a: [1, 2]\n", "a: {b: 1}\n", "a: 'x'\n", 'a: "x"\n', "a: |\n  x\n", "a: >\n  x\n",
    "a:\n\tb: 1\n", "a: 1\t\n", "a: &x 1\nb: *x\n", "a: !!int 1\n", "---\na: 1\n", "a: 1\n...\n",
    "%YAML 1.2\n---\na: 1\n", "a: 1\na: 2\n", "true: x\n", "null: x\n", "a.b: 1\n", "1: x\n",
    "a: .inf\n", "a: .nan\n", "a: 0x1F\n", "a: 0o17\n", "a: 12345678901234567\n",
    "a: 2001-12-14\n", "a: 1_000\n", "a: 12:30\n", "a: x\n  y\n", "a: 1\n  b: 2\n",
    "a:\n  b: 1\n c: 2\n", "a:\n- 1\n  - 2\n", "- a\n- b\n", "1.5\n", "  a: 1\n", "",
    "# only a comment\n", "a: =\n", "a: x:y\n", "a: b: c\n", "a: - x\n", "a: x#y\n", "a: é\n",
    "a: 1\r\nb: 2\r\n", "a:\n  - 1\n  b: 2\n", "a: 1\n- 2\n", "? a\n: 1\n", "a: ~x\n",
    "a:\n    b: 1\n  c: 2\n", "a: \u00a0\n", "a: 1 # \x07\n", "k" * 1100 + ": 1\n",
    "a:\n- " + "k" * 1100 + ": 1\n",
])
def test_what_the_line_reader_declines(text):
    assert yaml_block.block_document(text) is None


def test_nesting_and_size_near_the_limits_are_left_to_the_other_roads(monkeypatch):
    deep = "".join(f"{' ' * (2 * i)}k{i}:\n" for i in range(70)) + " " * 140 + "v: 1\n"
    assert yaml_block.block_document(deep) is None
    lists = "a:\n" + "".join(" " * (2 * i) + "-\n" for i in range(70)) + " " * 140 + "- 1\n"
    assert yaml_block.block_document(lists) is None
    text = "a:\n" + "".join(f"- {i}.5\n" for i in range(100))
    assert yaml_block.block_document(text) is not None
    monkeypatch.setattr(limits, "MAX_VALUES", 50)
    assert yaml_block.block_document(text) is None
    monkeypatch.setattr(limits, "MAX_VALUES", 10_000_000)
    monkeypatch.setattr(limits, "MAX_NESTING", 3)
    assert yaml_block.block_document("a:\n  b:\n    c:\n      d: 1\n") is None


@settings(max_examples=300, deadline=None)
@given(st.from_regex(yaml_block._SCALAR, fullmatch=True))
def test_a_plain_scalar_is_converted_as_the_loader_converts_it(s):
    # reference: the loader's resolver and constructors, through the full road
    try:
        expected = _full(f"v: {s}\n")[0]["v"]
    except ModelError:
        expected = None
        declined = True
    else:
        declined = False
    try:
        got = yaml_block.scalar_value(s)
    except yaml_block._Decline:
        return
    assert not declined
    assert _typed(got) == _typed(expected)


def test_repository_model_files_read_the_same():
    """Every YAML model file of the repository, and the model texts the tests write."""
    import support

    files = sorted(ROOT.glob("example_repo/**/*.y*ml")) + sorted(ROOT.glob("tests/**/*.y*ml"))
    texts = [p.read_text(encoding="utf-8") for p in files]
    texts += [support.oscillator(), support.oscillator("o2", None), support.lift_axis(2.0)]
    read = 0
    for text in texts:
        try:
            _full(text)
        except ModelError:
            assert yaml_block.block_document(text) is None
            continue
        read += _same_or_declined(text)
    # the hand-written examples use flow style and folded text: what matters is equality
    assert texts and read >= 0


def test_a_dumped_model_file_is_read_by_the_line_reader():
    import numpy as np

    rng = np.random.default_rng(7)
    for n in (1, 2, 7, 12):
        doc = {"model_format": 1, "name": f"m{n}", "plant": {
            "A": rng.normal(size=(n, n)).round(6).tolist(),
            "B": rng.normal(size=(n, 2)).tolist(), "C": rng.normal(size=(1, n)).tolist(),
            "D": [[0, 0]]}, "requirements": {"stable": True, "min_damping": 0.05}}
        text = yaml.safe_dump(doc, sort_keys=False)
        assert _same_or_declined(text), "declined a dumped model file"
