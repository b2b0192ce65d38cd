"""The ``vector_field`` block of a model file: its keys checked, the function imported, and
one linearised :class:`~eigengate.model.core.Model` per operating point or equilibrium found
(the numbers themselves are :mod:`eigengate.analysis.nonlinear`'s)."""

from __future__ import annotations

import dataclasses
import itertools
import math
from pathlib import Path
from collections.abc import Mapping
from typing import Any, Callable

from ..analysis.nonlinear import FieldPoint, VectorField, _vec, import_function, linearise
from ..model.core import Model
from .inputs import ModelInputs
from .context import _check_keys, _mapping, label_shape, point_identity

__all__ = ["load_vector_field", "VECTOR_FIELD_KEYS"]

VECTOR_FIELD_KEYS = ("function", "jacobian", "parameters", "states", "inputs", "at",
                     "equilibria", "sweep")
AT_KEYS = ("label", "id", "x", "u", "requirements")
EQUILIBRIA_KEYS = ("box", "starts", "u", "tolerance")


def _numbers(value: Any, ctx: Any, path: str, size: int | None) -> tuple[float, ...]:
    ok = isinstance(value, list) and all(isinstance(v, (int, float)) and not isinstance(v, bool)
                                         and math.isfinite(v) for v in value)
    if not ok or len(value) != (len(value) or 1 if size is None else size):
        raise ctx.err(path, f"must be a list of {size or 'some'} finite numbers, got "
                      f"{value!r:.60}")
    return tuple(float(v) for v in value)


_NO_LOOP = "a vector field has no loop to break: remove the requirement"


def load_vector_field(data: Mapping[str, Any], ctx: Any, name: str,
                      parse_requirements: Callable[..., tuple]) -> list[Model]:
    """Models of a model file with a ``vector_field`` block (called by the loader)."""
    from ..rules.applicability import refuse_unmet
    from ..rules.loop_requirements import LOOP_RULES, POINT_RULES, SET_RULES
    from ..rules.requirements import apply_layers

    for key in [k for k in ("plant", "feedback", "operating_points", "grid", "loop")
                if k in data]:
        raise ctx.err(key, "cannot be combined with vector_field", "a vector field file "
                      "gives its operating points under vector_field.at")
    if ctx.domain != "continuous":
        raise ctx.err("domain", "must be continuous for a vector field (x' = f(x, u))")
    if "waivers" in data:
        from ..rules.waivers import parse_waivers
        ctx.waivers = parse_waivers(data["waivers"], ctx.source, "waivers", ctx.lines)
    block = _mapping(data["vector_field"], ctx, "vector_field")
    _check_keys(block, VECTOR_FIELD_KEYS, ctx, "vector_field", "vector_field")
    if "function" not in block:
        raise ctx.err("vector_field.function", "is missing", "name it as 'module:function'")
    if not ctx.allow_python:
        raise ctx.err("vector_field.function", f"imports project code ({block['function']}), "
                      "which is off unless allowed", "set allow_python = true under "
                      "[tool.eigengate] in pyproject.toml, or pass allow_python=True")
    root = Path(ctx.python_root or ctx.root or ctx.base_dir or ".")
    fns = {}
    for key in ("function", "jacobian"):
        if key in block:
            fns[key], file = import_function(block[key], root, ctx.source,
                                             ctx.prefix + f"vector_field.{key}",
                                             ctx.line(f"vector_field.{key}"))
            if file is not None and root.resolve() in file.parents:
                ctx.refs.append(file.relative_to(root.resolve()).as_posix())
    states, inputs = block.get("states"), block.get("inputs", [])
    for key, names in (("states", states), ("inputs", inputs)):
        if not isinstance(names, list) or not all(isinstance(v, str) for v in names) or not (
                names or key == "inputs"):
            raise ctx.err(f"vector_field.{key}", f"must be a list of names, got {names!r:.60}")
    assert isinstance(states, list) and isinstance(inputs, list)  # checked just above
    params = dict(_mapping(block.get("parameters", {}), ctx, "vector_field.parameters"))
    for k, v in params.items():
        _numbers([v], ctx, f"vector_field.parameters.{k}", 1)
    sweep = _mapping(block.get("sweep", {}), ctx, "vector_field.sweep")
    grids = {k: _numbers(v, ctx, f"vector_field.sweep.{k}", None) for k, v in sweep.items()}
    n, m = len(states), len(inputs)
    base = VectorField(fns["function"], tuple(states), tuple(inputs), params,
                       fns.get("jacobian"), block["function"], ctx.source,
                       ctx.prefix + "vector_field.function")
    box = None  # (lower, upper, u, starts, tolerance)
    if "equilibria" in block:
        eq = _mapping(block["equilibria"], ctx, "vector_field.equilibria")
        _check_keys(eq, EQUILIBRIA_KEYS, ctx, "vector_field.equilibria", "equilibria")
        where = "vector_field.equilibria.box"
        sides = _mapping(eq.get("box"), ctx, where)
        _check_keys(sides, tuple(states), ctx, where, "the box (a [low, high] per state)")
        for s in states:
            if s not in sides:
                raise ctx.err(where, f"gives no range for state {s!r}",
                              "give every state a [low, high] range")
            a, b = _numbers(sides[s], ctx, f"{where}.{s}", 2)
            if not a < b:
                raise ctx.err(f"{where}.{s}", f"must have low < high, got {[a, b]}")
        lo, hi = zip(*(_numbers(sides[s], ctx, where, 2) for s in states))
        starts = eq.get("starts", 64)
        if isinstance(starts, bool) or not isinstance(starts, int) or not 1 <= starts <= 100000:
            raise ctx.err("vector_field.equilibria.starts", f"must be an integer from 1 to "
                          f"100000, got {starts!r}")
        tol = _numbers([eq.get("tolerance", 1.0)], ctx, "vector_field.equilibria.tolerance", 1)
        box = (lo, hi, _numbers(eq.get("u", [0.0] * m), ctx, "vector_field.equilibria.u", m),
               starts, tol[0] if "tolerance" in eq else None)
    top, top_off, known = parse_requirements(data, ctx, states)
    for r in [r for r in top if r.rule in LOOP_RULES][:1]:
        raise ctx.err(f"requirements.{r.info.key}", "asks for a loop margin, but a vector field "
                      "has no loop", _NO_LOOP)
    for r in [r for r in top if r.needs == "parameters"][:1]:
        raise ctx.err(f"requirements.{r.info.key}", "needs declared parameter ranges, which "
                      "a vector field model has none of", "parameter ranges are declared on "
                      "a linear model (plant and a parameters block): remove the requirement")
    points = block.get("at")
    if points is None and box is None:
        raise ctx.err("vector_field", "needs at (operating points) or equilibria (a box to "
                      "search)", "add at: [{label: ..., x: [...]}]")
    for r in [r for r in top if r.rule in SET_RULES and box is None][:1]:
        raise ctx.err("vector_field.equilibria", f"is missing, but requirements.{r.info.key} "
                      "counts or classifies the equilibria in a box",
                      "add equilibria: {box: {...}}")
    at: list[tuple[str, tuple, tuple, tuple, tuple]] = []
    idents: list[str | None] = []
    if points is not None:
        ids: dict[str, int] = {}  # explicit ids, checked unique
        if not isinstance(points, list) or not points:
            raise ctx.err("vector_field.at", "must be a non-empty list of operating points")
        seen: set[str] = set()
        for i, p in enumerate(points):
            path = f"vector_field.at[{i}]"
            _check_keys(_mapping(p, ctx, path), AT_KEYS, ctx, path, "an operating point")
            label = p.get("label")
            if not isinstance(label, str) or not label.strip() or label in seen:
                raise ctx.err(f"{path}.label", f"must be a unique non-empty string, got {label!r}")
            seen.add(label)
            pctx = dataclasses.replace(ctx, prefix=ctx.prefix + f"{path} (label {label!r}).")
            idents.append(point_identity(p, i, pctx, ids))
            own = parse_requirements({"requirements": p.get("requirements", {})}, pctx, states)
            refuse_unmet(own[0], ("vector field",) + (("equilibria box",) if box else ()),
                         pctx.err, hints={"loop": _NO_LOOP})
            at.append((label, _numbers(p.get("x"), ctx, f"{path}.x", n),
                       _numbers(p.get("u", [0.0] * m), ctx, f"{path}.u", m), *own[:2]))
    models: list[Model] = []  # product() of no grids is one empty combination: no sweep
    for place in itertools.product(*(range(len(g)) for g in grids.values())):
        combo = tuple(g[i] for g, i in zip(grids.values(), place))
        tag = ", ".join(f"{k}={v:g}" for k, v in zip(grids, combo))
        at_sweep = "@" + ",".join(map(str, place)) + "/" if grids else ""
        vf = dataclasses.replace(base, parameters={**params, **dict(zip(grids, combo))})
        shared: dict = {}  # the search, once per parameter set
        rows = list(at)
        if points is None:  # the equilibria found are the operating points
            assert box is not None  # refused above: no points and no box
            search = FieldPoint(vf, (), (), True, None, box, shared).search()
            assert search is not None  # a box is always searched
            rows = [(f"x*={_vec(e.x)}", e.x, box[2], (), ()) for e in search.equilibria]
            if not rows:
                if not any(r.rule in SET_RULES + POINT_RULES for r in top):
                    raise ctx.err("vector_field.equilibria", f"found no equilibrium in the box"
                                  f"{' for ' + tag if tag else ''}: {search.describe()}",
                                  "widen the box, add starts, or list operating points under at")
                centre = tuple((a + b) / 2 for a, b in zip(box[0], box[1]))
                rows = [("box centre", centre, box[2], (), ())]
        for j, (label, x, u, own, own_off) in enumerate(rows):
            full, carrier = (", ".join(t for t in (tag, lb) if t) for lb in (label, rows[0][0]))
            reqs = apply_layers([(top, top_off), (own, own_off)])
            if j:  # set-level requirements are judged once per parameter set
                reqs = tuple(r for r in reqs if r.rule not in SET_RULES + POINT_RULES)
            elif points is None and label == "box centre":
                reqs = tuple(r for r in reqs if r.rule in SET_RULES + POINT_RULES)
            model = linearise(vf, x, u, name=name, label=full or None, source=ctx.source,
                              requirements=reqs, known_modes=known,
                              disabled=tuple(sorted(set(top_off) | set(own_off))),
                              on_uncertain=data.get("on_uncertain"), waivers=ctx.waivers,
                              lines=ctx.prefixed_lines())
            info = FieldPoint(vf, tuple(x), tuple(u), j == 0, carrier, box, shared)
            # identity: the at point's id, else its position (or the equilibrium's rank by
            # location) with the shape of its label
            row = (idents[j] if points is not None else None) or f"#{j}:{label_shape(full)}"
            models.append(dataclasses.replace(model, lines=dict(ctx.lines), nonlinear=info,
                                              point_id=at_sweep + row,
                                              file_inputs=ModelInputs.field(info, ctx)))
    return models
