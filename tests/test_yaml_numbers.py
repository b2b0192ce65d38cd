"""YAML numbers follow the YAML 1.2 core schema, in the normal path and in the fast path for
matrix rows alike.

The regular expressions below are copied from the YAML 1.2.2 spec, 10.3.2 Tag Resolution
(core schema): a plain scalar matching one of them is an int, a float, a bool or null; any
other plain scalar is a string. The YAML 1.1 spellings that the core schema does not know
(``1_000``, ``0b1``, sexagesimal ``1:20``, ``yes``/``no``/``on``/``off``) stay strings, so a
field that wants a number or a boolean refuses them with a clear error.
"""

import math
import re

import pytest

from eigengate.model import formats as _formats
from eigengate.errors import ModelError
from eigengate.load.loader import load_models

# YAML 1.2.2 spec, 10.3.2 Tag Resolution (core schema), verbatim apart from whitespace.
CORE_NULL = re.compile(r"null|Null|NULL|~")
CORE_BOOL = re.compile(r"true|True|TRUE|false|False|FALSE")
CORE_INT10 = re.compile(r"[-+]?[0-9]+")
CORE_INT8 = re.compile(r"0o[0-7]+")
CORE_INT16 = re.compile(r"0x[0-9a-fA-F]+")
CORE_FLOAT = re.compile(r"[-+]?(\.[0-9]+|[0-9]+(\.[0-9]*)?)([eE][-+]?[0-9]+)?")
CORE_INF = re.compile(r"[-+]?(\.inf|\.Inf|\.INF)")
CORE_NAN = re.compile(r"\.nan|\.NaN|\.NAN")


def core_value(text: str):
    """What the core schema makes of a plain scalar (the spec's resolution order: null,
    bool, int 10, int 8, int 16, float, inf, nan, else str)."""
    if CORE_NULL.fullmatch(text):
        return None
    if CORE_BOOL.fullmatch(text):
        return text.lower() == "true"
    if CORE_INT10.fullmatch(text):
        return int(text, 10)
    if CORE_INT8.fullmatch(text):
        return int(text[2:], 8)
    if CORE_INT16.fullmatch(text):
        return int(text[2:], 16)
    if CORE_FLOAT.fullmatch(text):
        return float(text)
    if CORE_INF.fullmatch(text):
        return -math.inf if text.startswith("-") else math.inf
    if CORE_NAN.fullmatch(text):
        return math.nan
    return text


SPELLINGS = [
    # floats that YAML 1.1 (and so PyYAML) reads as strings: no dot, or no exponent sign
    "4.0e9", "-2.0e3", "1e3", "1E3", "+1e3", "2.5E4", "1.e3", ".5e1", "6e-1", "7e+2",
    # floats both agree on
    "0.5", "-0.5", "+1.25", ".5", "1.", "3.0e-3", "-4.5E+2",
    # ints: decimal (leading zeros are decimal in 1.2), octal 0o, hex 0x
    "0", "-0", "+7", "42", "007", "0o17", "0o0", "0x1F", "0xff", "0xABCDEF",
    # special floats
    ".inf", ".Inf", ".INF", "-.inf", "+.inf", ".nan", ".NaN", ".NAN",
    # booleans and null of the core schema
    "true", "True", "TRUE", "false", "False", "FALSE", "null", "Null", "NULL", "~",
    # YAML 1.1 only: strings under the core schema
    "1_000", "1_0.5", "0b1", "0b101", "1:20", "1:20:30.5", "-1:20", "yes", "no", "on",
    "off", "Yes", "NO", "y", "n", "010_0", "0x_1F", "+.5.", "1e", "e3", ".", "0o8", "0xG",
    "-0x1F", "+0o7", "1.0e3.5", "inf", "nan", "Infinity",
]


def _same(got, want) -> bool:
    if isinstance(want, float) and math.isnan(want):
        return isinstance(got, float) and math.isnan(got)
    return type(got) is type(want) and got == want


@pytest.mark.parametrize("text", SPELLINGS)
def test_scalar_reads_as_the_core_schema_says(text):
    want = core_value(text)
    data, _ = _formats.parse_text(f"value: {text}\n", ".yaml", "m.yaml")
    assert _same(data["value"], want), (text, data["value"], want)


@pytest.mark.parametrize("text", SPELLINGS)
def test_fast_path_for_rows_agrees(text):
    # Lists of scalars take the loader's fast path; the answer must not change.
    want = core_value(text)
    data, _ = _formats.parse_text(f"row: [1, {text}, 2.0]\nblock:\n  - {text}\n", ".yaml",
                                  "m.yaml")
    assert _same(data["row"][1], want), (text, data["row"][1], want)
    assert _same(data["block"][0], want), (text, data["block"][0], want)


def test_explicit_tags_follow_the_core_schema_too():
    # !!int and !!float on a YAML 1.1-only spelling are refused with the line, not converted.
    for text in ("!!int 1_000", "!!int 0b11", "!!float 1:20", "!!bool yes", "!!int 0x"):
        with pytest.raises(ModelError) as info:
            _formats.parse_text(f"model_format: 1\nvalue: {text}\n", ".yaml", "m.yaml")
        message = str(info.value)
        assert message.startswith("m.yaml:2: value"), message
        assert "YAML 1.2" in message, message
    data, _ = _formats.parse_text("a: !!float 1\nb: !!int '0x10'\nc: !!float '1e3'\n",
                                  ".yaml", "m.yaml")
    assert data == {"a": 1.0, "b": 16, "c": 1000.0}
    assert type(data["a"]) is float


MODEL = """\
model_format: 1
plant:
  A: [[0, 1], [-4.0e0, {entry}]]
requirements:
  stable: {stable}
  min_decay_rate: {rate}
"""


def test_exponent_floats_load_as_a_model(tmp_path):
    path = tmp_path / "m.yaml"
    path.write_text(MODEL.format(entry="-4e-1", stable="true", rate="1e-2"))
    (model,) = load_models(path, tmp_path)
    assert model.A.tolist() == [[0.0, 1.0], [-4.0, -0.4]]


@pytest.mark.parametrize("entry, stable, rate, field, shown", [
    ("-1_0", "true", "0.1", "plant.A", "'-1_0'"),
    ("0b1", "true", "0.1", "plant.A", "'0b1'"),
    ("1:20", "true", "0.1", "plant.A", "'1:20'"),
    ("-0.4", "yes", "0.1", "requirements.stable", "'yes'"),
    ("-0.4", "on", "0.1", "requirements.stable", "'on'"),
    ("-0.4", "true", "1_0", "requirements.min_decay_rate", "'1_0'"),
])
def test_yaml_11_spellings_are_refused_where_a_value_is_expected(tmp_path, entry, stable, rate,
                                                                 field, shown):
    path = tmp_path / "m.yaml"
    path.write_text(MODEL.format(entry=entry, stable=stable, rate=rate))
    with pytest.raises(ModelError) as info:
        load_models(path, tmp_path)
    message = str(info.value)
    assert message.startswith("m.yaml:"), message
    assert field in message and shown in message, message


@pytest.mark.parametrize("digits", [309, 400, 5000])
def test_huge_integers_are_refused_in_every_format(tmp_path, digits):
    # 10**308 still fits a float (largest double ~1.8e308); 10**309 and up cannot.
    big = "9" * digits
    for name, text in [("m.yaml", f"model_format: 1\nplant:\n  A: [[{big}]]\n"),
                       ("m.json", f'{{"model_format": 1, "plant": {{"A": [[{big}]]}}}}'),
                       ("m.toml", f"model_format = 1\n[plant]\nA = [[{big}]]\n")]:
        path = tmp_path / name
        path.write_text(text)
        with pytest.raises(ModelError) as info:
            load_models(path, tmp_path)
        message = str(info.value)
        assert message.startswith(name), message
        assert f"{digits} digits" in message, message


def test_integer_that_fits_a_float_is_read(tmp_path):
    # 140 digits: longer than any int a float holds exactly, within the 1e150 entry limit
    path = tmp_path / "m.yaml"
    path.write_text("model_format: 1\nplant:\n  A: [[-" + "1" + "0" * 140 + "]]\n")
    (model,) = load_models(path, tmp_path)
    assert model.A[0, 0] == -1e140


def test_float_first_resolver_resolves_as_the_core_schema_does():
    # The loader tries floats first with the core float pattern less what a core int matches
    # (one pattern match per matrix entry); the resolution must equal the YAML 1.2.2 core
    # schema's, where an int-shaped scalar is an int (10.3.2 Tag Resolution). Seeded strings
    # over the characters numbers are spelled with.
    import random
    import re

    from eigengate.model import yaml_core

    core_int = re.compile(r"(?:[-+]?[0-9]+|0o[0-7]+|0x[0-9a-fA-F]+)\Z")
    core_float = re.compile(r"(?:[-+]?(?:\.[0-9]+|[0-9]+(?:\.[0-9]*)?)(?:[eE][-+]?[0-9]+)?"
                            r"|[-+]?\.(?:inf|Inf|INF)|\.(?:nan|NaN|NAN))\Z")
    rng = random.Random(20261202)
    spellings = [".inf", "-.Inf", ".NaN", "1e3", "1.", ".5", "0x1e5", "0o17", "12", "-0"]
    spellings += ["".join(rng.choice("0123456789.eE+-xo") for _ in range(rng.randint(1, 7)))
                  for _ in range(20000)]
    for s in spellings:
        core = "int" if core_int.match(s) else "float" if core_float.match(s) else None
        ours = "float" if yaml_core._FLOAT_NOT_INT.match(s) else "int" if core_int.match(s) \
            else None
        assert ours == core, s
