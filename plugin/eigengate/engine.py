"""The pipeline every front end calls: source → models → spectra → verdicts → findings."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterable, Sequence

from .errors import ModelError
from .findings import Finding, error_finding, findings_of
from .model import Model

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


def check_model(model: Model) -> ModelResult:
    """Analyse one model and evaluate its own requirements."""
    from .equilibrium import classify
    from .modes import analyse
    from .requirements import evaluate, split_known_modes

    spectrum = analyse(model)
    verdicts = evaluate(spectrum)
    remaining, _ = split_known_modes(spectrum, model.known_modes)
    return ModelResult(model=model, spectrum=spectrum, equilibrium=classify(remaining),
                       verdicts=verdicts, findings=tuple(findings_of(model, verdicts)))


def check_file(path: str | Path, root: str | Path | None = None) -> FileResult:
    """Load every operating point of a model file and check it; a bad file becomes one
    invalid-model finding instead of an exception."""
    from .loader import load_models

    try:
        models = load_models(path, root=root)
        results = tuple(check_model(m) for m in models)
    except ModelError as exc:
        return FileResult(source=exc.source, error=exc, findings=(error_finding(exc),))
    source = models[0].source if models else str(path)
    return FileResult(source=source, results=results,
                      findings=tuple(f for r in results for f in r.findings))


def discover_model_files(paths: Sequence[str | Path]) -> list[Path]:
    """Expand directories into the model files below them, sorted; files pass through.

    In a directory, a file counts as a model file when its suffix is one of MODEL_SUFFIXES
    and its text mentions ``model_format``; hidden folders are skipped.
    """
    out: list[Path] = []
    for p in paths:
        p = Path(p)
        if p.is_dir():
            for f in sorted(p.rglob("*")):
                rel = f.relative_to(p).parts
                if any(part.startswith(".") for part in rel) or f.suffix not in MODEL_SUFFIXES:
                    continue
                if not f.is_file():
                    continue
                try:
                    head = f.read_bytes()[:65536]
                except OSError:
                    head = b"model_format"  # let the loader report why it cannot be read
                if b"model_format" in head:
                    out.append(f)
        else:
            out.append(p)
    return out


def check_paths(paths: Iterable[str | Path], root: str | Path | None = None) -> list[FileResult]:
    """Check every model file under ``paths``; one bad file never stops the others."""
    return [check_file(f, root=root) for f in discover_model_files(list(paths))]
