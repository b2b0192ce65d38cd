"""Model files as pytest items: one per model and operating point, checked as the CLI does.

The repository policy (``[tool.eigengate]``) selects the files (``include``/``exclude``, which
the ``--eigengate-models`` globs narrow or supply) and drives every verdict through
:func:`eigengate.scan.engine.check_model`, so ``pytest`` and ``eigengate check`` agree; an
unchanged file's results come from the command line's cache (:mod:`eigengate.pytest.cached`). A file that
cannot be loaded becomes one item that errors with file, field and reason; the other items
still run.

Each item also compares its model with the accepted baseline (:class:`BaselineRun`, one per
process), or in accept mode keeps its baseline entry for the one write at the end of the
process; :class:`BaselineTally` gathers what the items report (on the xdist controller too)
into the terminal summary's counts, stale entries and commands.
"""

from __future__ import annotations

import os
import shlex
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Iterator, Sequence

import pytest

from ..rules.patterns import glob_match

if TYPE_CHECKING:  # pragma: no cover
    from ..baseline.store import Baseline, Entry
    from ..scan.config import Config
    from ..scan.engine import ModelResult
    from ..errors import ModelError
    from ..model.core import Model
    from .cached import CollectCache

__all__ = ["Selection", "ModelFile", "ModelItem", "InvalidModelItem", "ModelCheckFailed",
           "BaselineRun", "BaselineTally", "accept_command", "shown_path"]


@dataclass(frozen=True)
class Selection:
    """Which files the collector turns into items.

    ``globs`` (from the command line or the ini file) narrow the configuration's ``include``,
    or supply it when the configuration has none (the plugin collects nothing when neither
    gives a glob, except model files named on the command line).
    """

    config: "Config"
    globs: tuple[str, ...] = ()

    def relative(self, path: Path) -> str | None:
        """``path`` relative to the repository root, links resolved; None outside it."""
        from .cached import real_relative

        return real_relative(path, self.config.root)

    def wants(self, path: Path) -> bool:
        """Whether ``path`` (a file with a model suffix) is a selected model file."""
        rel = self.relative(path)
        if rel is None or path.name == "pyproject.toml":
            return False
        if any(part.startswith(".") for part in rel.split("/")):
            return False
        from ..scan.config import ConfigError

        try:
            if not self.config.is_model_path(rel):  # by the nearest policy
                return False
        except ConfigError as exc:  # a nested policy is wrong: stop, as for the root's
            raise pytest.UsageError(f"eigengate: {exc}") from None
        return not self.globs or any(glob_match(rel, g) for g in self.globs)


class ModelCheckFailed(Exception):
    """A model does not meet its requirements; carries the :class:`ModelResult`."""

    def __init__(self, result: "ModelResult") -> None:
        super().__init__(result.model.title)
        self.result = result


class ModelFile(pytest.File):
    """A model file: yields one :class:`ModelItem` per model (operating point)."""

    def __init__(self, *, policy: "Config", baseline: "BaselineRun | None" = None,
                 cache: "CollectCache | None" = None, **kw: Any) -> None:
        super().__init__(**kw)
        self.policy = policy
        self.baseline = baseline
        self.cache = cache
        self.titles: tuple[str, ...] = ()  # every model the file defines, once collected
        self._key: str | None = None
        self._refs: list[str] = []
        self._analysed: list = []  # pre-waiver results of the items run, for the cache

    def collect(self) -> Iterator[pytest.Item]:
        from ..errors import ModelError
        from ..load.loader import load_models_with_refs

        if self.cache is not None:
            self._key, cached = self.cache.lookup(self.path)
            if cached is not None:  # unchanged: the items carry their cached results
                self.titles = tuple(r.model.title for r in cached)
                for r in cached:
                    yield ModelItem.from_parent(self, name=r.model.title, model=r.model,
                                                analysed=r)
                return
        try:
            # pytest runs project code anyway: a vector field may import it (the CLI asks
            # for allow_python in the policy)
            models, self._refs = load_models_with_refs(self.path, root=self.policy.root,
                                                       allow_python=True)
        except ModelError as exc:
            yield InvalidModelItem.from_parent(self, name=self.path.stem, error=exc)
            return
        self.titles = tuple(m.title for m in models)
        self._analysed = [None] * len(models)
        for k, model in enumerate(models):
            yield ModelItem.from_parent(self, name=model.title, model=model, slot=k)

    def analysed(self, slot: int, result: "ModelResult") -> None:
        """An item's pre-waiver result; with every model's, the file goes into the cache."""
        self._analysed[slot] = result
        if self.cache is not None and self._key is not None and \
                all(r is not None for r in self._analysed):
            self.cache.put(self._key, self.path, self._analysed, self._refs)


class ModelItem(pytest.Item):
    """One model (one operating point) of a model file, checked with the repository policy."""

    parent: ModelFile

    def __init__(self, *, model: "Model", analysed: "ModelResult | None" = None,
                 slot: int | None = None, **kw: Any) -> None:
        super().__init__(**kw)
        self.model = model
        self.analysed = analysed  # from the cache: pre-waiver, not analysed again
        self.slot = slot
        self.result: "ModelResult | None" = None
        self.verdict: str | None = None
        self.error: "ModelError | None" = None
        self.baseline: dict[str, Any] | None = None  # what the baseline said, as plain data

    def runtest(self) -> None:
        from ..scan.engine import analyse_model, apply_waivers
        from ..errors import ModelError

        run = self.parent.baseline
        try:
            pre = self.analysed
            if pre is None:
                pre = analyse_model(self.model, self.parent.policy)
                if self.slot is not None:
                    self.parent.analysed(self.slot, pre)
            result = apply_waivers(pre, self.parent.policy)  # check_model, in two steps
            if run is not None:
                result, self.baseline = run.judge(result)
        except ModelError as exc:  # the analysis refused the model (e.g. a singular pencil)
            self.error = exc
            if run is not None:
                self.baseline = {"status": "error"}
            raise
        self.result = result
        failed = any(f.severity == "error" for f in result.findings)
        self.verdict = "fail" if failed else "pass"
        if failed:
            raise ModelCheckFailed(result)

    def record(self) -> dict[str, Any] | None:
        """Figures and findings as plain data, once the item has run."""
        from .assertions import result_record

        if self.error is not None:
            record = _error_record(self.name, self.error)
        elif self.result is None:
            return None
        else:
            record = result_record(self.result, self.verdict or "pass")
        if self.baseline is not None:
            # the key and every model of the file: the controller finds stale entries with them
            record["baseline"] = {**self.baseline, "key": [self.model.source, self.model.title],
                                  "file_models": list(self.parent.titles)}
        return record

    def repr_failure(self, excinfo, style=None):
        from ..errors import ModelError
        from ..reports.text import model_lines

        exc = excinfo.value
        if isinstance(exc, ModelCheckFailed):
            r = exc.result
            first = next((f for f in r.findings if f.severity == "error"), None)
            line = first.line if first is not None else None
            where = r.model.source if not line else f"{r.model.source}:{line}"
            errors = [f for f in r.findings if f.severity == "error"]
            regressed = [f for f in errors if f.requirement == "baseline"]
            what = "does not meet its requirements"
            if regressed:
                ref = f"its baseline entry ({self.parent.policy.baseline})"
                what = f"regressed from {ref}" if len(regressed) == len(errors) else \
                    f"does not meet its requirements and regressed from {ref}"
            return "\n".join([f"{where}: {r.model.title} {what}"]
                             + model_lines(r, verbose=True))
        if isinstance(exc, ModelError):  # analysis refused the model (e.g. singular pencil)
            return exc.render()
        from ..baseline.store import BaselineError

        if isinstance(exc, BaselineError):  # the baseline could not be read
            return str(exc)
        return super().repr_failure(excinfo, style)

    def reportinfo(self):
        line = self.model.line_of("requirements") or self.model.line_of("plant") or 1
        return self.path, line - 1, f"{self.model.source}::{self.name}"


class InvalidModelItem(pytest.Item):
    """A model file that could not be loaded: errors at setup with file, field and reason."""

    def __init__(self, *, error: "ModelError", **kw: Any) -> None:
        super().__init__(**kw)
        self.error = error

    def setup(self) -> None:
        pytest.fail(self.error.render(), pytrace=False)

    def runtest(self) -> None:  # pragma: no cover - setup always fails
        raise AssertionError(self.error.render())

    def record(self) -> dict[str, Any]:
        return _error_record(self.name, self.error)

    def reportinfo(self):
        return self.path, (self.error.line or 1) - 1, f"{self.error.source}::{self.name}"


def _error_record(name: str, e: "ModelError") -> dict[str, Any]:
    """The plain-data record of a model that could not be loaded or analysed."""
    from ..rules.findings import INVALID_RULE

    return {"model": name, "source": e.source, "discrete": False, "line": e.line,
            "spectral_abscissa": None, "spectral_radius": None, "min_damping": None,
            "verdict": "error",
            "findings": [{"severity": "error", "rule": INVALID_RULE[0], "name": INVALID_RULE[1],
                          "requirement": e.field, "message": e.render(), "line": e.line,
                          "table": []}]}


# ---------------------------------------------------------------------------- baseline
class BaselineRun:
    """The baseline side of one pytest process (the main process, or one xdist worker).

    The accepted baseline is read once, on first use, and kept; every item compares its
    model with it through :func:`eigengate.scan.baseline_check.compare_result`. With ``accept``
    the items compare nothing: each keeps its model's entry, and :meth:`write` adds them all
    to the file in one locked, atomic merge (:func:`eigengate.baseline.store.merge_write`) when the
    process ends, so workers accepting at once lose no entry. Entries are never removed here:
    under xdist a file's items may run on several workers, and no worker sees them all.
    """

    def __init__(self, policy: Callable[[], "Config"], *, accept: bool = False) -> None:
        self._policy = policy
        self.accept = accept
        self.entries: list["Entry"] = []
        self._baseline: "Baseline | None" = None
        self._error: Exception | None = None  # a BaselineError, once met
        self._loaded = False
        #: nested policies' baselines, by file (each policy keeps its own, next to it)
        self._nested: dict[Path, "Baseline | None"] = {}
        self._nested_entries: dict[Path, list["Entry"]] = {}

    @property
    def policy(self) -> "Config":
        return self._policy()

    def baseline(self) -> "Baseline | None":
        """The accepted baseline, or None when none exists yet; read once.

        Raises
        ------
        BaselineError
            The file cannot be read or is not a valid baseline (raised again on every call).
        """
        if self._error is not None:
            raise self._error
        if not self._loaded:
            from ..scan.baseline_check import reference_baseline

            try:  # (no baseline file: the baseline modules are not even imported)
                self._baseline = reference_baseline(self.policy)
            except Exception as exc:
                from ..baseline.store import BaselineError

                if isinstance(exc, BaselineError):  # kept: every later use says the same
                    self._error = exc
                raise
            self._loaded = True
        return self._baseline

    def read(self) -> "tuple[Baseline | None, Exception | None]":
        """``(baseline, None)``, or ``(None, the BaselineError met reading it)``."""
        try:
            return self.baseline(), None
        except Exception as exc:
            from ..baseline.store import BaselineError  # only now: none without a file

            if not isinstance(exc, BaselineError):
                raise
            return None, exc

    def _nested_baseline(self, policy: "Config") -> "Baseline | None":
        path = policy.baseline_path
        if path not in self._nested:
            from ..baseline.store import Baseline

            self._nested[path] = Baseline.load(path) if path.is_file() else None
        return self._nested[path]

    def judge(self, result: "ModelResult") -> tuple["ModelResult", dict[str, Any]]:
        """The result with its regression findings, and what the baseline said as plain data
        (``status``: ``accepted``, ``unbaselined`` (no baseline file), ``new`` or
        ``compared``; ``regressed``; ``improvements``)."""
        own = self.policy.policy_for(result.model.source)
        if self.accept:
            from ..scan.baseline_check import entry_of

            entry = entry_of(result, self.policy)
            if own is self.policy:
                self.entries.append(entry)
            else:
                self._nested_entries.setdefault(own.baseline_path, []).append(entry)
            return result, {"status": "accepted"}
        baseline = self.baseline() if own is self.policy else self._nested_baseline(own)
        if baseline is None:
            return result, {"status": "unbaselined"}
        from ..scan.baseline_check import compare_result

        matched = baseline.match(result.model.source, result.model.title,
                                 getattr(result.model, "point_id", None))
        result, comparison = compare_result(result, self.policy, baseline)
        return result, {
            "status": "new" if matched is None else "compared",
            "matched": None if matched is None else list(matched.key),
            "regressed": sorted({f.rule for f in comparison.regressions
                                 if f.severity == "error"}),
            "improvements": [f"{i.title} ({i.source}): {i.message}"
                             for i in comparison.improvements]}

    def write(self) -> dict[str, Any] | None:
        """Write the kept entries (nothing when there are none); what changed, as plain data.

        Raises
        ------
        BaselineError
            The baseline cannot be locked, read or written; the file is left as it was.
        """
        if not self.entries and not self._nested_entries:
            return None
        from ..baseline.store import merge_write

        batches = ([(self.policy.baseline_path, self.entries)] if self.entries else []) + \
            sorted(self._nested_entries.items())
        self.entries, self._nested_entries = [], {}
        counts = {"added": 0, "changed": 0, "unchanged": 0, "written": False}
        for path, entries in batches:
            summary = merge_write(path, entries)
            for key in ("added", "changed", "unchanged"):
                counts[key] += len(getattr(summary, key))
            counts["written"] = counts["written"] or summary.written
        return counts


class BaselineTally:
    """What the model items said about the baseline, gathered from their reports (on the
    xdist controller, from every worker), and the summary lines it comes to."""

    def __init__(self) -> None:
        self.records: list[dict[str, Any]] = []
        self.writes: list[dict[str, Any]] = []
        self.write_errors: list[str] = []

    def add(self, nodeid: str, record: dict[str, Any]) -> None:
        if record.get("baseline") is not None:
            self.records.append({**record["baseline"], "nodeid": nodeid})

    def add_write(self, written: dict[str, Any] | None, error: str | None = None) -> None:
        if written:
            self.writes.append(written)
        if error:
            self.write_errors.append(error)

    def __bool__(self) -> bool:
        return bool(self.records or self.writes or self.write_errors)

    def stale(self, baseline: "Baseline | None", root: Path
              ) -> list[tuple[tuple[str, str], str]]:
        """Stale entries: models of the files the items came from that the files no longer
        define, and entries of model files that are gone."""
        if baseline is None:
            return []
        from ..scan.baseline_check import stale_entries

        models: dict[str, set[str]] = {}
        for r in self.records:
            if r.get("file_models"):
                models.setdefault(r["key"][0], set()).update(r["file_models"])
            if r.get("matched"):  # an operating point compared under its old title
                models.setdefault(r["matched"][0], set()).add(r["matched"][1])
        return stale_entries(baseline, models, root)

    def lines(self, baseline: "Baseline | None", policy: "Config", *, paths: Sequence[str],
              options: Sequence[str], config_flag: str | None, here: Path) -> list[str]:
        """The summary: counts, the models concerned and the exact commands, built from the
        ``paths`` and eigengate ``options`` the run was given (``config_flag``: the policy
        file named on the command line), relative to the invocation folder ``here``."""
        from ..scan.baseline_check import accept_command as cli_accept_command

        stale = self.stale(baseline, policy.root)
        gone = any(not (policy.root / source).exists() for (source, _), _ in stale)
        # stale entries of existing files go with those files; a gone file needs a full run
        files = [] if gone else sorted({shown_path(policy.root / source, here)
                                        for (source, _), _ in stale})
        return self._lines(policy.baseline, stale, accept=accept_command(paths, options),
                           remove=cli_accept_command(files, config_flag) or "")

    def _lines(self, baseline_shown: str, stale: Sequence[tuple[tuple[str, str], str]], *,
               accept: str, remove: str) -> list[str]:
        by: dict[str, list[dict[str, Any]]] = {}
        for r in self.records:
            by.setdefault(r["status"], []).append(r)
        out = []
        stale_lines = [f"stale: {source}::{title}: {why}" for (source, title), why in stale]
        n_stale = _count(len(stale), "stale entry", "stale entries")
        if by.get("accepted") or self.writes or self.write_errors:
            n = len(by.get("accepted", ()))
            counts = {k: sum(w[k] for w in self.writes) for k in ("added", "changed",
                                                                  "unchanged")}
            line = (f"baseline {baseline_shown}: {_count(n, 'model')} accepted: "
                    + ", ".join(f"{v} {k}" for k, v in counts.items()))
            if self.writes and not any(w["written"] for w in self.writes):
                line += " (file unchanged)"
            out.append(line)
            failed = by.get("error", ())
            if failed:
                out.append("not accepted (could not be analysed; entries kept): "
                           + ", ".join(r["nodeid"] for r in failed))
            out += [f"not written: {e}" for e in self.write_errors]
            if stale:
                out.append(f"{n_stale} kept (pytest --eigengate-accept adds and updates "
                           "entries, it never removes one):")
                out += [f"  {s}" for s in stale_lines]
                out.append(f"remove stale entries with: {remove}")
            return out
        if by.get("unbaselined"):
            n = len(by["unbaselined"])
            return [f"no baseline yet ({baseline_shown}): {_count(n, 'model')} not compared; "
                    f"to accept the current models as the baseline: {accept}"]
        compared = by.get("compared", []) + by.get("new", [])
        regressed = [r for r in compared if r.get("regressed")]
        new = by.get("new", [])
        better = [i for r in compared for i in r.get("improvements", ())]
        if not (regressed or new or stale or better):
            return out
        out.append(f"baseline {baseline_shown}: {_count(len(compared), 'model')} compared: "
                   f"{len(regressed)} regressed, {len(new)} new (no baseline entry), "
                   f"{n_stale}, {_count(len(better), 'improvement')}")
        out += [f"regressed: {r['nodeid']} ({', '.join(r['regressed'])})" for r in regressed]
        out += [f"new: {r['nodeid']}" for r in new]
        out += stale_lines
        out += [f"improved: {i}" for i in better]
        if regressed or new or better:
            out.append(f"after review, accept the current models with: {accept}")
        if stale:
            out.append(f"remove stale entries with: {remove}")
        return out


def _count(n: int, one: str, many: str | None = None) -> str:
    return f"{n} {one if n == 1 else many or one + 's'}"


def shown_path(path: Path, here: Path) -> str:
    """``path`` relative to the folder ``here``, as a command typed there would name it."""
    try:
        return os.path.relpath(path, here)
    except ValueError:  # another drive on Windows
        return str(path)


def accept_command(paths: Sequence[str], options: Sequence[str] = ()) -> str:
    """The exact pytest command that accepts the models of ``paths`` (as given on the
    command line) with the eigengate ``options`` that selected them."""
    return " ".join(shlex.quote(os.fspath(p)) for p in
                    ["pytest", "--eigengate-accept", *options, *paths])
