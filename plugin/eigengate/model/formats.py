"""Read a model file (YAML, TOML or JSON) safely into plain data and a map of field lines.

Every reader returns ``(data, lines)``: ``data`` is a ``dict`` of plain values (str, int, float,
bool, None, list, dict) and ``lines`` maps dotted field paths (``"plant.A"``,
``"operating_points.1.plant"``; list items by 0-based index) to 1-based source lines. The
checks here are about the file as a file: readable, not too big, text, well-formed, a mapping
at the top, no duplicate keys, no object-constructing YAML tags. What the fields mean is the
loader's business.
"""

from __future__ import annotations

import difflib
import functools
import json
import re
from pathlib import Path
from typing import Any, Iterable

from ..errors import ModelError

__all__ = ["MAX_MODEL_FILE_BYTES", "MAX_NESTING", "MAX_VALUES", "SUFFIXES", "read_document",
           "parse_bytes", "parse_text", "suggest"]

#: Largest model file read, in bytes. Real models that big keep their matrices in .npz files.
MAX_MODEL_FILE_BYTES = 8 * 1024 * 1024
#: Deepest nesting of lists and mappings accepted; parsers recurse, so this bounds the stack.
MAX_NESTING = 64
#: Most values a YAML document may expand to through aliases (stops "billion laughs" files).
MAX_VALUES = 10_000_000
#: File name endings this module reads, mapped to the format name used in messages.
SUFFIXES = {".yaml": "YAML", ".yml": "YAML", ".toml": "TOML", ".json": "JSON"}

_YAML = "tag:yaml.org,2002:"
# Tags whose constructors build plain data. Everything else (python/object, binary, set, ...)
# is refused: a model file describes numbers and names, nothing that runs or needs a class.
_PLAIN_TAGS = {_YAML + t for t in ("str", "int", "float", "bool", "null", "seq", "map",
                                   "timestamp", "merge")}


def suggest(word: str, choices: Iterable[str]) -> str | None:
    """Closest match to ``word`` among ``choices`` (difflib), or None when nothing is close."""
    found = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return found[0] if found else None


def read_document(path: Path, source: str) -> tuple[dict[str, Any], dict[str, int]]:
    """Read the model file at ``path`` into plain data and a field-line map.

    Parameters
    ----------
    path
        File to read; its suffix (``.yaml``, ``.yml``, ``.toml``, ``.json``) picks the format.
    source
        Name used for the file in error messages (repository-relative).

    Returns
    -------
    tuple of dict and dict
        The top-level mapping and ``{dotted.field: 1-based line}``.

    Raises
    ------
    ModelError
        When the file cannot be read, is empty, binary, not UTF-8, larger than
        :data:`MAX_MODEL_FILE_BYTES`, malformed, has duplicate keys or a non-mapping top level.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in SUFFIXES:
        raise ModelError(source, "", f"has an unknown file type {path.suffix or '(none)'!r}",
                         hint="model files end in " + ", ".join(SUFFIXES))
    try:
        size = path.stat().st_size
        if size > MAX_MODEL_FILE_BYTES:
            raise ModelError(source, "", f"is {size} bytes, larger than the limit of "
                             f"{MAX_MODEL_FILE_BYTES} bytes",
                             hint="keep large matrices in .npz files referenced with {file: ...}")
        raw = path.read_bytes()
    except OSError as exc:
        raise ModelError(source, "", f"cannot be read: {exc.strerror or exc}") from None
    # parse_bytes checks the size again: the file may have grown between stat and read.
    return parse_bytes(raw, suffix, source)


def parse_bytes(raw: bytes, suffix: str, source: str) -> tuple[dict[str, Any], dict[str, int]]:
    """Parse a model file's bytes (read from a file or from git history, say); the same
    size, text and format checks as :func:`read_document`."""
    if len(raw) > MAX_MODEL_FILE_BYTES:
        raise ModelError(source, "", f"is {len(raw)} bytes, larger than the limit of "
                         f"{MAX_MODEL_FILE_BYTES} bytes")
    nul = raw.find(b"\x00")
    if nul >= 0:
        raise ModelError(source, "", f"looks binary: NUL byte at byte offset {nul}",
                         hint="model files are UTF-8 text")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ModelError(source, "", f"is not UTF-8 text: byte 0x{raw[exc.start]:02x} at byte "
                         f"offset {exc.start} cannot be decoded", hint="save the file as UTF-8"
                         ) from None
    return parse_text(text.removeprefix("\ufeff"), suffix, source)


def parse_text(text: str, suffix: str, source: str) -> tuple[dict[str, Any], dict[str, int]]:
    """Parse model-file ``text`` in the format named by ``suffix``; see :func:`read_document`."""
    if not text.strip():
        raise ModelError(source, "", "is empty", hint="a model file starts with 'model_format: 1'")
    _check_nesting(text, source)
    fmt = SUFFIXES.get(suffix.lower())
    if fmt == "YAML":
        data, lines = _parse_yaml(text, source)
    elif fmt == "JSON":
        data, lines = _parse_json(text, source)
    elif fmt == "TOML":
        data, lines = _parse_toml(text, source)
    else:
        raise ModelError(source, "", f"has an unknown file type {suffix!r}")
    if not isinstance(data, dict):
        kind = "nothing" if data is None else f"a {_kind(data)}"
        raise ModelError(source, "", f"must hold a mapping of fields at the top level, got {kind}",
                         line=1, hint="start the file with 'model_format: 1'")
    return data, lines


def _kind(value: Any) -> str:
    return {list: "list", str: "string", int: "number", float: "number", bool: "boolean"}.get(
        type(value), type(value).__name__)


def _check_nesting(text: str, source: str) -> None:
    # Rough bracket count (brackets inside strings count too): good enough to refuse files
    # nested so deeply that a recursive parser would exhaust the stack.
    import numpy as np

    codes = np.frombuffer(text.encode("utf-8", "surrogatepass"), dtype=np.uint8)
    step = np.zeros(256, dtype=np.int64)
    step[[ord("["), ord("{")]] = 1
    step[[ord("]"), ord("}")]] = -1
    depth = np.cumsum(step[codes])
    if depth.size and int(depth.max()) > MAX_NESTING:
        raise ModelError(source, "", f"nests lists or mappings deeper than {MAX_NESTING} levels")


# --------------------------------------------------------------------------- YAML

# Numbers whose meaning is the same for Python's float()/int() and for YAML 1.1.
_PLAIN_FLOAT = re.compile(r"^[-+]?(?:[0-9]+\.[0-9]*|\.[0-9]+|[0-9]+)(?:[eE][-+]?[0-9]+)?$")
_PLAIN_INT = re.compile(r"^[-+]?(?:0|[1-9][0-9]*)$")

@functools.lru_cache(maxsize=None)
def _yaml_loader_class() -> type:
    """Built once per process: adding resolvers copies PyYAML's resolver tables."""
    import yaml

    base = getattr(yaml, "CSafeLoader", None) or yaml.SafeLoader

    scalar_node = yaml.ScalarNode
    float_tag, int_tag = _YAML + "float", _YAML + "int"

    class _Loader(base):  # type: ignore[misc, valid-type]
        """Safe loader that keeps dates as text and reads ``1e3`` as a number."""

        def construct_sequence(self, node, deep=False):
            # Matrix rows are long runs of plain numbers: convert those directly instead of
            # through construct_object (about ten times faster); anything unusual (YAML 1.1
            # octal or sexagesimal forms, underscores, .inf, anchors) takes the normal path.
            out = []
            for child in node.value:
                if type(child) is scalar_node:
                    v = child.value
                    if child.tag == float_tag and _PLAIN_FLOAT.match(v):
                        out.append(float(v))
                        continue
                    if child.tag == int_tag and _PLAIN_INT.match(v):
                        out.append(int(v))
                        continue
                out.append(self.construct_object(child, deep=deep))
            return out

    # YAML 1.1 wants a dot in floats; engineers write 1e-3, so accept exponent-only floats.
    _Loader.add_implicit_resolver(
        _YAML + "float", re.compile(r"^[-+]?[0-9][0-9_]*[eE][-+]?[0-9]+$"), list("-+0123456789"))
    # A date in a description stays the text the author wrote.
    _Loader.add_constructor(_YAML + "timestamp", base.construct_yaml_str)
    return _Loader


def _parse_yaml(text: str, source: str) -> tuple[Any, dict[str, int]]:
    import yaml

    try:  # the pure-Python reader checks the characters already here
        loader = _yaml_loader_class()(text)
    except yaml.reader.ReaderError as exc:
        raise _unprintable(exc, text, source) from None
    try:
        try:
            node = loader.get_single_node()
        except yaml.reader.ReaderError as exc:  # libyaml's reader, while parsing
            raise _unprintable(exc, text, source) from None
        except yaml.MarkedYAMLError as exc:
            mark = exc.problem_mark or exc.context_mark
            where = f" at line {mark.line + 1}, column {mark.column + 1}" if mark else ""
            raise ModelError(source, "", f"is not valid YAML: {exc.problem or exc.context}{where}",
                             line=mark.line + 1 if mark else None) from None
        except yaml.YAMLError as exc:
            raise ModelError(source, "", f"is not valid YAML: {exc}") from None
        if node is None:
            raise ModelError(source, "", "holds no data (only comments or blank lines)")
        lines: dict[str, int] = {}
        _YamlWalk(source, lines).size(node, "", 0)
        try:
            return loader.construct_document(node), lines
        except yaml.YAMLError as exc:  # e.g. a merge key on something that is not a mapping
            mark = getattr(exc, "problem_mark", None)
            raise ModelError(source, "", f"is not valid YAML: {getattr(exc, 'problem', exc)}",
                             line=mark.line + 1 if mark else None) from None
    finally:
        loader.dispose()


def _unprintable(exc: Any, text: str, source: str) -> ModelError:
    # ReaderError renders over two lines; say the same in one, with the line of the character.
    position = min(max(int(exc.position), 0), len(text))
    line = text.count("\n", 0, position) + 1
    char = exc.character if isinstance(exc.character, str) else chr(exc.character)
    return ModelError(source, "", f"is not valid YAML: the character U+{ord(char):04X} at line "
                      f"{line} is not allowed ({exc.reason})", line=line,
                      hint="model files are printable UTF-8 text")


class _YamlWalk:
    """One pass over the node graph: tags, keys, duplicates, lines, expanded size."""

    def __init__(self, source: str, lines: dict[str, int]) -> None:
        self.source = source
        self.lines = lines
        self.sizes: dict[int, int] = {}
        self.open: set[int] = set()
        self.total = 0

    def fail(self, node: Any, field: str, problem: str, hint: str | None = None) -> ModelError:
        return ModelError(self.source, field, problem, line=node.start_mark.line + 1, hint=hint)

    def size(self, node: Any, path: str, depth: int) -> int:
        import yaml

        if node.tag not in _PLAIN_TAGS:
            tag = node.tag.replace(_YAML, "!!")
            raise self.fail(node, path, f"uses the YAML tag {tag}, which eigengate refuses",
                            "model files hold plain numbers, strings, lists and mappings only")
        key = id(node)
        if key in self.sizes:  # an alias of a node already walked: count it, record no lines
            self.total += self.sizes[key]
            self._check_total(node)
            return self.sizes[key]
        if key in self.open:
            raise self.fail(node, path, "refers to itself through a YAML alias")
        if depth > MAX_NESTING:
            raise self.fail(node, path, f"nests deeper than {MAX_NESTING} levels")
        self.open.add(key)
        count = 1
        if isinstance(node, yaml.MappingNode):
            seen: dict[str, int] = {}
            for k, v in node.value:
                if k.tag == _YAML + "merge":
                    count += self.size(v, path, depth + 1)
                    continue
                if not isinstance(k, yaml.ScalarNode) or k.tag != _YAML + "str":
                    shown = k.value if isinstance(k, yaml.ScalarNode) else "a list or mapping"
                    raise self.fail(k, path, f"has a key {shown!r} that is not a string",
                                    "quote the key")
                child = f"{path}.{k.value}" if path else k.value
                if k.value in seen:
                    raise self.fail(k, child, f"is given twice, on lines {seen[k.value]} and "
                                    f"{k.start_mark.line + 1}", "remove one of them")
                seen[k.value] = k.start_mark.line + 1
                self.lines[child] = k.start_mark.line + 1
                count += self.size(v, child, depth + 1)
        elif isinstance(node, yaml.SequenceNode):
            scalar = yaml.ScalarNode
            for i, item in enumerate(node.value):
                if type(item) is scalar and item.tag in _PLAIN_TAGS:
                    count += 1  # fast path for matrix rows: nothing to record below a number
                    self.total += 1
                    continue
                child = f"{path}.{i}" if path else str(i)
                if not isinstance(item, yaml.ScalarNode):
                    self.lines.setdefault(child, item.start_mark.line + 1)
                count += self.size(item, child, depth + 1)
        self.open.discard(key)
        self.sizes[key] = count
        self.total += 1
        self._check_total(node)
        return count

    def _check_total(self, node: Any) -> None:
        if self.total > MAX_VALUES:
            raise self.fail(node, "", f"expands to more than {MAX_VALUES} values through aliases")


# --------------------------------------------------------------------------- JSON

def _parse_json(text: str, source: str) -> tuple[Any, dict[str, int]]:
    def no_constant(name: str) -> float:
        raise _BadConstant(name)

    try:
        data = json.loads(text, object_pairs_hook=unique_pairs, parse_constant=no_constant)
    except json.JSONDecodeError as exc:
        raise ModelError(source, "", f"is not valid JSON: {exc.msg} at line {exc.lineno}, "
                         f"column {exc.colno}", line=exc.lineno) from None
    except _BadConstant as exc:
        raise ModelError(source, "", f"is not valid JSON: {exc.args[0]} is not a JSON number",
                         hint="model files hold finite numbers") from None
    except RecursionError:
        raise ModelError(source, "", "nests lists or mappings too deeply") from None
    except DuplicateKey as exc:
        lines, dup = _json_scan(text)
        path, first, second = dup or (exc.args[0], None, None)
        raise ModelError(source, path, "is given twice" + (
            f", on lines {first} and {second}" if first else ""), line=second,
            hint="remove one of them") from None
    lone = _LONE_SURROGATE.search(text) if "\\u" in text else None
    if lone is not None:  # json decodes "\ud800" to a str no output can encode
        try:
            json.dumps(data, ensure_ascii=False).encode("utf-8")
        except UnicodeEncodeError:
            line = text.count("\n", 0, lone.start()) + 1
            raise ModelError(source, "", f"holds the escape {lone.group(0)!r} at line {line}, a "
                             "lone UTF-16 surrogate, which is not text", line=line,
                             hint="write the character itself or a complete surrogate pair"
                             ) from None
    return data, _json_scan(text)[0]


# A high surrogate escape without a low one after it, or a low one without a high one before.
_LONE_SURROGATE = re.compile(r"\\u[dD][89abAB][0-9a-fA-F]{2}(?!\\u[dD][c-fC-F])"
                             r"|(?<!\\u[dD][89abAB][0-9a-fA-F]{2})\\u[dD][c-fC-F][0-9a-fA-F]{2}")


def unique_pairs(items: list[tuple[str, Any]]) -> dict[str, Any]:
    """``json.loads`` object hook that refuses a key given twice (json keeps the last)."""
    out: dict[str, Any] = {}
    for k, v in items:
        if k in out:
            raise DuplicateKey(k)
        out[k] = v
    return out


class DuplicateKey(Exception):
    pass


class _BadConstant(Exception):
    pass


def _json_scan(text: str) -> tuple[dict[str, int], tuple[str, int, int] | None]:
    # A tiny structural scanner over text that json has already accepted: it tracks the path
    # of containers and keys, notes the line of each key and each nested list item, and finds
    # the first duplicate key (path, first line, second line).
    lines: dict[str, int] = {}
    dup: tuple[str, int, int] | None = None
    stack: list[list[Any]] = []  # [kind, key or index, expecting a key, {key: line}]
    line, i, n = 1, 0, len(text)

    def here() -> str:
        return ".".join(str(f[1]) for f in stack if f[1] is not None)

    while i < n:
        ch = text[i]
        if ch == "\n":
            line += 1
        elif ch == '"':
            j = i + 1
            while text[j] != '"':
                j += 2 if text[j] == "\\" else 1
            top = stack[-1] if stack else None
            if top is not None and top[0] == "obj" and top[2]:
                key = json.loads(text[i:j + 1])
                top[1], top[2] = key, False
                if key in top[3] and dup is None:
                    dup = (here(), top[3][key], line)
                top[3].setdefault(key, line)
                lines.setdefault(here(), line)
            i = j
        elif ch in "{[":
            if stack and stack[-1][0] == "arr":
                lines.setdefault(here(), line)
            stack.append(["obj", None, True, {}] if ch == "{" else ["arr", 0, False, {}])
        elif ch in "}]":
            stack.pop()
        elif ch == "," and stack:
            if stack[-1][0] == "obj":
                stack[-1][2] = True
            else:
                stack[-1][1] += 1
        i += 1
    return lines, dup


# --------------------------------------------------------------------------- TOML

def _parse_toml(text: str, source: str) -> tuple[Any, dict[str, int]]:
    try:
        import tomllib  # Python >= 3.11
    except ModuleNotFoundError:  # pragma: no cover - exercised on Python 3.10 only
        import tomli as tomllib  # type: ignore[no-redef]

    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        # tomllib puts "(at line L, column C)" in the message, duplicate keys included.
        found = re.search(r"line (\d+)", str(exc))
        raise ModelError(source, "", f"is not valid TOML: {exc}",
                         line=int(found.group(1)) if found else None) from None
    except RecursionError:
        raise ModelError(source, "", "nests lists or mappings too deeply") from None
    return _plain_toml(data), _toml_lines(text)


def _plain_toml(value: Any) -> Any:
    # TOML dates and times are not plain data here; keep them as the text they were written as.
    import datetime

    if isinstance(value, dict):
        return {k: _plain_toml(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_plain_toml(v) for v in value]
    if isinstance(value, (datetime.date, datetime.time)):
        return value.isoformat()
    return value


_TOML_TABLE = re.compile(r"^\s*(\[\[?)\s*([^\]]+?)\s*\]\]?\s*(#.*)?$")
_TOML_KEY = re.compile(r"^\s*((?:[A-Za-z0-9_-]+|\"[^\"]*\"|'[^']*')"
                       r"(?:\s*\.\s*(?:[A-Za-z0-9_-]+|\"[^\"]*\"|'[^']*'))*)\s*=(.*)$")


def _toml_lines(text: str) -> dict[str, int]:
    # Best effort: table headers, arrays of tables and `key =` lines outside multi-line values.
    lines: dict[str, int] = {}
    table: list[str] = []
    counts: dict[str, int] = {}
    depth = 0
    for number, raw in enumerate(text.splitlines(), start=1):
        body = raw.split("#", 1)[0]
        if depth > 0:
            depth += body.count("[") + body.count("{") - body.count("]") - body.count("}")
            continue
        found = _TOML_TABLE.match(raw)
        if found and "=" not in found.group(2):
            name = _toml_parts(found.group(2))
            if found.group(1) == "[[":
                base = ".".join(name)
                index = counts.get(base, -1) + 1
                counts[base] = index
                lines.setdefault(base, number)
                name = name + [str(index)]
            else:
                name = _toml_resolve(name, counts)
            table = name
            lines.setdefault(".".join(table), number)
            continue
        found = _TOML_KEY.match(raw)
        if found:
            path = ".".join(table + _toml_parts(found.group(1)))
            lines.setdefault(path, number)
            value = found.group(2).split("#", 1)[0]
            depth = value.count("[") + value.count("{") - value.count("]") - value.count("}")
    return lines


def _toml_parts(key: str) -> list[str]:
    return [p.strip().strip("\"'") for p in re.findall(r"\"[^\"]*\"|'[^']*'|[^.]+", key)]


def _toml_resolve(name: list[str], counts: dict[str, int]) -> list[str]:
    # [operating_points.plant] after [[operating_points]] belongs to the latest point.
    out: list[str] = []
    for part in name:
        out.append(part)
        joined = ".".join(out)
        if joined in counts:
            out.append(str(counts[joined]))
    return out
