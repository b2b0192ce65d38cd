"""Model files as pytest items: one per model and operating point, checked as the CLI does.

The repository policy (``[tool.eigengate]``) selects the files (``include``/``exclude``, which
the ``--eigengate-models`` globs narrow or supply) and drives every verdict through
:func:`eigengate.engine.check_model`, so ``pytest`` and ``eigengate check`` agree. A file that
cannot be loaded becomes one item that errors with file, field and reason; the other items
still run.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterator

import pytest

from ._glob import glob_match

if TYPE_CHECKING:  # pragma: no cover
    from .config import Config
    from .engine import ModelResult
    from .errors import ModelError
    from .model import Model

__all__ = ["Selection", "ModelFile", "ModelItem", "InvalidModelItem", "ModelCheckFailed"]


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
        try:
            return path.resolve().relative_to(self.config.root.resolve()).as_posix()
        except ValueError:
            return None

    def wants(self, path: Path) -> bool:
        """Whether ``path`` (a file with a model suffix) is a selected model file."""
        rel = self.relative(path)
        if rel is None or path.name == "pyproject.toml":
            return False
        if any(part.startswith(".") for part in rel.split("/")):
            return False
        if not self.config.is_model_path(rel):
            return False
        return not self.globs or any(glob_match(rel, g) for g in self.globs)


class ModelCheckFailed(Exception):
    """A model does not meet its requirements; carries the :class:`ModelResult`."""

    def __init__(self, result: "ModelResult") -> None:
        super().__init__(result.model.title)
        self.result = result


class ModelFile(pytest.File):
    """A model file: yields one :class:`ModelItem` per model (operating point)."""

    def __init__(self, *, policy: "Config", **kw: Any) -> None:
        super().__init__(**kw)
        self.policy = policy

    def collect(self) -> Iterator[pytest.Item]:
        from .errors import ModelError
        from .loader import load_models

        try:
            models = load_models(self.path, root=self.policy.root)
        except ModelError as exc:
            yield InvalidModelItem.from_parent(self, name=self.path.stem, error=exc)
            return
        for model in models:
            yield ModelItem.from_parent(self, name=model.title, model=model)


class ModelItem(pytest.Item):
    """One model (one operating point) of a model file, checked with the repository policy."""

    def __init__(self, *, model: "Model", **kw: Any) -> None:
        super().__init__(**kw)
        self.model = model
        self.result: "ModelResult | None" = None
        self.verdict: str | None = None
        self.error: "ModelError | None" = None

    def runtest(self) -> None:
        from .engine import check_model
        from .errors import ModelError

        try:
            result = check_model(self.model, self.parent.policy)
        except ModelError as exc:  # the analysis refused the model (e.g. a singular pencil)
            self.error = exc
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
            return _error_record(self.name, self.error)
        if self.result is None:
            return None
        return result_record(self.result, self.verdict or "pass")

    def repr_failure(self, excinfo, style=None):
        from .errors import ModelError
        from .report_text import model_lines

        exc = excinfo.value
        if isinstance(exc, ModelCheckFailed):
            r = exc.result
            first = next((f for f in r.findings if f.severity == "error"), None)
            line = first.line if first is not None else None
            where = r.model.source if not line else f"{r.model.source}:{line}"
            return "\n".join([f"{where}: {r.model.title} does not meet its requirements"]
                             + model_lines(r, verbose=True))
        if isinstance(exc, ModelError):  # analysis refused the model (e.g. singular pencil)
            return exc.render()
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
    from .findings import INVALID_RULE

    return {"model": name, "source": e.source, "discrete": False, "line": e.line,
            "spectral_abscissa": None, "spectral_radius": None, "min_damping": None,
            "verdict": "error",
            "findings": [{"severity": "error", "rule": INVALID_RULE[0], "name": INVALID_RULE[1],
                          "requirement": e.field, "message": e.render(), "line": e.line,
                          "table": []}]}
