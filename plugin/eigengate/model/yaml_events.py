"""The short road through a plain YAML model file: data and lines straight from parser events.

Most model files are plain: mappings, lists, numbers and strings, with no tags, anchors,
aliases or merge keys. For those, :func:`plain_document` builds the data and the field-line
map in one pass over the parser's events (libyaml's when present), resolving each scalar with
the loader's own resolver (the YAML 1.2 core schema of :mod:`eigengate.model.yaml_core`) and
converting it as that loader's constructors do. It skips the node graph, the walk over it and
the constructor, which a plain file does not need: about half of the time of reading one.

Anything else returns None and the file takes the full road (:func:`yaml_core.parse_yaml`),
which also words every refusal: a tag, anchor or alias anywhere in the text, a key that is
not a string, a key given twice, a merge key, a scalar the short road does not convert
(0o/0x integers, long integers, .inf/.nan), more than one document, nesting or size beyond
the limits, and any parser error. The two roads give the same data and lines
(``tests/test_yaml_events.py``, generated documents and the corpus of model files).
"""

from __future__ import annotations

import re
from typing import Any

from . import limits as _limits

__all__ = ["may_be_plain", "plain_document"]

_YAML = "tag:yaml.org,2002:"
_STR, _FLOAT, _INT = _YAML + "str", _YAML + "float", _YAML + "int"
_BOOL, _NULL, _TIMESTAMP = _YAML + "bool", _YAML + "null", _YAML + "timestamp"
#: No core int this long (hex included) is checked here: the full road checks its size.
_SHORT_INT = 16
_BOOLS = {"true": True, "false": False}
#: Plain scalars that the core schema resolves to a float and float() reads exactly as the
#: loader's constructor does: a decimal point and digits (no timestamp, int, .inf or .nan
#: matches one; ``tests/test_yaml_events.py`` checks this against the resolver).
_DECIMAL = re.compile(r"[-+]?(?:[0-9]+\.[0-9]*|\.[0-9]+)(?:[eE][-+]?[0-9]+)?\Z")


class _Decline(Exception):
    """The document is not plain: take the full road."""


def may_be_plain(text: str) -> bool:
    """False when the text may hold a tag, anchor, alias or merge key (or only a string
    with one of their characters): the full road at once."""
    return not ("!" in text or "&" in text or "*" in text or "<<" in text)


def plain_document(loader: Any) -> tuple[Any, dict[str, int]] | None:
    """``(data, lines)`` of the single document ``loader`` reads, when it is plain; None
    otherwise (the caller disposes of the loader and takes the full road)."""
    import yaml

    try:
        return _build(loader, yaml)
    except (_Decline, yaml.YAMLError):
        return None


def _scalar(resolve: Any, event: Any, scalar_node: Any) -> Any:
    value = event.value
    tag = resolve(scalar_node, value, event.implicit)
    if tag == _STR or tag == _TIMESTAMP:  # a date stays the text written (yaml_core)
        return value
    if tag == _FLOAT:
        if value[-1:].isdigit() or value[-1:] == ".":
            return float(value)
        raise _Decline  # .inf, .nan
    if tag == _INT:
        if len(value) <= _SHORT_INT and value[1:2] not in ("o", "x"):
            return int(value)
        raise _Decline  # 0o/0x forms and long integers: their checks are the full road's
    if tag == _BOOL:
        return _BOOLS[value.lower()]
    if tag == _NULL:
        return None
    raise _Decline  # merge, value and yaml tags


def _build(loader: Any, yaml: Any) -> tuple[Any, dict[str, int]]:
    scalar_event, scalar_node = yaml.ScalarEvent, yaml.ScalarNode
    seq_start, map_start = yaml.SequenceStartEvent, yaml.MappingStartEvent
    seq_end, map_end = yaml.SequenceEndEvent, yaml.MappingEndEvent
    get, resolve, decimal = loader.get_event, loader.resolve, _DECIMAL.match
    if type(get()) is not yaml.StreamStartEvent or \
            type(get()) is not yaml.DocumentStartEvent:
        raise _Decline  # no document: the full road says so
    lines: dict[str, int] = {}
    max_nesting = _limits.MAX_NESTING
    root: Any = None
    count = 0
    # the open containers, innermost last: (container, is_mapping, path); keys[-1] is the
    # innermost mapping's key waiting for its value (None: a key comes next)
    stack: list[tuple[Any, bool, str]] = []
    keys: list[Any] = []
    top: Any = None  # stack[-1][0]
    in_map = False
    while True:
        event = get()
        kind = type(event)
        count += 1
        if kind is scalar_event:
            if event.anchor is not None or event.tag is not None:
                raise _Decline
            value = event.value
            if in_map:
                key = keys[-1]
                if key is None:  # a mapping's key
                    if resolve(scalar_node, value, event.implicit) != _STR or value in top:
                        raise _Decline  # not a string, or given twice: worded there
                    path = stack[-1][2]
                    lines[f"{path}.{value}" if path else value] = event.start_mark.line + 1
                    keys[-1] = value
                    continue
                top[key] = float(value) if event.implicit[0] and decimal(value) else \
                    _scalar(resolve, event, scalar_node)
                keys[-1] = None
            elif stack:
                top.append(float(value) if event.implicit[0] and decimal(value) else
                           _scalar(resolve, event, scalar_node))
            else:
                root = _scalar(resolve, event, scalar_node)
                break
            continue
        if kind is seq_end or kind is map_end:
            stack.pop()
            keys.pop()
            if not stack:
                break
            top, in_map = stack[-1][0], stack[-1][1]
            continue
        if kind is seq_start:
            container: Any = []
        elif kind is map_start:
            container = {}
        else:
            raise _Decline  # an alias, or anything unforeseen
        if event.anchor is not None or event.tag is not None \
                or len(stack) >= max_nesting - 1:
            raise _Decline  # near the nesting limit: the full road words it
        if not stack:
            root, child = container, ""
        elif in_map:
            key = keys[-1]
            if key is None:
                raise _Decline  # a list or mapping as a key
            top[key] = container
            keys[-1] = None
            path = stack[-1][2]
            child = f"{path}.{key}" if path else key
        else:
            path = stack[-1][2]
            i = len(top)
            top.append(container)
            child = f"{path}.{i}" if path else str(i)
            lines.setdefault(child, event.start_mark.line + 1)
        in_map = kind is map_start
        stack.append((container, in_map, child))
        keys.append(None)
        top = container
    if count > _limits.MAX_VALUES:
        raise _Decline
    if type(get()) is not yaml.DocumentEndEvent or type(get()) is not yaml.StreamEndEvent:
        raise _Decline  # more than one document: the full road refuses it
    return root, lines
