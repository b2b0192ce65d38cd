"""Read a model file (YAML, TOML or JSON) safely into plain data and a map of field lines.

Every reader returns ``(data, lines)``: ``data`` is a ``dict`` of plain values (str, int, float,
bool, None, list, dict) and ``lines`` maps dotted field paths (``"plant.A"``,
``"operating_points.1.plant"``; list items by 0-based index) to 1-based source lines. The
checks here are about the file as a file: readable, not too big, text, well-formed, a mapping
at the top, no duplicate keys, no object-constructing YAML tags. What the fields mean is the
loader's business.
"""

from __future__ import annotations

import json
import os
import re
from pathlib import Path
from typing import Any, Iterable

from ..errors import ModelError
from .filenames import name_parts, plain_name, printable_name  # noqa: F401 (re-exported)
from .limits import (  # noqa: F401 (the limits and number checks, re-exported)
    FLOAT_MAX, MAX_INT_DIGITS, MAX_NESTING, MAX_VALUES, int_problem, int_value)

__all__ = ["MAX_MODEL_FILE_BYTES", "MAX_NESTING", "MAX_VALUES", "SUFFIXES", "read_document",
           "read_regular", "printable_name", "parse_bytes", "parse_text", "suggest"]

#: Largest model file read, in bytes. Real models that big keep their matrices in .npz files.
MAX_MODEL_FILE_BYTES = 8 * 1024 * 1024
#: File name endings this module reads, mapped to the format name used in messages.
SUFFIXES = {".yaml": "YAML", ".yml": "YAML", ".toml": "TOML", ".json": "JSON"}



def suggest(word: str, choices: Iterable[str]) -> str | None:
    """Closest match to ``word`` among ``choices`` (difflib), or None when nothing is close."""
    import difflib  # only for a mistake: not on every run

    found = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return found[0] if found else None


def read_document(path: "str | Path", source: str, raw: bytes | None = None
                  ) -> tuple[dict[str, Any], dict[str, int]]:
    """Read the model file at ``path`` into plain data and a field-line map.

    Parameters
    ----------
    path
        File to read; its suffix (``.yaml``, ``.yml``, ``.toml``, ``.json``) picks the format.
    source
        Name used for the file in error messages (repository-relative).
    raw
        The file's bytes when the caller has read them already (as :func:`read_regular`
        reads them); then the file is not read again.

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
    if isinstance(path, Path):
        given = path.suffix
    else:  # a name that Path keeps unchanged is used as it is (the loader passes such names)
        name = os.fspath(path)
        given = name_parts(name)[1] if type(name) is str and plain_name(name) \
            else Path(name).suffix
    suffix = given.lower()
    if suffix not in SUFFIXES:
        raise ModelError(source, "", f"has an unknown file type {given or '(none)'!r}",
                         hint="model files end in " + ", ".join(SUFFIXES))
    if raw is None:
        raw = read_regular(path, source, MAX_MODEL_FILE_BYTES,
                           "keep large matrices in .npz files referenced with {file: ...}")
    # parse_bytes checks the size again: the file may have grown between stat and read.
    return parse_bytes(raw, suffix, source)


def read_regular(path: "str | Path", source: str, limit: int, hint: str | None = None) -> bytes:
    """The bytes of the regular file at ``path``, at most ``limit`` of them.

    A FIFO, socket or device file would block or never end: its status is taken first and the
    file opened without blocking (O_NONBLOCK, O_NOCTTY), so only a regular file is ever read.
    """
    import os
    import stat

    try:
        st = os.stat(path)
        if not stat.S_ISREG(st.st_mode):
            raise _not_regular(source, st.st_mode)
        if st.st_size > limit:
            raise _too_big(source, st.st_size, limit, hint)
        fd = os.open(path, _READ_FLAGS)
        try:
            st = os.fstat(fd)  # what was opened, in case it changed since
            if not stat.S_ISREG(st.st_mode):
                raise _not_regular(source, st.st_mode)
            # os.read, not a file object: one read of the whole file and one at its end
            # (plain reads until the end of the file or past the limit)
            parts, size, want = [], 0, min(st.st_size, limit) + 1
            while size <= limit:
                part = os.read(fd, want)
                if not part:
                    break
                parts.append(part)
                size += len(part)
                want = min(limit + 1 - size, 1 << 16)
        finally:
            os.close(fd)
    except OSError as exc:
        raise ModelError(source, "", f"cannot be read: {exc.strerror or exc}") from None
    raw = parts[0] if len(parts) == 1 else b"".join(parts)
    if len(raw) > limit:
        raise _too_big(source, len(raw), limit, hint)
    return raw


_READ_FLAGS = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0) \
    | getattr(os, "O_BINARY", 0)


def _not_regular(source: str, mode: int) -> ModelError:
    import stat

    kind = {stat.S_IFIFO: "a FIFO", stat.S_IFSOCK: "a socket", stat.S_IFCHR: "a device",
            stat.S_IFBLK: "a device", stat.S_IFDIR: "a folder"}.get(stat.S_IFMT(mode),
                                                                   "not a file")
    return ModelError(source, "", f"cannot be read: it is {kind}, not a regular file",
                      hint="model files are ordinary files")


def _too_big(source: str, size: int, limit: int, hint: str | None) -> ModelError:
    return ModelError(source, "", f"is {size} bytes, larger than the limit of {limit} bytes",
                      hint=hint)


def parse_bytes(raw: bytes, suffix: str, source: str) -> tuple[dict[str, Any], dict[str, int]]:
    """Parse a model file's bytes (read from a file or from git history, say); the same
    size, text and format checks as :func:`read_document`."""
    if len(raw) > MAX_MODEL_FILE_BYTES:
        raise _too_big(source, len(raw), MAX_MODEL_FILE_BYTES, None)
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
        from .yaml_core import parse_yaml

        data, lines = parse_yaml(text, source)
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
    # nested so deeply that a recursive parser would exhaust the stack. Brackets are ASCII, so
    # counting characters counts the bytes of the UTF-8 text.
    opening = text.count("[") + text.count("{")
    if opening <= MAX_NESTING:  # block-style YAML, small flow matrices: cannot nest deeper
        return
    if opening > _NESTING_SCAN:  # long flow-style matrices: one vectorised pass
        import numpy as np

        codes = np.frombuffer(text.encode("utf-8", "surrogatepass"), dtype=np.uint8)
        step = np.zeros(256, dtype=np.int64)
        step[[ord("["), ord("{")]] = 1
        step[[ord("]"), ord("}")]] = -1
        top = int(np.cumsum(step[codes]).max())
    else:
        depth = top = 0
        for ch in _BRACKETS.findall(text):
            depth += 1 if ch in "[{" else -1
            top = max(top, depth)
    if top > MAX_NESTING:
        raise ModelError(source, "", f"nests lists or mappings deeper than {MAX_NESTING} levels")


#: Above this many opening brackets the depth is found with numpy (the matrices need it anyway).
_NESTING_SCAN = 20_000
_BRACKETS = re.compile(r"[\[\]{}]")


# --------------------------------------------------------------------------- numbers

# --------------------------------------------------------------------------- JSON

def _parse_json(text: str, source: str) -> tuple[Any, dict[str, int]]:
    def no_constant(name: str) -> float:
        raise _BadConstant(name)

    too_big: list[_TooBig] = []

    def checked_int(digits: str) -> Any:
        value = int_value(digits) if len(digits) > MAX_INT_DIGITS else int(digits)
        problem = int_problem(value, len(digits.lstrip("-")))
        if problem is not None:  # kept as a marker, so the error can name its field
            too_big.append(_TooBig(problem, text.count("\n", 0, text.find(digits)) + 1))
            return too_big[-1]
        return value

    try:
        data = json.loads(text, object_pairs_hook=unique_pairs, parse_constant=no_constant,
                          parse_int=checked_int)
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
    if too_big:
        path = _path_of(data, too_big[0])
        raise ModelError(source, path, f"holds a number that {too_big[0].problem}",
                         line=too_big[0].line)
    return data, _json_scan(text)[0]


class _TooBig:
    """An integer of a JSON document too large for a float, left where it stood."""

    def __init__(self, problem: str, line: int) -> None:
        self.problem, self.line = problem, line


def _path_of(data: Any, target: object, path: str = "") -> str:
    """The dotted path of the mapping field that holds ``target`` (lists are not indexed:
    the field holding the list is named, as matrix messages do); "" when not found."""
    if isinstance(data, dict):
        for key, value in data.items():
            found = _path_of(value, target, f"{path}.{key}" if path else str(key))
            if found:
                return found
    elif isinstance(data, list):
        for value in data:
            found = _path_of(value, target, path)
            if found:
                return found
    elif data is target:
        return path or "(document)"
    return ""


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

    for number, raw in enumerate(text.splitlines(), start=1):
        # tomllib's work grows with the square of a dotted key's length: refuse long keys
        # before parsing (dots in quoted keys count too; _plain_toml applies the exact limit).
        key = raw.partition("=")[0]
        if key.count(".") >= MAX_NESTING:
            raise ModelError(source, "", f"nests tables deeper than {MAX_NESTING} levels through "
                             "a dotted key", line=number)
    try:
        data = tomllib.loads(text)
    except ValueError as exc:  # an int of more than 4300 digits (not a TOMLDecodeError)
        if isinstance(exc, tomllib.TOMLDecodeError):
            raise _toml_error(source, exc) from None
        found = re.search(r"has (\d+) digits", str(exc))
        raise ModelError(source, "", "holds a number that " + (int_problem(
            None, int(found.group(1)) if found else 4300) or "is too long")) from None
    except RecursionError:
        raise ModelError(source, "", "nests lists or mappings too deeply") from None
    lines = _toml_lines(text)
    return _plain_toml(data, source, "", 0, lines), lines


def _toml_error(source: str, exc: Exception) -> ModelError:
    # tomllib puts "(at line L, column C)" in the message, duplicate keys included.
    found = re.search(r"line (\d+)", str(exc))
    return ModelError(source, "", f"is not valid TOML: {exc}",
                      line=int(found.group(1)) if found else None)


def _plain_toml(value: Any, source: str, path: str, depth: int, lines: dict[str, int]) -> Any:
    # TOML dates and times are not plain data here; keep them as the text they were written as.
    # Dotted keys and table headers nest without brackets, so the nesting limit is applied
    # here, and integers that no float can hold are refused as in YAML and JSON.
    import datetime

    if isinstance(value, (dict, list)):
        if depth >= MAX_NESTING:
            raise ModelError(source, path, f"nests deeper than {MAX_NESTING} levels",
                             line=_nearest_line(lines, path))
        items = value.items() if isinstance(value, dict) else enumerate(value)
        out = [v if type(v) in (float, str, bool) or type(v) is int and abs(v) <= FLOAT_MAX
               else _plain_toml(v, source, f"{path}.{k}" if path else str(k), depth + 1, lines)
               for k, v in items]  # plain numbers (matrix rows) pass without a path
        return dict(zip(value, out)) if isinstance(value, dict) else out
    if isinstance(value, (datetime.date, datetime.time)):
        return value.isoformat()
    if type(value) is int and abs(value) > FLOAT_MAX:
        raise ModelError(source, path, int_problem(None, len(str(abs(value)))),  # type: ignore
                         line=_nearest_line(lines, path))
    return value


def _nearest_line(lines: dict[str, int], path: str) -> int | None:
    while path:
        if path in lines:
            return lines[path]
        path = path.rpartition(".")[0]
    return None


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
