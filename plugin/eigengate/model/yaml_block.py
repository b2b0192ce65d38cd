"""The line reader of a block-style plain YAML model file: data and field lines from one
regular-expression pass over its lines, without PyYAML.

Model files are mostly written (or dumped) in one narrow style: block mappings ``key: value``,
block sequences ``- value`` (``- - value`` for the rows of a matrix), plain scalars, comments
and blank lines. :func:`block_document` reads exactly that style and gives what the event road
(:func:`eigengate.model.yaml_events.plain_document`) and the full road
(:func:`eigengate.model.yaml_core.parse_yaml`) give: the same data, the same types and the
same ``{dotted.path: line}`` map, scalars resolved as the YAML 1.2 core schema resolves them
there (YAML 1.2.2 spec, 10.3.2 Tag Resolution).

It returns None, and the file takes those roads, which word every refusal, for anything it is
not sure of: a line that is not exactly one of its forms (flow style, quotes, block scalars,
tags, anchors, aliases, ``---``/``...``, directives, tabs, a multi-line plain scalar, a
character outside printable ASCII), an indentation that is not that of an open block, a key
given twice or one that is not a string, a scalar other than a decimal number, a short
integer, true/false, null or a plain string of letters, digits and common punctuation, and
documents near the nesting or size limits. ``tests/test_yaml_block.py`` compares the roads on
generated documents and on the repository's model files.
"""

from __future__ import annotations

import re
from typing import Any

from . import limits as _limits

__all__ = ["block_document"]

#: A key: an identifier-like plain scalar (letters, digits, ``_`` and ``-``). With no dot
#: in a key, and no key that looks like a list index, every dotted path names one node. An
#: implicit key is at most 1024 characters (YAML 1.2.2 spec, 7.4.3; libyaml refuses longer
#: ones): longer keys are left to the other roads.
_KEY = r"[A-Za-z_][A-Za-z0-9_\-]{0,200}"
#: A decimal float (the event road's ``_DECIMAL``): a core-schema float that float() reads.
_DEC = r"[-+]?(?:[0-9]+\.[0-9]*|\.[0-9]+)(?:[eE][-+]?[0-9]+)?"
#: A plain scalar of one line: no indicator first (a ``-`` only before a letter, digit, ``_``
#: or ``.``), no ``:``, ``#``, brackets, braces or the tag, anchor and alias characters, no
#: blank at either end (trailing blanks are not part of a plain scalar).
_SCALAR = (r"(?:[A-Za-z0-9_.+~(/]|-(?=[A-Za-z0-9_.]))"
           r"(?:[ A-Za-z0-9_.+\-~/()=,;^$%@'\"]*[A-Za-z0-9_.+\-~/()=,;^$%@'\"])?")
#: One line: indentation, the ``- `` of (compact) sequence items, a key, a scalar (a decimal
#: one apart), a comment (after a blank or at the start of the line), the line break. A line
#: that does not match is not one of the forms read here.
_LINE = (rf"( *)((?:-(?: +|(?=\n)))*)(?:({_KEY}):(?: +|(?=\n)))?(?:({_DEC})|({_SCALAR}))?"
         r" *(?:(?<![^ \n])#[ -~]*)?\n")
#: What most of a model file is, read in bulk after its first line: a matrix as dumped in
#: block style (rows ``- - x`` and ``  - x`` at one indentation) and a run of ``- x`` lines.
_MATRIX = rf"( *)- - ({_DEC})\n(?:\1  - {_DEC}\n)*(?:\1- - {_DEC}\n(?:\1  - {_DEC}\n)*)*"
_RUN = rf"( *)- ({_DEC})\n(?:\3- {_DEC}\n)+"
_TOKEN = re.compile(f"{_MATRIX}|{_RUN}|{_LINE}")
#: :data:`_TOKEN` with a matrix's entries matched as runs of the characters of a decimal
#: with exactly one point (much faster than matching each as a decimal); :func:`_matrix_rows`
#: keeps the match only when every entry is a decimal after all, else :data:`_TOKEN` matches
#: there.
_NUMBERISH = r"[-+0-9eE]*\.[-+0-9eE]*"
_QUICK = re.compile(rf"( *)- - ({_NUMBERISH})\n(?:\1  - {_NUMBERISH}\n)*"
                    rf"(?:\1- - {_NUMBERISH}\n(?:\1  - {_NUMBERISH}\n)*)*|{_RUN}|{_LINE}")
_INT = re.compile(r"[-+]?[0-9]+\Z")
#: A core-schema float without a point: digits and an exponent (1e5).
_EXPONENT = re.compile(r"[-+]?[0-9]+[eE][-+]?[0-9]+\Z")
_DECIMAL = re.compile(_DEC + r"\Z")
#: No core int this long is converted here: the full road checks its size.
_SHORT_INT = 16
_BOOLS = {"true": True, "True": True, "TRUE": True,
          "false": False, "False": False, "FALSE": False}
_NULLS = frozenset(("null", "Null", "NULL", "~"))
#: Keys that the core schema resolves to something other than a string.
_NOT_STR = frozenset(_BOOLS) | _NULLS


#: The columns of the "-" of a line's items, from the first one's, by the text before them.
_OFFSETS: dict[str, tuple[int, ...]] = {}


class _Decline(Exception):
    """Not a document this reader is sure of: the other roads read it."""


def scalar_value(value: str) -> Any:
    """A plain scalar of :data:`_SCALAR` as the core schema resolves and the loader builds
    it; :class:`_Decline` for any form left to the other roads."""
    first = value[0]
    if first in "0123456789+-.":
        if _INT.match(value):
            if len(value) <= _SHORT_INT:
                return int(value)
        elif _DECIMAL.match(value) or _EXPONENT.match(value):
            return float(value)
        raise _Decline  # .inf, dates, 0x1F, 1_000, 1:20, long integers, ...
    if value in _BOOLS:
        return _BOOLS[value]
    if value in _NULLS:
        return None
    if first == "~":
        raise _Decline
    return value


def block_document(text: str) -> tuple[dict[str, Any], dict[str, int]] | None:
    """``(data, lines)`` of ``text`` when it is a block-style plain YAML mapping this reader
    reads exactly; None otherwise (the caller takes the other roads)."""
    if not text.isascii() or 2 * len(text) + 16 > _limits.MAX_VALUES:
        return None
    try:
        return _build(text if text.endswith("\n") else text + "\n")
    except _Decline:
        return None


def _build(text: str) -> tuple[dict[str, Any], dict[str, int]]:
    max_open = _limits.MAX_NESTING - 2  # near the limit: the full road words it
    convert, token = scalar_value, _QUICK.match
    root: dict[str, Any] = {}
    lines: dict[str, int] = {}
    # open blocks, innermost last: [container, is_mapping, column, path, indentless]; an
    # indentless sequence is a mapping value whose "- " stand in the key's column
    stack: list[list[Any]] = [[root, True, 0, "", False]]
    top: Any = root
    top_map, top_col, top_path = True, 0, ""
    # a key or "-" with nothing after it: (column, after a key, owner, slot, path); the
    # value is None unless a block follows, deeper (a sequence may stand at a key's column)
    pending: tuple[int, bool, Any, Any, str] | None = None
    number, pos, end = 0, 0, len(text)
    while pos < end:
        found = token(text, pos)
        if found is None:
            raise _Decline  # a line of another form
        matrix, first, run, item, indent, dashes, key, decimal, plain = found.groups()
        rows = None
        if first is not None:
            rows = _matrix_rows(found.group(0), matrix)
            if rows is None:  # an entry that is not a decimal: the exact pattern there
                found = _TOKEN.match(text, pos)
                if found is None:
                    raise _Decline
                matrix, first, run, item, indent, dashes, key, decimal, plain = \
                    found.groups()
        pos = found.end()
        number += 1
        if first is not None:
            indent, dashes, decimal = matrix, "- - ", first
        elif item is not None:
            indent, dashes, decimal = run, "- ", item
        elif not dashes and not key:
            if decimal or plain:
                raise _Decline  # a scalar on a line of its own (a multi-line scalar, say)
            continue  # blank or comment
        col = len(indent)
        if decimal and dashes == "- " and not key and pending is None and col == top_col \
                and not top_map:
            top.append(float(decimal))  # the common case: a number in a list of numbers
            if item is not None:
                number = _rest_of_run(found.group(0), top, number)
            continue
        if pending is not None:
            pcol, after_key, owner, slot, path = pending
            pending = None
            if dashes and (col > pcol or col == pcol and after_key) or \
                    not dashes and col > pcol:
                if len(stack) >= max_open:
                    raise _Decline
                container: Any = [] if dashes else {}
                owner[slot] = container
                if not after_key:
                    lines.setdefault(path, number)
                stack.append([container, not dashes, col, path, col == pcol])
                top, top_map, top_col, top_path = container, not dashes, col, path
            # otherwise the value stays None
        if col != top_col:
            while col < top_col:
                stack.pop()
                top, top_map, top_col, top_path = stack[-1][:4]
            if col != top_col:
                raise _Decline  # not the column of an open block
        if dashes:
            if top_map:
                raise _Decline  # "- " where a key belongs
            if first is not None:  # a matrix: its rows in bulk
                if len(stack) >= max_open:
                    raise _Decline
                if rows is None:  # the exact pattern matched its first rows
                    rows = _matrix_rows(found.group(0), indent)
                    assert rows is not None
                number = _add_rows(rows, top, top_path, lines, number)
                path = f"{top_path}.{len(top) - 1}" if top_path else str(len(top) - 1)
                top, top_map, top_col, top_path = top[-1], False, col + 2, path
                stack.append([top, False, top_col, path, False])
                continue
            offsets = _OFFSETS.get(dashes)
            if offsets is None:
                offsets = tuple(i for i, ch in enumerate(dashes) if ch == "-")
                if len(dashes) <= 8:  # the usual few ("- ", "- - "), kept
                    _OFFSETS[dashes] = offsets
            last = len(offsets) - 1
            for k, offset in enumerate(offsets):
                dash = col + offset
                i = len(top)
                path = f"{top_path}.{i}" if top_path else str(i)
                if k < last or key:
                    if len(stack) >= max_open:
                        raise _Decline
                    inner = k < last
                    container = [] if inner else {}
                    top.append(container)
                    lines.setdefault(path, number)
                    at = col + (offsets[k + 1] if inner else len(dashes))
                    stack.append([container, not inner, at, path, False])
                    top, top_map, top_col, top_path = container, not inner, at, path
                elif decimal:
                    top.append(float(decimal))
                elif plain:
                    top.append(convert(plain))
                else:
                    top.append(None)
                    pending = (dash, False, top, i, path)
            if item is not None:
                number = _rest_of_run(found.group(0), top, number)
            if not key:
                continue
        elif not top_map:
            if not stack[-1][4]:
                raise _Decline  # a key where "- " belongs
            stack.pop()  # a key after an indentless sequence: the mapping's next key
            top, top_map, top_col, top_path = stack[-1][:4]
        if key in _NOT_STR or key in top:
            raise _Decline  # not a string, or given twice: the full road words it
        path = f"{top_path}.{key}" if top_path else key
        lines[path] = number
        if decimal:
            top[key] = float(decimal)
        elif plain:
            top[key] = convert(plain)
        else:
            top[key] = None
            pending = (top_col, True, top, key, path)
    if not root:
        raise _Decline  # no data: the full road says so
    return root, lines


def _rest_of_run(body: str, seq: list[Any], number: int) -> int:
    """Append the numbers of a run's lines after its first to ``seq``: every line is
    ``- x`` with x a decimal (the pattern matched), so its words alternate "-" and x."""
    seq.extend(map(float, body.split()[3::2]))
    return number + body.count("\n") - 1


def _matrix_rows(body: str, indent: str) -> list[list[float]] | None:
    """The rows of a block-style matrix ``body`` at ``indent`` (rows ``- - x`` and entries
    ``  - x``, one a line) whose entries are runs of the characters of a decimal with exactly
    one point; None unless every entry is a decimal (:data:`_DEC`). Such an entry is one
    when float() reads it: float's syntax, less underscores, blanks and the words inf and
    nan (which those characters cannot spell), with the point a decimal has."""
    # "", then "x\n<indent>  - x ... - x\n" per row: "- - " starts a row and nothing else
    # (an entry holds no blank), and float() ignores the line break after an entry
    chunks = body.split(indent + "- - ")
    entry = "\n" + indent + "  - "  # before every entry of a row after its first
    try:
        return [list(map(float, chunk.split(entry))) for chunk in chunks[1:]]
    except ValueError:
        return None


def _add_rows(rows: list[list[float]], outer: list[Any], path: str, lines: dict[str, int],
              number: int) -> int:
    """Append a matrix's ``rows``, whose first entry is on line ``number``, to ``outer`` (a
    list at ``path``), noting each row's line as the event road notes a list in a list.
    Every entry has a line of its own, so a row starts as many lines after the one before as
    that one has entries. Returns the matrix's last line."""
    line, start = number, len(outer)
    for i, row in enumerate(rows, start):  # new paths: no other node has them
        lines[f"{path}.{i}"] = line
        line += len(row)
    outer.extend(rows)
    return line - 1
