"""The pipeline every front end calls: source → models → spectra → verdicts → findings."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Iterable, Sequence

from .errors import ModelError
from .findings import Finding, error_finding, findings_of
from .model import Model

if TYPE_CHECKING:  # pragma: no cover
    from .config import Config

__all__ = ["ModelResult", "FileResult", "check_model", "check_file", "check_paths",
           "discover_model_files", "MODEL_SUFFIXES"]

MODEL_SUFFIXES = (".yaml", ".yml", ".toml", ".json")


@dataclass(frozen=True, eq=False)
class ModelResult:
    """Analysis of one model (one operating point)."""

    model: Model
    spectrum: "object"
    equilibrium: "object"
    verdicts: tuple
    findings: tuple[Finding, ...]

    @property
    def passed(self) -> bool:
        return all(v.passed for v in self.verdicts)


@dataclass(frozen=True, eq=False)
class FileResult:
    """Everything learnt from one model file: a result per operating point, or an error."""

    source: str
    results: tuple[ModelResult, ...] = ()
    error: ModelError | None = None
    findings: tuple[Finding, ...] = field(default=())

    @property
    def passed(self) -> bool:
        return self.error is None and all(r.passed for r in self.results)


def check_model(model: Model, config: "Config | None" = None) -> ModelResult:
    """Analyse one model and evaluate its requirements (the repository layers of ``config``
    below the model's own, when given)."""
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


def check_file(path: str | Path, root: str | Path | None = None,
               config: "Config | None" = None) -> FileResult:
    """Load every operating point of a model file and check it; a bad file becomes one
    invalid-model finding instead of an exception."""
    from .loader import load_models

    if root is None and config is not None:
        root = config.root
    try:
        models = load_models(path, root=root)
        results = tuple(check_model(m, config) for m in models)
    except ModelError as exc:
        return FileResult(source=exc.source, error=exc, findings=(error_finding(exc),))
    source = models[0].source if models else str(path)
    return FileResult(source=source, results=results,
                      findings=tuple(f for r in results for f in r.findings))


def _looks_like_model(path: Path) -> bool:
    try:
        with open(path, "rb") as fh:
            head = fh.read(65536)
    except OSError:
        return True  # let the loader report why it cannot be read
    return b"model_format" in head


def discover_model_files(paths: Sequence[str | Path], config: "Config | None" = None
                         ) -> list[Path]:
    """Expand folders into the model files below them, sorted; named files pass through.

    Below a folder, a file is a model file when its suffix is one of MODEL_SUFFIXES, no part
    of its path is hidden, the configuration (include/exclude globs, relative to its root)
    selects it, and, when no include globs are configured, its text has a ``model_format``
    key (so other YAML and JSON files of the repository are left alone).
    """
    out: list[Path] = []
    for p in paths:
        p = Path(p)
        if not p.is_dir():
            out.append(p)
            continue
        for f in sorted(p.rglob("*")):
            rel = f.relative_to(p).parts
            if any(part.startswith(".") for part in rel) or f.suffix not in MODEL_SUFFIXES:
                continue
            if f.name == "pyproject.toml" or not f.is_file():
                continue
            if config is not None:
                try:
                    rel_root = f.resolve().relative_to(config.root.resolve()).as_posix()
                except ValueError:
                    rel_root = f.as_posix()
                if not config.is_model_path(rel_root):
                    continue
                if config.include:
                    out.append(f)
                    continue
            if _looks_like_model(f):
                out.append(f)
    return out


def check_paths(paths: Iterable[str | Path], root: str | Path | None = None,
                config: "Config | None" = None) -> list[FileResult]:
    """Check every model file under ``paths``; one bad file never stops the others."""
    return [check_file(f, root=root, config=config)
            for f in discover_model_files(list(paths), config)]
