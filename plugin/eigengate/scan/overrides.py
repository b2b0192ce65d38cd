"""A policy's overrides: requirements and policy for the model files matching some globs
(``[[tool.eigengate.overrides]]``), imported only by a policy that has them."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Mapping

from ..rules.patterns import glob_match

if TYPE_CHECKING:  # pragma: no cover
    from ..rules.requirements import Requirement

__all__ = ["Override"]


@dataclass(frozen=True)
class Override:
    """Requirements and policy for the model files matching ``paths``."""

    paths: tuple[str, ...]
    requirements: tuple[tuple["Requirement", ...], tuple[str, ...]] = ((), ())  # a layer
    on_uncertain: str | None = None
    allowed_drift: Mapping[str, Any] | None = None
    require: str | None = None

    def applies(self, rel: str) -> bool:
        return any(glob_match(rel, p) for p in self.paths)
