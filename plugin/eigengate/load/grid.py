"""The ``grid:`` block of a model file: a linear model per point of an operating-point grid.

The file is an ordinary model file (plant, feedback, requirements) whose ``grid.axes`` declare
the scheduling variables and their values; ``grid.matrices`` replaces matrix fields per grid
point, from one stacked array (``{file, key}``, shaped ``(points along each axis..., rows,
cols)``) or from a file per point named by a pattern (``{pattern: "K_{speed}_{load}.csv"}``);
``grid.regions`` overrides requirements in boxes of the grid. Each point's identity is its
coordinates, ``speed=30,load=0.5``, which is also its label. See docs/grids.md.
"""

from __future__ import annotations

import dataclasses
import itertools
import math
import re
from collections.abc import Mapping
from typing import Any, Callable

from ..errors import ModelError
from ..model.core import Model
from .context import _check_keys, _Ctx, _kind, _mapping, check_waiver_labels

__all__ = ["GRID_KEYS", "GRID_TARGETS", "MAX_GRID_POINTS", "coordinate_text", "load_grid"]

GRID_KEYS = ("axes", "matrices", "regions")
REGION_KEYS = ("name", "where", "requirements")
BOUND_KEYS = ("min", "max")
#: Matrix fields a grid may give per point.
GRID_TARGETS = ("plant.A", "plant.B", "plant.C", "plant.D", "plant.E",
                "feedback.state_gain", "feedback.output_gain", "feedback.controller.A",
                "feedback.controller.B", "feedback.controller.C", "feedback.controller.D")
#: Most points a grid may have, and most axes.
MAX_GRID_POINTS = 100_000
MAX_AXES = 6
_AXIS_NAME = re.compile(r"^[A-Za-z_][A-Za-z0-9_]{0,31}$")
_PLACEHOLDER = re.compile(r"\{([^{}]*)\}")


def coordinate_text(value: float) -> str:
    """A coordinate as identities and file patterns write it: an integer value without a
    decimal point (``30``), any other value in its shortest exact form (``0.5``, ``1e-05``)."""
    if value.is_integer() and abs(value) < 1e15:
        return str(int(value))
    return repr(value)


def _axes(block: Mapping[str, Any], ctx: _Ctx) -> list[tuple[str, list[float], list[str]]]:
    axes = _mapping(block.get("axes"), ctx, "grid.axes")
    if not axes:
        raise ctx.err("grid.axes", "declares no scheduling variable",
                      "e.g. axes: {speed: [10, 20, 30], load: [0, 0.5]}")
    if len(axes) > MAX_AXES:
        raise ctx.err("grid.axes", f"declares {len(axes)} scheduling variables, more than the "
                      f"limit of {MAX_AXES}")
    out = []
    for name, values in axes.items():
        where = f"grid.axes.{name}"
        if not isinstance(name, str) or not _AXIS_NAME.match(name):
            raise ctx.err(where, f"is not a usable variable name ({name!r})",
                          "letters, digits and _, starting with a letter or _")
        if not isinstance(values, list) or not values or not all(
                type(v) in (int, float) and math.isfinite(v) for v in values):
            raise ctx.err(where, f"must be a non-empty list of finite numbers, got "
                          f"{_kind(values)} {values!r:.60}")
        texts = [coordinate_text(float(v)) for v in values]
        twice = sorted({t for t in texts if texts.count(t) > 1})
        if twice:
            raise ctx.err(where, f"lists the value {twice[0]} more than once",
                          "each grid value must be distinct")
        out.append((name, [float(v) for v in values], texts))
    count = math.prod(len(v) for _, v, _ in out)
    if count > MAX_GRID_POINTS:
        raise ctx.err("grid.axes", f"makes a grid of {count} points, more than the limit of "
                      f"{MAX_GRID_POINTS}")
    return out


def _regions(block: Mapping[str, Any], ctx: _Ctx, names: list[str]) -> list[tuple]:
    """``(where, bounds {axis: (lo, hi)}, requirements mapping)`` per region, in order."""
    raw = block.get("regions", [])
    if not isinstance(raw, list):
        raise ctx.err("grid.regions", f"must be a list of regions, got {_kind(raw)}")
    out = []
    for i, region in enumerate(raw):
        where = f"grid.regions[{i}]"
        region = _mapping(region, ctx, where)
        _check_keys(region, REGION_KEYS, ctx, where, "a grid region")
        if "requirements" not in region:
            raise ctx.err(f"{where}.requirements", "is missing; a region overrides "
                          "requirements", "e.g. requirements: {min_damping: 0.5}")
        bounds = {}
        for axis, bound in _mapping(region.get("where", {}), ctx, f"{where}.where").items():
            path = f"{where}.where.{axis}"
            if axis not in names:
                raise ctx.err(path, f"names {axis!r}, which is not a grid axis",
                              "axes: " + ", ".join(names))
            bound = _mapping(bound, ctx, path)
            _check_keys(bound, BOUND_KEYS, ctx, path, "a region bound (min and max, "
                        "inclusive)")
            lo, hi = bound.get("min", -math.inf), bound.get("max", math.inf)
            for key, v in (("min", lo), ("max", hi)):
                if type(v) not in (int, float) or math.isnan(v):
                    raise ctx.err(f"{path}.{key}", f"must be a number, got {v!r:.40}")
            if lo > hi:
                raise ctx.err(path, f"has min {lo} above max {hi}")
            bounds[axis] = (float(lo), float(hi))
        out.append((where, bounds, _mapping(region["requirements"], ctx,
                                            f"{where}.requirements")))
    return out


def _set(doc: dict[str, Any], target: str, value: Any) -> None:
    *parents, leaf = target.split(".")
    block = doc
    for key in parents:
        inner = block.get(key)
        block[key] = dict(inner) if isinstance(inner, Mapping) else {}
        block = block[key]
    block[leaf] = value


def _sources(block: Mapping[str, Any], ctx: _Ctx, axes: list) -> list[tuple[str, Any]]:
    """``(target, source)`` per matrix field the grid replaces: a stacked array, or a
    function of the point's value texts to the matrix of its file."""
    from ..model.matrixfiles import load_reference
    from ..model.stacked import load_stack

    matrices = _mapping(block.get("matrices"), ctx, "grid.matrices")
    if not matrices:
        raise ctx.err("grid.matrices", "gives no matrix per point",
                      "e.g. matrices: {plant.A: {file: grid.npz, key: A}}")
    names = [n for n, _, _ in axes]
    out: list[tuple[str, Any]] = []
    for target, ref in matrices.items():
        path = f"grid.matrices.{target}"
        if target not in GRID_TARGETS:
            raise ctx.err(path, f"is not a matrix field a grid can give ({target!r})",
                          "fields: " + ", ".join(GRID_TARGETS))
        ref = _mapping(ref, ctx, path)
        if ("file" in ref) == ("pattern" in ref):
            raise ctx.err(path, "must give either file (one stacked array) or pattern (a "
                          "file per point), not " + ("both" if "file" in ref else "neither"))
        if "file" in ref:
            arr, rel = load_stack(ref, [(n, t) for n, _, t in axes], source=ctx.source,
                                  field=ctx.prefix + path, line=ctx.line(path),
                                  base_dir=ctx.base_dir, root=ctx.root, read=ctx.read)
            ctx.refs.append(rel)
            out.append((target, arr))
            continue
        _check_keys(ref, ("pattern", "key"), ctx, path, "a file pattern")
        pattern = ref["pattern"]
        if not isinstance(pattern, str) or not pattern.strip():
            raise ctx.err(f"{path}.pattern", f"must be a file name pattern, got {pattern!r:.60}")
        for used in _PLACEHOLDER.findall(pattern):
            if used not in names:
                raise ctx.err(f"{path}.pattern", f"has the placeholder {{{used}}}, which is "
                              "not a grid axis", "placeholders: " + ", ".join(
                                  "{" + n + "}" for n in names))
        out.append((target, _pattern_reader(pattern, ref.get("key"), path, names, ctx,
                                            load_reference)))
    return out


def _pattern_reader(pattern: str, key: Any, path: str, names: list[str], ctx: _Ctx,
                    load_reference: Callable[..., Any]) -> Callable[[dict[str, str]], Any]:
    read: dict[str, Any] = {}  # file name → matrix, for patterns that skip an axis

    def matrix(texts: dict[str, str]) -> Any:
        name = _PLACEHOLDER.sub(lambda m: texts[m.group(1)], pattern)
        if name not in read:
            arr, rel = load_reference({"file": name, **({"key": key} if key else {})},
                                      source=ctx.source, field=ctx.prefix + path,
                                      line=ctx.line(path), base_dir=ctx.base_dir,
                                      root=ctx.root, read=ctx.read)
            ctx.refs.append(rel)
            read[name] = arr
        return read[name]
    return matrix


def load_grid(data: Mapping[str, Any], ctx: _Ctx, name: str,
              build: Callable[[Mapping[str, Any], _Ctx, str, str | None], Model],
              merge: Callable[[Any, Any], Any]) -> list[Model]:
    """One model per grid point, in the axes' order (the last axis varies fastest)."""
    if "operating_points" in data:
        raise ctx.err("grid", "cannot be combined with operating_points",
                      "list the points under operating_points, or declare them as a grid")
    block = _mapping(data["grid"], ctx, "grid")
    _check_keys(block, GRID_KEYS, ctx, "grid", "a grid")
    axes = _axes(block, ctx)
    names = [n for n, _, _ in axes]
    regions = _regions(block, ctx, names)
    sources = _sources(block, ctx, axes)
    base = {k: v for k, v in data.items() if k != "grid"}
    matched = [False] * len(regions)
    models: list[Model] = []
    missing: list[str] = []
    for place in itertools.product(*(range(len(v)) for _, v, _ in axes)):
        coords = tuple((n, v[i]) for (n, v, _), i in zip(axes, place))
        texts = {n: t[i] for (n, _, t), i in zip(axes, place)}
        ident = ",".join(f"{n}={texts[n]}" for n in names)
        doc = dict(base)
        for target, src in sources:
            if callable(src):
                try:
                    value = src(texts)
                except ModelError as exc:
                    if "does not exist" not in exc.problem:
                        raise
                    missing.append(f"{ident} ({exc.problem.split(chr(39))[1]})")
                    continue
            else:
                value = src[place]
            _set(doc, target, value)
        if missing:
            continue
        for r, (_, bounds, reqs) in enumerate(regions):
            if all(lo <= dict(coords)[a] <= hi for a, (lo, hi) in bounds.items()):
                matched[r] = True
                doc["requirements"] = merge(doc.get("requirements") or {}, reqs)
        pctx = dataclasses.replace(ctx, prefix=f"grid[{ident}].")
        model = build(doc, pctx, name, ident)
        models.append(model.with_fields(point_id=ident, grid=coords))
    if missing:
        raise ctx.err("grid.matrices", f"names files that do not exist for {len(missing)} "
                      f"grid point{'s' if len(missing) != 1 else ''}: " + "; ".join(
                          missing[:5]) + ("; …" if len(missing) > 5 else ""),
                      "add the files, or remove the values from grid.axes")
    for r, hit in enumerate(matched):
        if not hit:
            raise ctx.err(f"{regions[r][0]}.where", "matches no grid point",
                          "check the bounds against grid.axes")
    check_waiver_labels(ctx, [m.label for m in models if m.label is not None])
    return models
