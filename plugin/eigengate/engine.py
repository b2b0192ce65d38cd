"""The pipeline every front end calls: source → models → spectra → verdicts → findings."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Iterable, Sequence

from .errors import ModelError
from .findings import Finding, error_finding, findings_of
from .model import Model

if TYPE_CHECKING:  # pragma: no cover
    import datetime

    from .config import Config

__all__ = ["ModelResult", "FileResult", "analyse_model", "apply_waivers", "check_model",
           "analyse_file", "file_result", "check_file", "check_paths",
           "discover_model_files", "find_model_files", "FoundFile", "policy_findings",
           "MODEL_SUFFIXES"]

MODEL_SUFFIXES = (".yaml", ".yml", ".toml", ".json")


@dataclass(frozen=True, eq=False)
class ModelResult:
    """Analysis of one model (one operating point)."""

    model: Model
    spectrum: "object"
    equilibrium: "object"
    verdicts: tuple
    findings: tuple[Finding, ...]
    waived: tuple[Finding, ...] = ()
    used_waivers: tuple = ()

    @property
    def passed(self) -> bool:
        """No finding of severity error (waived findings do not count)."""
        return not any(f.severity == "error" for f in self.findings)


@dataclass(frozen=True, eq=False)
class FileResult:
    """Everything learnt from one model file: a result per operating point, or an error.

    ``findings`` holds the findings of every operating point plus the file's own (invalid
    file, expired or unused waivers of the file).
    """

    source: str
    results: tuple[ModelResult, ...] = ()
    error: ModelError | None = None
    findings: tuple[Finding, ...] = field(default=())

    @property
    def passed(self) -> bool:
        return not any(f.severity == "error" for f in self.findings)

    @property
    def used_waivers(self) -> tuple:
        return tuple(w for r in self.results for w in r.used_waivers)


def analyse_model(model: Model, config: "Config | None" = None) -> ModelResult:
    """Analyse one model and evaluate its requirements (the repository layers of ``config``
    below the model's own, when given); no waivers applied yet."""
    from .equilibrium import classify
    from .modes import analyse
    from .requirements import evaluate, split_known_modes

    if config is not None:
        model = config.effective(model)
    spectrum = analyse(model)
    verdicts = evaluate(spectrum)
    remaining, _ = split_known_modes(spectrum, model.known_modes)
    return ModelResult(model=model, spectrum=spectrum, equilibrium=classify(remaining),
                       verdicts=verdicts, findings=tuple(findings_of(model, verdicts, config)))


def apply_waivers(result: ModelResult, config: "Config | None" = None,
                  on: "datetime.date | None" = None) -> ModelResult:
    """Set aside the findings that a live waiver of the model file or the policy accepts."""
    from dataclasses import replace

    from .waivers import split_waived, today

    model = result.model
    waivers = model.waivers + (config.waivers_for(model.source) if config else ())
    if not waivers:
        return result
    kept, waived = split_waived(result.findings, waivers, on or today())
    return replace(result, findings=tuple(kept), waived=tuple(f for f, _ in waived),
                   used_waivers=tuple(w for _, w in waived))


def check_model(model: Model, config: "Config | None" = None,
                on: "datetime.date | None" = None) -> ModelResult:
    """:func:`analyse_model` then :func:`apply_waivers`; ``on`` is the date waivers are
    judged on (default: today)."""
    return apply_waivers(analyse_model(model, config), config, on)


def file_result(source: str, results: Sequence[ModelResult], error: ModelError | None,
                config: "Config | None" = None, on: "datetime.date | None" = None
                ) -> FileResult:
    """Assemble a file's result from its analysed (pre-waiver) models: waivers applied, and
    the file's expired or unused waivers reported."""
    from .waivers import today, waiver_findings

    if error is not None:
        return FileResult(source=error.source, error=error, findings=(error_finding(error),))
    on = on or today()
    results = tuple(apply_waivers(r, config, on) for r in results)
    first = results[0].model
    own = waiver_findings(first.waivers, [w for r in results for w in r.used_waivers], on,
                          model=first.name)
    return FileResult(source=source, results=results,
                      findings=tuple(f for r in results for f in r.findings) + tuple(own))


def analyse_file(path: str | Path, root: str | Path | None = None,
                 config: "Config | None" = None
                 ) -> tuple[str, tuple[ModelResult, ...], ModelError | None, list[str]]:
    """Load and analyse a model file without waivers: (source, results, error, referenced
    matrix files). The cache stores exactly this."""
    from .loader import load_models_with_refs

    if root is None and config is not None:
        root = config.root
    try:
        models, refs = load_models_with_refs(
            path, root=root, allow_python=bool(getattr(config, "allow_python", False)))
        return models[0].source, tuple(analyse_model(m, config) for m in models), None, refs
    except ModelError as exc:
        return exc.source, (), exc, []


def check_file(path: str | Path, root: str | Path | None = None,
               config: "Config | None" = None, on: "datetime.date | None" = None
               ) -> FileResult:
    """Load every operating point of a model file and check it; a bad file becomes one
    invalid-model finding instead of an exception. Expired and unused waivers written in the
    file are findings of the file."""
    source, results, error, _ = analyse_file(path, root, config)
    return file_result(source, results, error, config, on)


#: Bytes of a file read to tell whether it is a model file; a model file read whole while
#: discovering it is kept (for the cache key) up to this many bytes.
_SNIFF_BYTES = 65536
_KEEP_BYTES = 1 << 18


@dataclass(frozen=True, eq=False)
class FoundFile:
    """A discovered model file: its path, its path relative to the configuration's root
    after resolving links (what include and exclude globs match, and a stable identity for
    the cache), and its bytes when discovery read them whole (None otherwise)."""

    path: Path
    rel: str
    content: bytes | None = None


def _sniff(path: str) -> tuple[bool, bytes | None]:
    """Whether a file looks like a model file (has a ``model_format`` key near its start),
    and its bytes when it does and is small enough to keep."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(_SNIFF_BYTES)
            if b"model_format" not in head:
                return False, None
            if len(head) < _SNIFF_BYTES:
                return True, head
            rest = fh.read(_KEEP_BYTES)
            return True, (head + rest if len(rest) < _KEEP_BYTES else None)
    except OSError:
        return True, None  # let the loader report why it cannot be read


def discover_model_files(paths: Sequence[str | Path], config: "Config | None" = None,
                         *, filter_named: bool = False) -> list[Path]:
    """Expand folders into the model files below them, sorted; named files pass through.

    Below a folder, a file is a model file when its suffix is one of MODEL_SUFFIXES, no part
    of its path is hidden, the configuration (include/exclude globs, relative to its root)
    selects it, and, when no include globs are configured, its text has a ``model_format``
    key (so other YAML and JSON files of the repository are left alone). ``filter_named``
    applies the same test to named files (a pre-commit hook is handed every changed file).
    """
    return [f.path for f in find_model_files(paths, config, filter_named=filter_named)]


def find_model_files(paths: Sequence[str | Path], config: "Config | None" = None,
                     *, filter_named: bool = False) -> list[FoundFile]:
    """:func:`discover_model_files`, with each file's resolved relative path and, when the
    selection read it whole, its bytes."""
    import os

    root = os.path.realpath(config.root) if config is not None else os.path.realpath(".")
    out: list[FoundFile] = []
    for p in paths:
        p = Path(p)
        if not p.is_dir():
            rel = _rel(os.path.realpath(p), root)
            keep, content = _select(os.fspath(p), rel, config) if filter_named else (True, None)
            if keep:
                out.append(FoundFile(p, rel, content))
            continue
        found: list[tuple[str, str, bytes | None]] = []
        stack = [os.fspath(p)]
        while stack:  # like os.walk: hidden entries skipped, linked folders not followed
            folder = stack.pop()
            real_folder = _rel(os.path.realpath(folder), root)
            try:
                entries = list(os.scandir(folder))
            except OSError:
                continue
            for e in entries:
                if e.name.startswith("."):
                    continue
                try:
                    if e.is_dir(follow_symlinks=False):
                        stack.append(e.path)
                        continue
                    if e.is_symlink():
                        if os.path.isdir(e.path):
                            continue
                        rel = _rel(os.path.realpath(e.path), root)
                    else:
                        rel = e.name if real_folder == "." else f"{real_folder}/{e.name}"
                except OSError:
                    continue
                keep, content = _select(e.path, rel, config)
                if keep:
                    found.append((e.path, rel, content))
        found.sort(key=lambda t: t[0])
        out.extend(FoundFile(Path(f), rel, content) for f, rel, content in found)
    return out


def _rel(real: str, root: str) -> str:
    import os

    return os.path.relpath(real, root).replace(os.sep, "/")


def _select(full: str, rel: str, config: "Config | None") -> tuple[bool, bytes | None]:
    import os

    name = os.path.basename(full)
    if name == "pyproject.toml" or os.path.splitext(name)[1] not in MODEL_SUFFIXES:
        return False, None
    if config is not None:
        if not config.is_model_path(rel):
            return False, None
        if config.include:
            return True, None
    return _sniff(full)


def check_paths(paths: Iterable[str | Path], root: str | Path | None = None,
                config: "Config | None" = None, on: "datetime.date | None" = None
                ) -> list[FileResult]:
    """Check every model file under ``paths``; one bad file never stops the others."""
    return [check_file(f, root=root, config=config, on=on)
            for f in discover_model_files(list(paths), config)]


def policy_findings(config: "Config", results: Sequence[FileResult],
                    on: "datetime.date | None" = None) -> list[Finding]:
    """Expired and unused waivers of the repository policy, judged over a whole run."""
    from .waivers import today, waiver_findings

    used = [w for fr in results for w in fr.used_waivers]
    return waiver_findings(config.waivers, used, on or today())
