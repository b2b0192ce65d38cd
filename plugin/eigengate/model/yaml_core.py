"""The YAML reader of model files: PyYAML's safe loader (C when present) with the YAML 1.2
core schema's resolvers in place of YAML 1.1's, and one walk over the node graph that checks
tags, keys, duplicates, nesting, alias expansion and every int, float and bool scalar before
anything is constructed. :func:`eigengate.model.formats.parse_text` calls :func:`parse_yaml`;
the limits are ``_formats``' (read at call time, so tests may lower them).
"""

from __future__ import annotations

import functools
import re
from typing import Any

from . import limits as _limits
from .yaml_block import block_document
from . import yaml_events as _events  # its functions read at call time (tests patch them)
from ..errors import ModelError

__all__ = ["parse_yaml"]

_YAML = "tag:yaml.org,2002:"
# Tags whose constructors build plain data. Everything else (python/object, binary, set, ...)
# is refused: a model file describes numbers and names, nothing that runs or needs a class.
_PLAIN_TAGS = {_YAML + t for t in ("str", "int", "float", "bool", "null", "seq", "map",
                                   "timestamp", "merge")}

# YAML 1.2.2 spec, 10.3.2 Tag Resolution: the core schema's plain scalars. PyYAML resolves by
# YAML 1.1, where 4.0e9 is a string while 1_000, 0b1, 1:20 and yes/no/on/off are numbers and
# booleans; engineers write the former and mean nothing by the latter.
_CORE = {
    "bool": r"true|True|TRUE|false|False|FALSE",
    "int": r"[-+]?[0-9]+|0o[0-7]+|0x[0-9a-fA-F]+",
    "float": r"[-+]?(?:\.[0-9]+|[0-9]+(?:\.[0-9]*)?)(?:[eE][-+]?[0-9]+)?"
             r"|[-+]?\.(?:inf|Inf|INF)|\.(?:nan|NaN|NAN)",
}
_CORE_RE = {_YAML + k: re.compile(f"(?:{v})\\Z") for k, v in _CORE.items()}
_CORE_FIRST = {"bool": "tTfF", "int": "-+0123456789", "float": "-+.0123456789"}
#: The core float pattern less the strings a core int matches (see the resolver order).
_FLOAT_NOT_INT = re.compile(r"(?:[-+]?(?:\.[0-9]+|[0-9]+\.[0-9]*)(?:[eE][-+]?[0-9]+)?"
                            r"|[-+]?[0-9]+[eE][-+]?[0-9]+"
                            r"|[-+]?\.(?:inf|Inf|INF)|\.(?:nan|NaN|NAN))\Z")
_SHORT_INT = 16  # no int of this many characters (hex included) is near the float limit


def _scalar_problem(tag: str, value: str) -> str | None:
    """Why a scalar tagged int, float or bool is not one under the YAML 1.2 core schema (an
    explicit ``!!int 1_000``, say), or why an integer is too large; None when it is fine."""
    if not _CORE_RE[tag].match(value):
        kind = tag.replace(_YAML, "")
        return (f"is {value!r} with the tag !!{kind}, which is not a {kind} under YAML 1.2 "
                "(core schema)")
    if tag == _YAML + "int" and len(value) > _SHORT_INT:
        return _limits.int_problem(_limits.int_value(value), len(value.lstrip("+-")))
    return None


def _core_int(loader: Any, node: Any) -> int:
    value = _limits.int_value(loader.construct_scalar(node))
    assert value is not None  # _YamlWalk refused longer ones
    return value


@functools.lru_cache(maxsize=None)
def _yaml_loader_class() -> type:
    """Built once per process: adding resolvers copies PyYAML's resolver tables."""
    import yaml

    base = getattr(yaml, "CSafeLoader", None) or yaml.SafeLoader

    scalar_node = yaml.ScalarNode
    float_tag, int_tag = _YAML + "float", _YAML + "int"

    class _Loader(base):  # type: ignore[misc, valid-type]
        """Safe loader with the YAML 1.2 core schema that keeps dates as text."""

        def construct_sequence(self, node, deep=False):
            # Matrix rows are long runs of plain numbers: convert those directly instead of
            # through construct_object (about ten times faster). _YamlWalk has checked every
            # int and float against the core schema, so float() and int() read them as YAML
            # 1.2 does; 0o/0x ints, .inf, .nan and anchors take the normal path.
            out = []
            for child in node.value:
                if type(child) is scalar_node:
                    v = child.value
                    if child.tag == float_tag and (v[-1:].isdigit() or v[-1:] == "."):
                        out.append(float(v))
                        continue
                    if child.tag == int_tag and v[1:2] not in ("o", "x"):
                        out.append(int(v))
                        continue
                out.append(self.construct_object(child, deep=deep))
            return out

    replaced = {_YAML + k for k in _CORE}
    _Loader.yaml_implicit_resolvers = {
        first: [(tag, rx) for tag, rx in resolvers if tag not in replaced]
        for first, resolvers in base.yaml_implicit_resolvers.items()}
    # Matrix entries are mostly floats, so the float resolver goes first with the part of the
    # core float pattern that no core int matches (a dot, an exponent, .inf or .nan): the
    # same resolution as int-before-float (12 is an int), one pattern match per float.
    _Loader.add_implicit_resolver(_YAML + "bool", _CORE_RE[_YAML + "bool"],
                                  list(_CORE_FIRST["bool"]))
    _Loader.add_implicit_resolver(_YAML + "float", _FLOAT_NOT_INT, list(_CORE_FIRST["float"]))
    _Loader.add_implicit_resolver(_YAML + "int", _CORE_RE[_YAML + "int"],
                                  list(_CORE_FIRST["int"]))
    _Loader.add_constructor(_YAML + "int", _core_int)
    _fast_resolution(_Loader, yaml)
    # A date in a description stays the text the author wrote.
    _Loader.add_constructor(_YAML + "timestamp", base.construct_yaml_str)
    return _Loader


def _fast_resolution(loader: Any, yaml: Any) -> None:
    """Give ``loader`` the resolution PyYAML's ``BaseResolver.resolve`` performs with the
    loader's tables, without its per-node work for path resolvers (the loader has none):
    libyaml's composer calls these three methods for every node."""
    assert not loader.yaml_path_resolvers
    table = loader.yaml_implicit_resolvers
    wildcard = table.get(None, [])
    by_first = {first: tuple(resolvers + wildcard) for first, resolvers in table.items()
                if first is not None}
    wildcard_only = tuple(wildcard)
    scalar, sequence = yaml.ScalarNode, yaml.SequenceNode
    defaults = {scalar: loader.DEFAULT_SCALAR_TAG, sequence: loader.DEFAULT_SEQUENCE_TAG,
                yaml.MappingNode: loader.DEFAULT_MAPPING_TAG}

    def resolve(self, kind, value, implicit):
        if kind is scalar and implicit[0]:
            for tag, regexp in by_first.get(value[:1], wildcard_only):  # '' is keyed by ''
                if regexp.match(value):
                    return tag
        return defaults[kind]

    def descend_resolver(self, current_node, current_index):
        return None  # no path resolvers: nothing to track

    def ascend_resolver(self):
        return None

    loader.resolve = resolve
    loader.descend_resolver = descend_resolver
    loader.ascend_resolver = ascend_resolver


def parse_yaml(text: str, source: str) -> tuple[Any, dict[str, int]]:
    plain_text = _events.may_be_plain(text)
    if plain_text:  # the line reader of block-style files (model.yaml_block), no PyYAML
        found = block_document(text)
        if found is not None:
            return found
    import yaml

    try:  # the pure-Python reader checks the characters already here
        loader = _yaml_loader_class()(text)
    except yaml.reader.ReaderError as exc:
        raise _unprintable(exc, text, source) from None
    if plain_text:  # the short road; anything it declines takes the full one
        try:
            plain = _events.plain_document(loader)
        finally:
            loader.dispose()
        if plain is not None:
            return plain
        loader = _yaml_loader_class()(text)
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
        # every tag needs a "!": without one, int/float/bool tags come from the core-schema
        # resolvers above and need no second match
        _YamlWalk(source, lines, tagged="!" in text).size(node, "", 0)
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

    def __init__(self, source: str, lines: dict[str, int], tagged: bool = True) -> None:
        self.source = source
        self.lines = lines
        self.tagged = tagged  # may the document hold explicit tags (!!int 1_000)?
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
        if node.tag in _CORE_RE and (self.tagged or node.tag == _YAML + "int"
                                     and len(node.value) > _SHORT_INT):
            problem = _scalar_problem(node.tag, node.value)
            if problem is not None:
                raise self.fail(node, path, problem)
        key = id(node)
        if key in self.sizes:  # an alias of a node already walked: count it, record no lines
            self.total += self.sizes[key]
            self._check_total(node)
            return self.sizes[key]
        if key in self.open:
            raise self.fail(node, path, "refers to itself through a YAML alias")
        if depth > _limits.MAX_NESTING:
            raise self.fail(node, path, f"nests deeper than {_limits.MAX_NESTING} levels")
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
            scalar, plain, int_tag = yaml.ScalarNode, _PLAIN_TAGS, _YAML + "int"
            tagged, fast = self.tagged, 0
            for i, item in enumerate(node.value):
                if type(item) is scalar and item.tag in plain:
                    # fast path for matrix rows: nothing to record below a number; a number
                    # is checked again only when tags may be explicit, or for a long int
                    if not (tagged and item.tag in _CORE_RE
                            and not _CORE_RE[item.tag].match(item.value)
                            or len(item.value) > _SHORT_INT and item.tag == int_tag):
                        fast += 1
                        continue
                    count += self.size(item, f"{path}.{i}" if path else str(i), depth + 1)
                    continue
                child = f"{path}.{i}" if path else str(i)
                if not isinstance(item, yaml.ScalarNode):
                    self.lines.setdefault(child, item.start_mark.line + 1)
                count += self.size(item, child, depth + 1)
            count += fast
            self.total += fast
        self.open.discard(key)
        self.sizes[key] = count
        self.total += 1
        self._check_total(node)
        return count

    def _check_total(self, node: Any) -> None:
        if self.total > _limits.MAX_VALUES:
            raise self.fail(node, "", f"expands to more than {_limits.MAX_VALUES} values through aliases")
