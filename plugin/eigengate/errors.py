"""Errors raised for bad model input: each names the file, the field, what was found and what was expected."""

from __future__ import annotations

__all__ = ["ModelError", "EigengateError"]


class EigengateError(Exception):
    """Base class of every error eigengate raises on purpose."""


class ModelError(EigengateError, ValueError):
    """A model source is malformed.

    Parameters
    ----------
    source
        The file (repository-relative where known) or ``"<arrays>"`` for in-memory models.
    field
        Dotted path of the offending field, for example ``"plant.A"``; ``""`` for the whole file.
    problem
        What is wrong, with the found and expected values, for example
        ``"must be square, got 3×4"``.
    line
        1-based line in the file where the field is defined, when known.
    hint
        How to fix it, when there is something useful to say.
    """

    def __init__(
        self,
        source: str,
        field: str,
        problem: str,
        *,
        line: int | None = None,
        hint: str | None = None,
    ) -> None:
        self.source = source
        self.field = field
        self.problem = problem
        self.line = line
        self.hint = hint
        super().__init__(self.render())

    def render(self) -> str:
        where = self.source if self.line is None else f"{self.source}:{self.line}"
        what = f"{self.field} {self.problem}" if self.field else self.problem
        text = f"{where}: {what}"
        if self.hint:
            text += f" ({self.hint})"
        return text

    def __reduce__(self):  # keep the fields when sent between processes
        return (
            _rebuild,
            (self.source, self.field, self.problem, self.line, self.hint),
        )


def _rebuild(source, field, problem, line, hint):
    return ModelError(source, field, problem, line=line, hint=hint)


def counted(n: int, one: str, many: str | None = None) -> str:
    """``1 eigenvalue``, ``2 eigenvalues``, ``1 equilibrium``, ``3 equilibria``: a count
    with its noun in the right number, for every message (``many`` where the plural is not
    ``one + "s"``)."""
    return f"{n} {one if n == 1 else many or one + 's'}"
