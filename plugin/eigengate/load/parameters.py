"""The ``parameters:`` block: uncertain parameters, each with a nominal value, a range and the
matrices it changes.

The matrices written in the plant and feedback blocks are the nominal ones; each parameter's
``affects`` gives, per matrix it changes, the coefficient of ``(p − nominal)``::

    M(p) = M_nominal + Σ_i (p_i − nominal_i) · M_i

so every matrix is affine in the parameters; the closed loop formed from them (``A − B K``,
a dynamic controller) may be polynomial or rational in them. The block is file-level: every
operating point takes it, with the point's own matrices as its nominal ones. At other parameter
values the model's matrices are formed by the same code that formed the nominal closed loop
(:class:`~eigengate.analysis.parametric.ParameterBox`).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any, Callable

from ..model.core import Model, as_matrix
from ..model.formats import suggest
from .context import _check_keys, _Ctx, _kind, _mapping, _matrix

if TYPE_CHECKING:  # pragma: no cover
    from ..analysis.parametric import ParameterBox

__all__ = ["TARGETS", "PARAMETER_KEYS", "MAX_PARAMETERS", "parse_parameters"]

#: Matrices a parameter may change, as ``block.key`` paths of the model file.
TARGETS = ("plant.A", "plant.B", "plant.C", "plant.D", "plant.E", "feedback.state_gain",
           "feedback.output_gain", "feedback.controller.A", "feedback.controller.B",
           "feedback.controller.C", "feedback.controller.D")
PARAMETER_KEYS = ("nominal", "range", "affects")
#: At most this many parameters (a box has 2^k vertices and k·2^(k−1) edges, each solved).
MAX_PARAMETERS = 6


def _get(doc: Mapping[str, Any], path: str) -> Any:
    node: Any = doc
    for part in path.split("."):
        if not isinstance(node, Mapping) or part not in node:
            return None
        node = node[part]
    return node


def _set(doc: dict[str, Any], path: str, value: Any) -> None:
    *parents, last = path.split(".")
    node = doc
    for part in parents:  # copy each mapping on the way: the document itself stays as read
        node[part] = dict(node[part])
        node = node[part]
    node[last] = value


def _number(value: Any, ctx: _Ctx, path: str, what: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) \
            or not math.isfinite(value):
        raise ctx.err(path, f"must be a finite number ({what}), got {_kind(value)} "
                      f"{value!r:.40}")
    return float(value)


def parse_parameters(doc: Mapping[str, Any], ctx: _Ctx, nominal: Model,
                     closed_loop: Callable[[Mapping[str, Any], _Ctx],
                                           tuple[Any, Any]]) -> ParameterBox:
    """The checked ``parameters`` block of ``doc`` (a file or an operating point merged into
    it) as a :class:`ParameterBox` whose ``build`` forms ``(A, E)`` with ``closed_loop``."""
    from ..analysis.parametric import ParameterBox  # noqa: F811 (only a file with parameters)

    raw = _mapping(doc["parameters"], ctx, "parameters")
    if not raw:
        raise ctx.err("parameters", "declares no parameter",
                      "give each parameter nominal, range and affects, or remove the block")
    if len(raw) > MAX_PARAMETERS:
        raise ctx.err("parameters", f"declares {len(raw)} parameters, more than the limit of "
                      f"{MAX_PARAMETERS} (the box's edges grow as k·2^(k−1))")
    given = {t: _get(doc, t) for t in TARGETS}
    resolved = {t: as_matrix(_matrix(v, ctx, t), ctx.source, ctx.prefix + t, line=ctx.line(t))
                for t, v in given.items() if v is not None and not isinstance(v, Mapping)
                or isinstance(v, Mapping) and "file" in v}
    names, nominals, lows, highs, effects = [], [], [], [], []
    for name, block in raw.items():
        path = f"parameters.{name}"
        if not isinstance(name, str) or not name.strip():
            raise ctx.err("parameters", f"has a parameter named {name!r}; names are "
                          "non-empty text")
        block = _mapping(block, ctx, path)
        _check_keys(block, PARAMETER_KEYS, ctx, path, "a parameter")
        for key in PARAMETER_KEYS:
            if key not in block:
                raise ctx.err(f"{path}.{key}", "is missing", "a parameter gives nominal, "
                              "range: [low, high] and affects: {matrix: coefficient}")
        nom = _number(block["nominal"], ctx, f"{path}.nominal", "the nominal value")
        rng = block["range"]
        if not isinstance(rng, list) or len(rng) != 2:
            raise ctx.err(f"{path}.range", f"must be [low, high], got {_kind(rng)} "
                          f"{rng!r:.40}")
        lo = _number(rng[0], ctx, f"{path}.range", "the low end")
        hi = _number(rng[1], ctx, f"{path}.range", "the high end")
        if not lo < hi:
            raise ctx.err(f"{path}.range", f"must have low < high, got [{lo:g}, {hi:g}]")
        if not lo <= nom <= hi:
            raise ctx.err(f"{path}.nominal", f"is {nom:g}, outside its range "
                          f"[{lo:g}, {hi:g}]")
        affects = _mapping(block["affects"], ctx, f"{path}.affects")
        if not affects:
            raise ctx.err(f"{path}.affects", "changes no matrix; expected e.g. "
                          "{plant.A: [[...]]}")
        effect = {}
        for target, value in affects.items():
            where = f"{path}.affects.{target}"
            if target not in TARGETS:
                close = suggest(str(target), TARGETS)
                raise ctx.err(where, f"names {target!r}, which is not a matrix a parameter "
                              "can change", f"did you mean {close!r}?" if close
                              else "matrices: " + ", ".join(TARGETS))
            if target not in resolved:
                raise ctx.err(where, f"changes {target}, which the model does not give as a "
                              "matrix", "a parameter changes matrices written in the file "
                              "(a transfer-function block has none)")
            m = as_matrix(_matrix(value, ctx, where), ctx.source, ctx.prefix + where,
                          line=ctx.line(where))
            want = resolved[target].shape
            if m.shape != want:
                raise ctx.err(where, f"must be {want[0]}×{want[1]} like {target}, got "
                              f"{m.shape[0]}×{m.shape[1]}")
            effect[target] = m
        names.append(name)
        nominals.append(nom)
        lows.append(lo)
        highs.append(hi)
        effects.append(effect)
    fixed = dict(doc)
    for t, m in resolved.items():
        _set(fixed, t, m)
    nominal_values = tuple(nominals)

    def build(values: tuple[float, ...]) -> tuple[Any, Any]:
        perturbed = dict(fixed)
        for t, m in resolved.items():
            steps = [(v - p) * eff[t] for v, p, eff in zip(values, nominal_values, effects)
                     if t in eff and v != p]
            if steps:
                _set(perturbed, t, m + sum(steps))
        return closed_loop(perturbed, ctx)

    return ParameterBox(tuple(names), nominal_values, tuple(lows), tuple(highs), build,
                        discrete=nominal.discrete,
                        descriptor=nominal.E is not None or any("plant.E" in e
                                                                 for e in effects))
