"""The baseline store: the accepted modes of every model, committed with the repository.

Public API::

    Baseline.load(path) -> Baseline            # missing file: empty baseline
    Baseline.loads(text, path) -> Baseline
    Baseline.entry(source, title) -> Entry | None
    Baseline.updated(entries, remove=()) -> Baseline
    Baseline.renamed({old_source: new_source}) -> Baseline
    Baseline.dump() -> str
    baseline_entry_from(model_result, source=None) -> Entry
    write_atomic(path, text)
    merge_write(path, new_entries, removed_keys=()) -> MergeSummary

The file (default :data:`DEFAULT_PATH`) is JSON with sorted keys, 2-space indentation, one mode
per line, every float written with :data:`DIGITS` significant digits, and a trailing newline, so
the same entries always give the same bytes. Entries are keyed by the model file's
repository-relative path and the model title (``name`` or ``name[label]``); see
``docs/baselines.md`` for the fields. Accepting a model again keeps its stored entry when every
figure agrees to within round-off, so re-accepting an unchanged repository changes no byte.

Every problem with the file (invalid JSON, duplicate keys, wrong types, missing fields, a
``format_version`` from a newer eigengate) is a :class:`BaselineError` naming file and line:
a baseline never passes silently.
"""

from __future__ import annotations

import contextlib
import math
import os
import tempfile
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Iterable, Iterator, Mapping, cast

from ..rules.robustness import figures_of
from .entries import BaselineMode, Entry, Key
from .fileformat import DIGITS, FORMAT_VERSION, BaselineError, fmt_float

__all__ = ["DEFAULT_PATH", "FORMAT_VERSION", "DIGITS", "Baseline", "BaselineError",
           "BaselineMode", "Entry", "MergeSummary", "baseline_entry_from", "write_atomic",
           "merge_write", "fmt_float"]

#: Where the baseline lives, relative to the repository root, unless configured otherwise.
DEFAULT_PATH = ".eigengate/baseline.json"
#: Participating states kept per mode.
TOP_STATES = 3
#: Seconds to wait for another process's lock before giving up.
LOCK_TIMEOUT = 120.0

def _r(x: float, digits: int = DIGITS) -> float:
    """``x`` rounded to ``digits`` significant digits (what the file can hold)."""
    x = float(x)
    return float(format(x, f".{digits}g")) + 0.0 if math.isfinite(x) else x


def _complex(z: complex) -> complex:
    return complex(_r(z.real), _r(z.imag))


def mode_record(m: Any) -> BaselineMode:
    """The baseline form of a :class:`~eigengate.analysis.modes.Mode`; diagnostics (uncertainty,
    condition number, participation factors) keep 4 significant digits, which is all they
    mean and keeps round-off from churning the file."""
    return BaselineMode(
        eigenvalue=_complex(m.eigenvalue), s=_complex(m.s), multiplicity=int(m.multiplicity),
        pair=bool(m.pair), defective=bool(m.defective), damping_ratio=_r(m.damping_ratio),
        natural_frequency=_r(m.natural_frequency), time_constant=_r(m.time_constant),
        uncertainty=_r(m.uncertainty, 4), condition=_r(m.condition, 4),
        states=tuple((str(n), _r(p, 4)) for n, p in m.top_states(TOP_STATES)))


def baseline_entry_from(result: Any, source: str | None = None,
                        written_by: str | None = None, inputs: Any = None) -> Entry:
    """The baseline entry of an analysed model (an :class:`~eigengate.scan.engine.ModelResult`);
    ``source`` replaces the model's own (a file read from git under its old name). The input
    blocks come from ``inputs`` (an :class:`~eigengate.baseline.inputs.InputSource`), else from
    the model's own ``file_inputs``; without either the entry records none."""
    from ..version import __version__

    inputs = inputs if inputs is not None else getattr(result.model, "file_inputs", None)

    model, sp, eq = result.model, result.spectrum, result.equilibrium
    return Entry(source=source or model.source, title=model.title,
                 domain="discrete" if model.sample_period is not None else "continuous",
                 sample_period=None if model.sample_period is None else _r(model.sample_period),
                 modes=tuple(mode_record(m) for m in sp.modes),
                 spectral_abscissa=_r(sp.spectral_abscissa),
                 spectral_radius=_r(sp.spectral_radius), min_damping=_r(sp.min_damping),
                 equilibrium=eq.type, stable=eq.stable, unstable=eq.unstable, center=eq.center,
                 written_by=written_by or f"eigengate {__version__}",
                 point=getattr(model, "point_id", None),
                 robustness=tuple(sorted((k, _r(v)) for k, v in
                                         figures_of(result.verdicts).items())),
                 inputs=() if inputs is None else tuple(sorted(inputs.records(),
                                                               key=lambda b: b.name)))


def _same(a: Entry, b: Entry) -> bool:
    """Equal up to round-off: figures within 1e-9 relative, diagnostics within 1e-3."""
    if (a.key, a.point, a.domain, a.equilibrium, a.stable, a.unstable, a.center,
            len(a.modes), a.inputs) != (b.key, b.point, b.domain, b.equilibrium, b.stable,
                                        b.unstable, b.center, len(b.modes), b.inputs):
        return False
    scale = max([1.0] + [abs(m.s) for m in a.modes + b.modes if math.isfinite(abs(m.s))])

    def close(x: Any, y: Any, rel: float = 1e-9) -> bool:
        if isinstance(x, complex):
            return close(x.real, y.real, rel) and close(x.imag, y.imag, rel)
        if x is None or y is None or not (math.isfinite(x) and math.isfinite(y)):
            return x == y
        return math.isclose(x, y, rel_tol=rel, abs_tol=1e-12 * scale)

    if not all(close(getattr(a, k), getattr(b, k)) for k in
               ("sample_period", "spectral_abscissa", "spectral_radius", "min_damping")):
        return False
    # robustness figures come from iterative methods: equal to their tolerance (1e-6)
    if [k for k, _ in a.robustness] != [k for k, _ in b.robustness] or not all(
            close(x, y, 1e-6) for (_, x), (_, y) in zip(a.robustness, b.robustness)):
        return False
    for m, n in zip(a.modes, b.modes):
        if (m.multiplicity, m.pair, m.defective) != (n.multiplicity, n.pair, n.defective) \
                or [s for s, _ in m.states] != [s for s, _ in n.states]:
            return False
        if not all(close(getattr(m, k), getattr(n, k)) for k in
                   ("eigenvalue", "s", "damping_ratio", "natural_frequency", "time_constant")):
            return False
        if not all(close(x, y, 1e-3) for x, y in ((m.uncertainty, n.uncertainty),
                                                  (m.condition, n.condition))) or \
                not all(abs(p - q) <= 1e-3 for (_, p), (_, q) in zip(m.states, n.states)):
            return False
    return True


@dataclass(frozen=True)
class MergeSummary:
    """What :func:`merge_write` changed, by key."""

    added: tuple[Key, ...]
    changed: tuple[Key, ...]
    removed: tuple[Key, ...]
    unchanged: tuple[Key, ...]
    written: bool


class Baseline:
    """An immutable set of entries; ``path`` names the file (or revision) it came from.

    ``unreadable`` maps model files (by today's path) that could not be loaded where the
    entries came from (a git revision) to the reason: their models are not "new", they could
    not be compared (EG210)."""

    def __init__(self, entries: Iterable[Entry] = (), path: str | None = None,
                 lines: Mapping[Key, int] | None = None,
                 unreadable: Mapping[str, str] | None = None) -> None:
        self._entries: dict[Key, Entry] = {e.key: e for e in entries}
        self.path = path
        self._lines: Mapping[Key, int] = lines if lines is not None else {}
        self.unreadable: Mapping[str, str] = dict(unreadable or {})
        self._points: dict[tuple[str, str], list[Entry]] | None = None

    @classmethod
    def load(cls, path: str | os.PathLike[str]) -> "Baseline":
        """Read the baseline at ``path``; a missing file is an empty baseline."""
        text = _read(path)
        return cls(path=os.fspath(path)) if text is None else cls.loads(text, os.fspath(path))

    @classmethod
    def loads(cls, text: str, path: str = "<baseline>") -> "Baseline":
        """Parse baseline text; every problem is a :class:`BaselineError` with its line."""
        from .fileformat import parse

        entries, lines = parse(text, path)
        return cls(entries, path=path, lines=lines)

    def entry(self, source: str, title: str) -> Entry | None:
        return self._entries.get((source, title))

    def match(self, source: str, title: str, point: str | None,
              taken: "set[Key] | frozenset[Key]" = frozenset()) -> Entry | None:
        """The entry a model compares with: the one of its title; else, when the model is an
        operating point (``point``), the entry of the same file with the same point identity
        whose key is not in ``taken`` (titles that current models claim themselves, and
        entries already matched): a point whose label changed keeps its baseline."""
        found = self._entries.get((source, title))
        if found is not None or point is None:
            return found
        if self._points is None:
            self._points = {}
            for e in self._entries.values():
                if e.point is not None:
                    self._points.setdefault((e.source, e.point), []).append(e)
        for e in self._points.get((source, point), ()):
            if e.key not in taken:
                return e
        return None

    def keys(self) -> list[Key]:
        return sorted(self._entries)

    def entries(self) -> list[Entry]:
        return [self._entries[k] for k in self.keys()]

    def line_of(self, key: Key) -> int | None:
        """Line of the entry in the file it was read from, when known."""
        return self._lines.get(key)

    def __len__(self) -> int:
        return len(self._entries)

    def __contains__(self, key: object) -> bool:
        return key in self._entries

    def __iter__(self) -> Iterator[Entry]:
        return iter(self.entries())

    def __eq__(self, other: object) -> bool:
        return isinstance(other, Baseline) and self._entries == other._entries

    __hash__ = None  # type: ignore[assignment]

    def updated(self, entries: Iterable[Entry], remove: Iterable[Key] = ()) -> "Baseline":
        """A new baseline with ``entries`` added or replacing theirs (a stored entry equal up to
        round-off is kept as it is) and the keys in ``remove`` left out."""
        out = dict(self._entries)
        for e in entries:
            old = out.get(e.key)
            if old is None or not _same(old, e):
                out[e.key] = e
        for k in remove:
            out.pop(cast(Key, tuple(k)), None)
        return Baseline(out.values(), path=self.path)

    def renamed(self, mapping: Mapping[str, str]) -> "Baseline":
        """Entries of renamed model files moved to their new source paths."""
        return Baseline((replace(e, source=mapping.get(e.source, e.source))
                         for e in self._entries.values()), path=self.path)

    def dump(self) -> str:
        """The file text: deterministic, one mode per line, trailing newline."""
        from .fileformat import dump_text

        return dump_text(self._entries.values())


def write_atomic(path: str | os.PathLike[str], text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file in the same folder and
    ``os.replace``: readers see the old file or the new one, never a part."""
    path = Path(path)
    try:
        mode = path.stat().st_mode & 0o777
    except OSError:
        mode = 0o644
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=".json", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, mode)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def _read(path: str | os.PathLike[str]) -> str | None:
    """The file's text, or None when it does not exist."""
    try:
        return Path(path).read_bytes().decode("utf-8")
    except FileNotFoundError:
        return None
    except UnicodeDecodeError as exc:
        raise BaselineError(os.fspath(path), f"is not UTF-8 text (byte offset {exc.start})",
                            hint="restore the file from version control") from None
    except OSError as exc:
        raise BaselineError(os.fspath(path), f"cannot be read: {exc.strerror or exc}"
                            ) from None


def merge_write(path: str | os.PathLike[str], new_entries: Iterable[Entry],
                removed_keys: Iterable[Key] = ()) -> MergeSummary:
    """Add or replace ``new_entries`` and drop ``removed_keys`` in the baseline at ``path``,
    under an exclusive lock: the file is read again, merged and written atomically, so
    processes accepting at the same time (pytest-xdist workers) lose no entry. Nothing is
    written when the text would not change. A corrupt baseline raises and is left alone."""
    path = Path(path)
    new_entries, removed_keys = list(new_entries), [cast(Key, tuple(k)) for k in removed_keys]
    try:
        from .fileformat import ensure_folder, locked

        ensure_folder(path.parent)
        with locked(path, LOCK_TIMEOUT):
            before = _read(path)
            old = Baseline(path=os.fspath(path)) if before is None else \
                Baseline.loads(before, os.fspath(path))
            new = old.updated(new_entries, removed_keys)
            text = new.dump()
            if text != before:
                write_atomic(path, text)
    except OSError as exc:
        raise BaselineError(os.fspath(path), f"cannot be written: {exc.strerror or exc}"
                            ) from None
    added = tuple(k for k in new.keys() if k not in old)
    removed = tuple(k for k in old.keys() if k not in new)
    changed = tuple(k for k in new.keys() if k in old and new.entry(*k) != old.entry(*k))
    touched = {e.key for e in new_entries}
    unchanged = tuple(k for k in sorted(touched) if k in old and k not in changed)
    return MergeSummary(added, changed, removed, unchanged, text != before)

