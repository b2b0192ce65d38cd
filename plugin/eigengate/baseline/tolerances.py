"""Tolerances of the regression rules: how much each compared figure may change, and which way
is worse (``allowed_drift`` blocks of a policy, its path overrides and a model file).

Public API::

    Tolerance(abs=0.0, rel=0.0, worse="lower")
    Tolerances(decay_rate=..., damping=..., frequency=..., match_gate=1.5)
    parse_tolerances(value, source, prefix="allowed_drift.", lines=None, base=None) -> Tolerances
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any, Mapping

from ..errors import ModelError

__all__ = ["Tolerance", "Tolerances", "parse_tolerances", "TOLERANCE_KEYS", "FIGURE_KEYS",
           "WORSE"]

#: Keys of an ``allowed_drift`` block, and of each figure's mapping in it.
TOLERANCE_KEYS = ("decay_rate", "damping", "frequency", "stability_radius", "transient_growth",
                  "pseudospectral_abscissa", "match_gate")
FIGURE_KEYS = ("abs", "rel", "worse")
WORSE = ("lower", "higher", "either")



@dataclass(frozen=True)
class Tolerance:
    """How much one figure may change, and which way is worse."""

    abs: float = 0.0
    rel: float = 0.0
    worse: str = "lower"

    def allowed(self, before: float) -> float:
        return max(self.abs, self.rel * abs(before))

    def judge(self, before: float, after: float) -> str:
        """``"worse"``, ``"better"`` or ``"same"`` (within tolerance)."""
        if before == after or not abs(after - before) > self.allowed(before):
            return "same"
        if self.worse == "either":
            return "worse"
        return "worse" if (after < before) == (self.worse == "lower") else "better"


@dataclass(frozen=True)
class Tolerances:
    """Tolerances of every compared figure, and the matching gate."""

    decay_rate: Tolerance = Tolerance(abs=1e-6, rel=0.05, worse="lower")
    damping: Tolerance = Tolerance(abs=0.005, rel=0.05, worse="lower")
    frequency: Tolerance = Tolerance(abs=1e-6, rel=0.05, worse="either")
    stability_radius: Tolerance = Tolerance(abs=0.0, rel=0.05, worse="lower")
    transient_growth: Tolerance = Tolerance(abs=0.0, rel=0.05, worse="higher")
    pseudospectral_abscissa: Tolerance = Tolerance(abs=1e-6, rel=0.05, worse="higher")
    match_gate: float = 1.5  # matching.DEFAULT_GATE


def parse_tolerances(value: Any, source: str, prefix: str = "allowed_drift.",
                     lines: Mapping[str, int] | None = None,
                     base: Tolerances | None = None) -> Tolerances:
    """Read an ``allowed_drift`` block over ``base`` (default: :class:`Tolerances`()).

    ``{decay_rate: {abs, rel, worse}, damping: {...}, frequency: {...}, match_gate: x}``;
    every key is optional and a figure's missing keys keep ``base``'s values, so a repository
    default, path overrides and a model file's own block layer in that order.

    Raises
    ------
    ModelError
        Naming ``source``, the field (``prefix`` + key) and its line when ``lines`` has it.
    """
    base = base or Tolerances()
    lines = lines or {}
    where = prefix.rstrip(".")

    def bad(key: str, problem: str, hint: str | None = None) -> ModelError:
        path = f"{prefix}{key}" if key else where
        return ModelError(source, path, problem, line=lines.get(path) or lines.get(where),
                          hint=hint)

    def number(v: Any, key: str, positive: bool = False) -> float:
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) \
                or v < 0 or (positive and v == 0):
            raise bad(key, f"must be a {'positive' if positive else 'non-negative'} number, "
                      f"got {v!r}")
        return float(v)

    if not isinstance(value, Mapping):
        raise bad("", f"must be a mapping of {', '.join(TOLERANCE_KEYS)}, got {value!r:.60}")
    out = base
    for key, v in value.items():
        if key not in TOLERANCE_KEYS:
            from ..model.formats import suggest

            close = suggest(str(key), TOLERANCE_KEYS)
            raise bad(str(key), "is not a tolerance", f"did you mean {close!r}?" if close
                      else "known keys: " + ", ".join(TOLERANCE_KEYS))
        if key == "match_gate":
            out = replace(out, match_gate=number(v, key, positive=True))
            continue
        if not isinstance(v, Mapping):
            raise bad(key, f"must be a mapping of {', '.join(FIGURE_KEYS)}, got {v!r:.60}",
                      "for example {abs: 0.01, rel: 0.05}")
        tol = getattr(out, key)
        for k, x in v.items():
            sub = f"{key}.{k}"
            if k not in FIGURE_KEYS:
                raise bad(sub, "is not a tolerance field", "known: " + ", ".join(FIGURE_KEYS))
            if k == "worse":
                if x not in WORSE:
                    raise bad(sub, f"must be one of {', '.join(WORSE)}, got {x!r}")
                tol = replace(tol, worse=x)
            else:
                tol = replace(tol, **{k: number(x, sub)})
        out = replace(out, **{key: tol})
    return out
