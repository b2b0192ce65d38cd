"""The baseline file as bytes: deterministic writer, strict reader, folder and write lock.

Private to :mod:`eigengate.baseline.store`. The reader refuses anything it did not write (invalid
JSON, duplicate keys, unknown or missing fields, wrong types, a newer ``format_version``) with
a :class:`BaselineError` naming the file and the line, found by a small scanner that maps every
JSON path to the line where it starts.
"""

from __future__ import annotations

import contextlib
import json
import math
import os
import re
import tempfile
import time
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterable, Iterator, Mapping

from ..model.formats import DuplicateKey, unique_pairs

from ..errors import EigengateError

if TYPE_CHECKING:  # pragma: no cover
    from .entries import Entry

__all__ = ["BaselineError", "fmt_float", "dump_text", "parse", "ensure_folder", "locked"]

FORMAT_VERSION = 1
DIGITS = 12
FIGURES = ("spectral_abscissa", "spectral_radius", "min_damping", "equilibrium", "stable",
           "unstable", "center")
MODE_FIELDS = ("eigenvalue", "s", "multiplicity", "pair", "defective", "damping_ratio",
               "natural_frequency", "time_constant", "uncertainty", "condition", "states")
ENTRY_FIELDS = ("domain", "figures", "inputs", "modes", "point", "robustness", "sample_period",
                "written_by")
#: Fields an entry may leave out (written only when set; older files lack them).
OPTIONAL_FIELDS = ("inputs", "point", "robustness")
#: Fields of one input block (``inputs``; see :mod:`eigengate.baseline.inputs`).
INPUT_FIELDS = ("digest", "file", "shape", "values")
TOP_FIELDS = ("format_version", "models")
_README = """\
This folder holds eigengate's baseline: the modes of every model as they were last accepted.
Commit it. Regressions are judged against it; accept changes again with eigengate rather than
editing baseline.json by hand (a hand edit that breaks the format is reported, never ignored).
"""


class BaselineError(EigengateError, ValueError):
    """The baseline file is unreadable, malformed, or from a newer eigengate."""

    def __init__(self, path: str, problem: str, *, line: int | None = None,
                 hint: str | None = None) -> None:
        self.path, self.problem, self.line, self.hint = path, problem, line, hint
        where = path if line is None else f"{path}:{line}"
        super().__init__(f"{where}: {problem}" + (f" ({hint})" if hint else ""))


# ------------------------------------------------------------------ writing

def fmt_float(x: float) -> str:
    """A float as the file writes it: DIGITS significant digits, ``"inf"``/``"nan"`` quoted."""
    if math.isnan(x):
        return '"nan"'
    if math.isinf(x):
        return '"inf"' if x > 0 else '"-inf"'
    text = format(x, f".{DIGITS}g")
    return "0" if text == "-0" else text


def _compact(v: Any) -> str:
    if isinstance(v, bool) or v is None:
        return json.dumps(v)
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return fmt_float(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, complex):
        return f"[{fmt_float(v.real)}, {fmt_float(v.imag)}]"
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_compact(x) for x in v) + "]"
    return "{" + ", ".join(f"{_compact(k)}: {_compact(v[k])}" for k in sorted(v)) + "}"


def _entry_lines(e: "Entry", pad: str) -> list[str]:
    modes = [{k: getattr(m, k) for k in MODE_FIELDS} for m in e.modes]
    out = [f'{pad}"domain": {_compact(e.domain)},',
           f'{pad}"figures": {_compact({k: getattr(e, k) for k in FIGURES})},']
    if e.inputs:  # one block per line
        out.append(f'{pad}"inputs": {{')
        for i, b in enumerate(e.inputs):
            rec = {"digest": b.digest, "shape": list(b.shape)}
            if b.file is not None:
                rec["file"] = b.file
            if b.values is not None:
                rec["values"] = list(b.values)
            out.append(f"{pad}  {_compact(b.name)}: {_compact(rec)}"
                       + ("," if i < len(e.inputs) - 1 else ""))
        out.append(f"{pad}}},")
    if modes:
        out.append(f'{pad}"modes": [')
        out += [f"{pad}  {_compact(m)}" + ("," if i < len(modes) - 1 else "")
                for i, m in enumerate(modes)]
        out.append(f"{pad}],")
    else:
        out.append(f'{pad}"modes": [],')
    if e.point is not None:
        out.append(f'{pad}"point": {_compact(e.point)},')
    if e.robustness:
        out.append(f'{pad}"robustness": {_compact(dict(e.robustness))},')
    return out + [f'{pad}"sample_period": {_compact(e.sample_period)},',
                  f'{pad}"written_by": {_compact(e.written_by)}']


def dump_text(entries: Iterable["Entry"]) -> str:
    """The file text of ``entries`` (sorted by source, then title): valid JSON with sorted
    keys, 2-space indentation, one mode per line and a trailing newline."""
    by_source: dict[str, list["Entry"]] = {}
    for e in sorted(entries, key=lambda e: e.key):
        by_source.setdefault(e.source, []).append(e)
    out = ["{", f'  "format_version": {FORMAT_VERSION},']
    if not by_source:
        out.append('  "models": {}')
    else:
        out.append('  "models": {')
        for i, (source, group) in enumerate(by_source.items()):
            out.append(f"    {_compact(source)}: {{")
            for j, e in enumerate(group):
                out.append(f"      {_compact(e.title)}: {{")
                out += _entry_lines(e, " " * 8)
                out.append("      }" + ("," if j < len(group) - 1 else ""))
            out.append("    }" + ("," if i < len(by_source) - 1 else ""))
        out.append("  }")
    return "\n".join(out + ["}"]) + "\n"


# ------------------------------------------------------------------ reading

_TOKEN = re.compile(r'"(?:[^"\\]|\\.)*"|[{}\[\]:,]|[^\s{}\[\]:,"]+|\s+')


def scan_lines(text: str) -> tuple[dict[tuple, int], tuple[tuple, int] | None]:
    """Map each JSON path (keys and list indices) of valid JSON ``text`` to the 1-based line
    where its key or value starts; also the first duplicate key, as (path, line)."""
    lines: dict[tuple, int] = {(): 1}
    stack: list[list] = []  # [kind, path, current key or index, keys seen, expecting a key]
    line, dup = 1, None
    for m in _TOKEN.finditer(text):
        tok = m.group()
        if tok[0].isspace():
            line += tok.count("\n")
            continue
        top = stack[-1] if stack else None
        if top is not None and top[0] == "{" and top[4] and tok[0] == '"':
            key = json.loads(tok)
            if key in top[3] and dup is None:
                dup = (top[1] + (key,), line)
            top[3].add(key)
            top[2], top[4] = key, False
            lines.setdefault(top[1] + (key,), line)
            continue
        if tok == ",":
            if top is not None:
                if top[0] == "{":
                    top[4] = True
                else:
                    top[2] += 1
            continue
        if tok == ":":
            continue
        if tok in "}]":
            stack.pop()
            continue
        here = () if top is None else top[1] + (top[2],)
        if top is not None and top[0] == "[":
            lines.setdefault(here, line)
        if tok in "{[":
            stack.append([tok, here, 0, set(), tok == "{"])
    return lines, dup


def _no_constant(name: str) -> Any:
    raise ValueError(f"the bare constant {name} is not JSON; the baseline writes "
                     "\"inf\", \"-inf\" and \"nan\" as strings")


class _Reader:
    """Typed access to parsed data; every failure names the line of the offending path."""

    def __init__(self, text: str, path: str) -> None:
        self.text, self.path = text, path
        self._lines: dict[tuple, int] | None = None

    def line(self, where: tuple) -> int | None:
        if self._lines is None:
            self._lines = scan_lines(self.text)[0]
        while where not in self._lines and where:
            where = where[:-1]
        return self._lines.get(where)

    def fail(self, where: tuple, problem: str, hint: str | None = None) -> BaselineError:
        rest = where[3:] if where[:1] == ("models",) and len(where) >= 3 else where
        shown = "".join(f"[{p}]" if isinstance(p, int) else f".{p}" for p in rest).lstrip(".")
        if rest is not where:
            shown = f"entry {where[2]!r} of {where[1]!r}" + (f": {shown}" if shown else "")
        elif len(where) == 2:
            shown = f"model file {where[1]!r}"
        what = f"{shown} {problem}" if shown else problem
        return BaselineError(self.path, what, line=self.line(where), hint=hint or
                             "restore the file from version control, or accept again")

    def obj(self, v: Any, where: tuple, required: tuple[str, ...],
            optional: tuple[str, ...] = ()) -> dict:
        if not isinstance(v, dict):
            raise self.fail(where, f"must be an object, got {_kind(v)}")
        for k in v:
            if k not in required:
                raise self.fail(where + (k,), "is not a field of a baseline "
                                + ("file" if not where else "entry" if len(where) == 3
                                   else "figure set" if where[-1] == "figures" else "mode"),
                                "known fields: " + ", ".join(required))
        for k in required:
            if k not in v and k not in optional:
                raise self.fail(where, f"is missing the field {k!r}")
        return v

    def num(self, v: Any, where: tuple, *, integer: bool = False) -> Any:
        kind = type(v)  # the common cases first: a large baseline holds many numbers
        if kind is float and not integer:
            return v
        if kind is int:
            return v if integer else float(v)
        if isinstance(v, str) and v in ("inf", "-inf", "nan") and not integer:
            return float(v)
        if isinstance(v, bool) or not isinstance(v, int if integer else (int, float)):
            raise self.fail(where, f"must be {'an integer' if integer else 'a number'}, got "
                            f"{_kind(v)} {v!r:.40}")
        return v if integer else float(v)

    def cplx(self, v: Any, where: tuple) -> complex:
        if not isinstance(v, list) or len(v) != 2:
            raise self.fail(where, f"must be [real, imaginary], got {v!r:.60}")
        return complex(self.num(v[0], where + (0,)), self.num(v[1], where + (1,)))

    def choice(self, v: Any, where: tuple, allowed: tuple, what: str) -> Any:
        if v not in allowed or isinstance(v, bool) != isinstance(allowed[0], bool):
            raise self.fail(where, f"must be {what}, got {v!r:.60}")
        return v


def _kind(v: Any) -> str:
    return {dict: "an object", list: "a list", str: "a string", bool: "a boolean",
            int: "a number", float: "a number", type(None): "null"}.get(type(v), "a value")


def parse(text: str, path: str) -> tuple[list["Entry"], Mapping[tuple[str, str], int]]:
    """Entries of a baseline file and the line of each (found when asked for); raises
    :class:`BaselineError`."""
    from .entries import BaselineMode, Entry
    from ..analysis.equilibrium import EQUILIBRIUM_TYPES

    hint = "restore the file from version control, or accept again"
    if "\n<<<<<<< " in "\n" + text:
        hint = "it holds merge-conflict markers: resolve by accepting again on the merged branch"
    try:
        data = json.loads(text, object_pairs_hook=unique_pairs, parse_constant=_no_constant)
    except DuplicateKey as exc:
        where, line = scan_lines(text)[1] or ((str(exc),), None)
        raise BaselineError(path, f"has the key {where[-1]!r} twice in one object", line=line,
                            hint=hint) from None
    except json.JSONDecodeError as exc:
        raise BaselineError(path, f"is not valid JSON: {exc.msg} (column {exc.colno})",
                            line=exc.lineno, hint=hint) from None
    except RecursionError:
        raise BaselineError(path, "nests lists or objects too deeply to be a baseline",
                            hint=hint) from None
    except ValueError as exc:
        bare = re.search(r"-?Infinity|NaN", text)
        raise BaselineError(path, str(exc), hint=hint, line=None if bare is None else
                            text.count("\n", 0, bare.start()) + 1) from None
    r = _Reader(text, path)
    if not isinstance(data, dict):
        raise r.fail((), f"must hold a JSON object, got {_kind(data)}")
    version = data.get("format_version")
    if isinstance(version, int) and not isinstance(version, bool) and version > FORMAT_VERSION:
        raise r.fail(("format_version",), f"is {version}: the file was written by a newer "
                     f"eigengate (this one reads format_version {FORMAT_VERSION})",
                     "upgrade eigengate")
    r.obj(data, (), TOP_FIELDS)
    if version != FORMAT_VERSION or isinstance(version, bool):
        raise r.fail(("format_version",), f"must be {FORMAT_VERSION}, got {version!r}")
    models = data["models"]
    if not isinstance(models, dict):
        raise r.fail(("models",), f"must be an object of model files, got {_kind(models)}")
    entries = []
    for source, titles in models.items():
        w = ("models", source)
        if not isinstance(titles, dict) or not titles:
            raise r.fail(w, "must be a non-empty object of model titles")
        for title, e in titles.items():
            we = w + (title,)
            r.obj(e, we, ENTRY_FIELDS, OPTIONAL_FIELDS)
            point = e.get("point")
            if point is not None and (not isinstance(point, str) or not point):
                raise r.fail(we + ("point",), f"must be a point identity (a string), got "
                             f"{_kind(point)} {point!r:.40}")
            fig = r.obj(e["figures"], we + ("figures",), FIGURES)
            wf = we + ("figures",)
            if not isinstance(e["modes"], list):
                raise r.fail(we + ("modes",), f"must be a list, got {_kind(e['modes'])}")
            if not isinstance(e["written_by"], str):
                raise r.fail(we + ("written_by",), "must be a string")
            modes = []
            for i, m in enumerate(e["modes"]):
                wm = we + ("modes", i)
                r.obj(m, wm, MODE_FIELDS)
                states = m["states"]
                if not isinstance(states, list) or not all(
                        isinstance(x, list) and len(x) == 2 and isinstance(x[0], str)
                        for x in states):
                    raise r.fail(wm + ("states",), "must be a list of [state, factor]")
                modes.append(BaselineMode(
                    eigenvalue=r.cplx(m["eigenvalue"], wm + ("eigenvalue",)),
                    s=r.cplx(m["s"], wm + ("s",)),
                    multiplicity=r.num(m["multiplicity"], wm + ("multiplicity",), integer=True),
                    pair=r.choice(m["pair"], wm + ("pair",), (True, False), "true or false"),
                    defective=r.choice(m["defective"], wm + ("defective",), (True, False),
                                       "true or false"),
                    **{k: r.num(m[k], wm + (k,)) for k in (
                        "damping_ratio", "natural_frequency", "time_constant", "uncertainty",
                        "condition")},
                    states=tuple((n, r.num(p, wm + ("states", j, 1)))
                                 for j, (n, p) in enumerate(states))))
                if modes[-1].multiplicity < 1:
                    raise r.fail(wm + ("multiplicity",), "must be at least 1")
            robust = e.get("robustness", {})
            if not isinstance(robust, dict) or not all(isinstance(k, str) and k
                                                       for k in robust):
                raise r.fail(we + ("robustness",), f"must be an object of figures by name, got "
                             f"{_kind(robust)}")
            figures = tuple(sorted((k, r.num(v, we + ("robustness", k)))
                                   for k, v in robust.items()))
            period = e["sample_period"]
            inputs = _inputs(r, e.get("inputs", {}), we + ("inputs",))
            entries.append(Entry(
                source=source, title=title,
                domain=r.choice(e["domain"], we + ("domain",), ("continuous", "discrete"),
                                "'continuous' or 'discrete'"),
                sample_period=None if period is None else r.num(period, we + ("sample_period",)),
                modes=tuple(modes),
                **{k: r.num(fig[k], wf + (k,)) for k in FIGURES[:3]},
                equilibrium=r.choice(fig["equilibrium"], wf + ("equilibrium",),
                                     EQUILIBRIUM_TYPES, "an equilibrium type ("
                                     + ", ".join(EQUILIBRIUM_TYPES) + ")"),
                **{k: r.num(fig[k], wf + (k,), integer=True) for k in FIGURES[4:]},
                written_by=e["written_by"], point=point, robustness=figures, inputs=inputs))
    return entries, _EntryLines(r, [e.key for e in entries])


def _inputs(r: _Reader, value: Any, where: tuple) -> tuple:
    """The ``inputs`` of an entry (absent in files written before they were recorded)."""
    from .inputs import InputBlock

    if not isinstance(value, dict):
        raise r.fail(where, f"must be an object of input blocks by name, got {_kind(value)}")
    out = []
    for name, b in sorted(value.items()):
        wb = where + (name,)
        r.obj(b, wb, INPUT_FIELDS, ("file", "values"))
        shape, values, file = b["shape"], b.get("values"), b.get("file")
        if not isinstance(b["digest"], str) or not re.fullmatch(r"[0-9a-f]{16}", b["digest"]):
            raise r.fail(wb + ("digest",),
                         f"must be 16 hexadecimal digits, got {b['digest']!r:.40}")
        if not isinstance(shape, list) or len(shape) > 2:
            raise r.fail(wb + ("shape",), f"must be a list of at most 2 sizes, got {shape!r:.40}")
        dims = tuple(r.num(d, wb + ("shape", i), integer=True) for i, d in enumerate(shape))
        size = 1
        for d in dims:
            size *= d
        if values is not None and (not isinstance(values, list) or len(values) != size):
            raise r.fail(wb + ("values",), f"must be a list of {size} numbers (the shape "
                         f"{list(dims)}), got {values!r:.40}")
        if file is not None and not isinstance(file, str):
            raise r.fail(wb + ("file",), "must be a path (a string)")
        out.append(InputBlock(name, dims, b["digest"], None if values is None else tuple(
            r.num(x, wb + ("values", i)) for i, x in enumerate(values)), file))
    return tuple(out)


class _EntryLines(Mapping):
    """The line of each entry, found when first asked for: finding every line of a large
    baseline costs more than reading it."""

    def __init__(self, reader: _Reader, keys: list[tuple[str, str]]) -> None:
        self._reader, self._keys = reader, dict.fromkeys(keys)

    def __getitem__(self, key: tuple[str, str]) -> int:
        if key not in self._keys:
            raise KeyError(key)
        return self._reader.line(("models", *key)) or 1

    def __iter__(self):
        return iter(self._keys)

    def __len__(self) -> int:
        return len(self._keys)


# ------------------------------------------------------------------ folder and lock

def ensure_folder(folder: Path) -> None:
    """Create the baseline's folder; a dedicated ``.eigengate`` folder explains itself."""
    if folder.is_dir():
        return
    folder.parent.mkdir(parents=True, exist_ok=True)
    if folder.name != ".eigengate":
        folder.mkdir(exist_ok=True)
        return
    tmp = Path(tempfile.mkdtemp(prefix=".eigengate-", dir=folder.parent))
    try:  # built aside and renamed into place, so a half-made folder is never seen
        (tmp / "README").write_text(_README, encoding="utf-8")
        (tmp / ".gitignore").write_text("# transient files of eigengate's writes\n*.lock\n"
                                        ".tmp-*\n", encoding="utf-8")
        with contextlib.suppress(OSError):  # a concurrent creator won
            os.rename(tmp, folder)
    finally:
        if tmp.exists():
            for f in tmp.iterdir():
                f.unlink()
            tmp.rmdir()


@contextlib.contextmanager
def locked(path: Path, timeout: float) -> Iterator[None]:
    """Hold an exclusive lock on the sidecar ``<path>.lock``: ``fcntl.flock`` where there is
    one (the file is removed on release; a waiter that locked a removed file retries), else
    an exclusive create (a crashed holder leaves the file behind; the error says so)."""
    lock = path.with_name(path.name + ".lock")
    deadline = time.monotonic() + timeout
    try:
        import fcntl
    except ImportError:  # pragma: no cover - not on POSIX
        fcntl = None  # type: ignore[assignment]
    while True:
        if fcntl is not None:
            fd = os.open(lock, os.O_RDWR | os.O_CREAT, 0o644)
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                st, cur = os.fstat(fd), os.stat(lock)
                if (cur.st_ino, cur.st_dev) == (st.st_ino, st.st_dev):
                    break
            except OSError:  # held by another process, or removed under us
                pass
            os.close(fd)
        else:  # pragma: no cover - not on POSIX
            with contextlib.suppress(FileExistsError):
                fd = os.open(lock, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
                break
        if time.monotonic() > deadline:
            raise BaselineError(os.fspath(path), f"is locked by another process ({lock.name} "
                                f"held for over {timeout:.0f} s)",
                                hint=f"remove {lock.name} if no eigengate process is running")
        time.sleep(0.002)
    try:
        yield
    finally:
        with contextlib.suppress(OSError):
            os.unlink(lock)
        os.close(fd)  # closing releases the flock
