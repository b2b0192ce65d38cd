"""Nonlinear models: a vector field ``x' = f(x, u)`` written in Python, linearised at operating
points, and its equilibria in a box.

The file names the function as ``module:function`` (resolved relative to the repository root,
imported only when the caller allows it) with parameters from the file. Linearisation uses a
complex-step Jacobian when the function accepts complex input and agrees with central
differences (detected by trying), else central differences with step
``h_j = eps^(1/3)·max(1, |x_j|)``, or a Jacobian function the file names. Each linearisation is
an ordinary :class:`~eigengate.model.Model`, so every requirement applies to it. Equilibria are
found by multi-start root finding (``scipy.optimize.root``, hybr then lm) from the box centre
and a deterministic Halton sequence, deduplicated, and classified from their linearisation.
"""

from __future__ import annotations

import contextlib
import dataclasses
import importlib
import itertools
import math
import re
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterator, Mapping, Sequence

import numpy as np

from .errors import ModelError
from .model import Model, from_arrays

__all__ = ["VectorField", "FoundEquilibrium", "EquilibriumSearch", "FieldPoint", "jacobians",
           "linearise", "find_equilibria", "import_function", "load_vector_field",
           "VECTOR_FIELD_KEYS"]

VECTOR_FIELD_KEYS = ("function", "jacobian", "parameters", "states", "inputs", "at",
                     "equilibria", "sweep")
AT_KEYS = ("label", "x", "u", "requirements")
EQUILIBRIA_KEYS = ("box", "starts", "u", "tolerance")
_REF = re.compile(r"^[A-Za-z_][\w]*(\.[A-Za-z_][\w]*)*:[A-Za-z_]\w*$")
_EPS = float(np.finfo(float).eps)


@dataclass(frozen=True, eq=False)
class VectorField:
    """``f(x, u, **parameters)`` with the names and the place it was declared (for errors)."""

    function: Callable[..., Any]
    states: tuple[str, ...]
    inputs: tuple[str, ...] = ()
    parameters: Mapping[str, float] = field(default_factory=dict)
    jacobian: Callable[..., Any] | None = None
    reference: str = "<function>"
    source: str = "<python>"
    field: str = "vector_field.function"

    def _fail(self, problem: str, x: Any, u: Any, hint: str | None = None) -> ModelError:
        where = f"at x={_vec(x)}" + (f", u={_vec(u)}" if len(self.inputs) else "")
        return ModelError(self.source, self.field, f"({self.reference}) {problem} {where}",
                          hint=hint)

    def __call__(self, x: np.ndarray, u: np.ndarray, *, complex_ok: bool = False) -> np.ndarray:
        """``f(x, u)`` checked: n finite values, or a :class:`ModelError` (never a traceback)."""
        try:
            out = self.function(x, u, **self.parameters)
        except Exception as exc:  # the user's code: any failure is reported, not raised
            raise self._fail(f"raised {type(exc).__name__}: {exc}", x, u) from None
        try:
            arr = np.asarray(out, dtype=complex if complex_ok else float)
        except (TypeError, ValueError) as exc:
            raise self._fail(f"returned {type(out).__name__}, not numbers ({exc})", x, u) from None
        n = len(self.states)
        if arr.size != n or arr.ndim > 2 or (arr.ndim == 2 and 1 not in arr.shape):
            raise self._fail(f"returned shape {arr.shape}, expected ({n},) for the states "
                             f"{', '.join(self.states)}", x, u)
        arr = arr.reshape(n)
        if not np.all(np.isfinite(arr)):
            raise self._fail(f"returned a non-finite value {_vec(arr.real)}", x, u)
        return arr


def _vec(v: Any) -> str:
    vals = [float(np.real(t)) for t in np.ravel(v)]  # rounding-level values print as 0
    return "[" + ", ".join(f"{0.0 if abs(t) < 1e-12 else t:.6g}" for t in vals) + "]"


def _user_jacobian(vf: VectorField, x: np.ndarray, u: np.ndarray
                   ) -> tuple[np.ndarray, np.ndarray | None]:
    n, m = len(vf.states), len(vf.inputs)
    bad = dataclasses.replace(vf, field="vector_field.jacobian")
    try:
        out = vf.jacobian(x, u, **vf.parameters)  # type: ignore[misc]
    except Exception as exc:
        raise bad._fail(f"raised {type(exc).__name__}: {exc}", x, u) from None
    a, b = (out if isinstance(out, tuple) and len(out) == 2 else (out, None))
    a = np.asarray(a, dtype=float)
    if a.shape != (n, n) or not np.all(np.isfinite(a)):
        raise bad._fail(f"returned A of shape {a.shape} (finite {n}×{n} expected)", x, u)
    if b is not None:
        b = np.asarray(b, dtype=float).reshape(n, -1) if m else np.zeros((n, 0))
        if b.shape != (n, m) or not np.all(np.isfinite(b)):
            raise bad._fail(f"returned B of shape {b.shape} (finite {n}×{m} expected)", x, u)
    return a, b


def _central(vf: VectorField, x: np.ndarray, u: np.ndarray, wrt: str) -> np.ndarray:
    v = x if wrt == "x" else u
    cols = []
    for j in range(v.size):
        h = _EPS ** (1 / 3) * max(1.0, abs(v[j]))
        e = np.zeros(v.size)
        e[j] = h
        plus = vf(x + e, u) if wrt == "x" else vf(x, u + e)
        minus = vf(x - e, u) if wrt == "x" else vf(x, u - e)
        cols.append((plus - minus) / (2 * h))
    return np.column_stack(cols) if cols else np.zeros((len(vf.states), 0))


def _complex_step(vf: VectorField, x: np.ndarray, u: np.ndarray, wrt: str) -> np.ndarray | None:
    v = x if wrt == "x" else u
    cols = []
    for j in range(v.size):
        h = 1e-30 * max(1.0, abs(v[j]))
        e = np.zeros(v.size, dtype=complex)
        e[j] = 1j * h
        try:
            out = vf(x + e, u + 0j, complex_ok=True) if wrt == "x" else \
                vf(x + 0j, u + e, complex_ok=True)
        except ModelError:
            return None  # does not take complex input: central differences instead
        cols.append(out.imag / h)
    return np.column_stack(cols) if cols else np.zeros((len(vf.states), 0))


def jacobians(vf: VectorField, x: Sequence[float], u: Sequence[float] | None = None
              ) -> tuple[np.ndarray, np.ndarray, str]:
    """``(∂f/∂x, ∂f/∂u, method)`` at ``(x, u)``; method is ``jacobian function``,
    ``complex step`` or ``central differences``."""
    x = np.asarray(x, dtype=float)
    u = np.zeros(len(vf.inputs)) if u is None else np.asarray(u, dtype=float)
    f0 = vf(x, u)  # a clear error first if f fails at the point itself
    if vf.jacobian is not None:
        a, b = _user_jacobian(vf, x, u)
        return a, (_central(vf, x, u, "u") if b is None else b), "jacobian function"
    ca, cb = _complex_step(vf, x, u, "x"), _complex_step(vf, x, u, "u")
    da, db = _central(vf, x, u, "x"), _central(vf, x, u, "u")
    if ca is not None and cb is not None:
        # A function that accepts complex numbers but is not analytic in them (abs, real parts,
        # branches on values) gives a wrong complex step; central differences catch that.
        scale = 1.0 + np.abs(ca) + np.abs(f0).max()
        if np.all(np.abs(ca - da) <= 1e-4 * scale) and np.all(np.abs(cb - db) <= 1e-4 * (
                1.0 + np.abs(cb) + np.abs(f0).max())):
            return ca, cb, "complex step"
    return da, db, "central differences"


def linearise(vf: VectorField, x: Sequence[float], u: Sequence[float] | None = None, *,
              name: str = "model", label: str | None = None, **kwargs: Any) -> Model:
    """The linearisation at ``(x, u)`` as a :class:`Model` (``A = ∂f/∂x``, ``B = ∂f/∂u``);
    ``kwargs`` go to :func:`~eigengate.model.from_arrays`."""
    a, b, method = jacobians(vf, x, u)
    return from_arrays(a, b, states=vf.states, inputs=vf.inputs, name=name, label=label,
                       source=kwargs.pop("source", vf.source),
                       structure=f"linearised vector field ({method})", **kwargs)


@dataclass(frozen=True, eq=False)
class FoundEquilibrium:
    """An equilibrium (or a checked point): location, residual ``max|f|`` and type."""

    x: tuple[float, ...]
    residual: float
    equilibrium: Any  # eigengate.equilibrium.Equilibrium
    eigenvalues: tuple[complex, ...]

    def describe(self) -> str:
        return f"{self.equilibrium.type} at {_vec(self.x)}"


@dataclass(frozen=True, eq=False)
class EquilibriumSearch:
    """Result of a multi-start search: distinct equilibria in the box, sorted by location."""

    equilibria: tuple[FoundEquilibrium, ...]
    starts: int
    converged: int
    failed: int
    outside: int
    errors: tuple[str, ...] = ()

    def summary(self) -> str:
        return f"{len(self.equilibria)} equilibria" + "".join(
            (": " if i == 0 else "; ") + e.describe() for i, e in enumerate(self.equilibria))

    def describe(self) -> str:
        text = (f"{self.starts} starts, {self.converged} converged in the box, {self.outside} "
                f"left it, {self.failed} did not converge")
        return text + (f" (first error: {self.errors[0]})" if self.errors else "")


def _classify(vf: VectorField, x: np.ndarray, u: np.ndarray) -> FoundEquilibrium:
    from .equilibrium import classify
    from .modes import analyse

    spectrum = analyse(linearise(vf, x, u))
    return FoundEquilibrium(tuple(float(v) for v in x), float(np.max(np.abs(vf(x, u)))),
                            classify(spectrum.modes), tuple(spectrum.eigenvalues()))


def find_equilibria(vf: VectorField, lower: Sequence[float], upper: Sequence[float],
                    u: Sequence[float] | None = None, *, starts: int = 64,
                    tolerance: float | None = None) -> EquilibriumSearch:
    """Equilibria of ``f(·, u)`` in the box ``[lower, upper]``.

    Starts are the box centre and the first ``starts - 1`` points of the Halton sequence
    (unscrambled: the same every run). A root counts when the solver's residual is below
    ``1e-8·max(1, ‖A‖·max(1, ‖x‖))`` and it lies in the box; roots closer than ``tolerance``
    (default ``1e-6·max(1, widest side)``) are one equilibrium.
    """
    from scipy.optimize import root
    from scipy.stats import qmc

    lo, hi = np.asarray(lower, dtype=float), np.asarray(upper, dtype=float)
    u = np.zeros(len(vf.inputs)) if u is None else np.asarray(u, dtype=float)
    width = hi - lo
    tol = tolerance if tolerance is not None else 1e-6 * max(1.0, float(width.max()))
    unit = qmc.Halton(d=lo.size, scramble=False).random(starts)[1:] if starts > 1 else \
        np.zeros((0, lo.size))
    x0s = [lo + width / 2] + [lo + width * p for p in unit]
    jac = None if vf.jacobian is None else (lambda x: _user_jacobian(vf, x, u)[0])
    found: list[FoundEquilibrium] = []
    converged = failed = outside = 0
    errors: list[str] = []
    for x0 in x0s:
        x = None
        try:
            for method in ("hybr", "lm"):
                sol = root(lambda x: vf(x, u), x0, jac=jac, method=method)
                a = jacobians(vf, sol.x, u)[0] if np.all(np.isfinite(sol.x)) else None
                if a is not None:
                    res = float(np.max(np.abs(vf(sol.x, u))))
                    scale = max(1.0, float(np.abs(a).max()) * max(1.0, float(np.abs(sol.x).max())))
                    if res <= 1e-8 * scale:
                        x = sol.x
                        break
        except ModelError as exc:
            errors.append(exc.problem)
        if x is None:
            failed += 1
        elif np.any(x < lo - 1e-9 * width) or np.any(x > hi + 1e-9 * width):
            outside += 1
        else:
            converged += 1
            if not any(np.max(np.abs(np.array(e.x) - x)) <= tol for e in found):
                found.append(_classify(vf, x, u))
    found.sort(key=lambda e: tuple(round(v, 9) for v in e.x))
    return EquilibriumSearch(tuple(found), len(x0s), converged, failed, outside,
                             tuple(errors[:3]))


@dataclass(frozen=True, eq=False)
class FieldPoint:
    """What a linearised :class:`Model` keeps of its vector field (``Model.nonlinear``).

    ``carrier`` marks the one model per parameter set on which set-level requirements (count,
    saddles, stability of every equilibrium) are judged; ``search`` runs once per set.
    """

    field: VectorField
    x: tuple[float, ...]
    u: tuple[float, ...]
    carrier: bool
    carrier_label: str | None
    box: tuple[tuple[float, ...], tuple[float, ...], tuple[float, ...], int, float | None] | None
    shared: dict = dataclasses.field(default_factory=dict, repr=False)

    def search(self) -> EquilibriumSearch:
        if "search" not in self.shared:
            if self.box is None:
                raise ModelError(self.field.source, "vector_field.equilibria", "is missing: "
                                 "set-level equilibrium requirements need a box to search")
            lo, hi, u, starts, tol = self.box
            self.shared["search"] = find_equilibria(self.field, lo, hi, u, starts=starts,
                                                    tolerance=tol)
        return self.shared["search"]

    def point(self, x: Sequence[float]) -> FoundEquilibrium:
        """Residual and type of the linearisation at ``x`` (with the box's input)."""
        u = np.asarray(self.box[2] if self.box else self.u, dtype=float)
        return _classify(self.field, np.asarray(x, dtype=float), u)


@contextlib.contextmanager
def _on_path(root: Path) -> Iterator[None]:
    entry = str(root)
    sys.path.insert(0, entry)
    try:
        yield
    finally:
        with contextlib.suppress(ValueError):
            sys.path.remove(entry)


def import_function(ref: str, root: Path, source: str, fld: str, line: int | None = None
                    ) -> tuple[Callable[..., Any], Path | None]:
    """Import ``module:function`` relative to ``root``; return it and its module's file."""
    if not isinstance(ref, str) or not _REF.match(ref):
        raise ModelError(source, fld, f"must be 'package.module:function', got {ref!r:.60}",
                         line=line)
    mod_name, func = ref.split(":")
    root = Path(root).resolve()
    for name in [n for n in sys.modules if n == mod_name or mod_name.startswith(n + ".")]:
        file = getattr(sys.modules[name], "__file__", None)  # a same-named module of another
        if file and root not in Path(file).resolve().parents:  # repository must not be reused
            del sys.modules[name]
    importlib.invalidate_caches()
    try:
        with _on_path(root):
            module = importlib.import_module(mod_name)
    except Exception as exc:
        raise ModelError(source, fld, f"names module {mod_name!r}, which cannot be imported "
                         f"from the repository root: {type(exc).__name__}: {exc}",
                         line=line) from None
    fn = getattr(module, func, None)
    if not callable(fn):
        raise ModelError(source, fld, f"names {func!r}, which is not a function of module "
                         f"{mod_name!r}", line=line)
    file = getattr(module, "__file__", None)
    return fn, (Path(file).resolve() if file else None)


def _numbers(value: Any, ctx: Any, path: str, size: int | None) -> tuple[float, ...]:
    ok = isinstance(value, list) and all(isinstance(v, (int, float)) and not isinstance(v, bool)
                                         and math.isfinite(v) for v in value) and (value != [] or size == 0)
    if not ok or (size is not None and len(value) != size):
        want = f"{size} finite numbers" if size is not None else "finite numbers"
        raise ctx.err(path, f"must be a list of {want}, got {value!r:.60}")
    return tuple(float(v) for v in value)


def load_vector_field(data: Mapping[str, Any], ctx: Any, name: str,
                      parse_requirements: Callable[..., tuple]) -> list[Model]:
    """Models of a model file with a ``vector_field`` block (called by the loader)."""
    from .loader import _check_keys, _mapping, suggest
    from .loop_requirements import LOOP_RULES, POINT_RULES, SET_RULES
    from .requirements import apply_layers

    for key in ("plant", "feedback", "operating_points", "loop", "sample_period"):
        if key in data:
            raise ctx.err(key, "cannot be combined with vector_field", "a vector field file "
                          "gives its operating points under vector_field.at")
    if ctx.domain != "continuous":
        raise ctx.err("domain", "must be continuous for a vector field (x' = f(x, u))")
    if "waivers" in data:
        from .waivers import parse_waivers

        ctx.waivers = parse_waivers(data["waivers"], ctx.source, "waivers", ctx.lines)
    block = _mapping(data["vector_field"], ctx, "vector_field")
    _check_keys(block, VECTOR_FIELD_KEYS, ctx, "vector_field", "vector_field")
    if "function" not in block:
        raise ctx.err("vector_field.function", "is missing", "name it as 'module:function'")
    if not ctx.allow_python:
        raise ctx.err("vector_field.function", f"imports project code ({block['function']}), "
                      "which is off unless allowed", "set allow_python = true under "
                      "[tool.eigengate] in pyproject.toml, or pass allow_python=True")
    root = Path(ctx.root or ctx.base_dir or ".")
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
        if not isinstance(names, list) or not all(isinstance(v, str) for v in names) or (
                key == "states" and not names):
            raise ctx.err(f"vector_field.{key}", f"must be a list of names, got {names!r:.60}")
    params = dict(_mapping(block.get("parameters", {}), ctx, "vector_field.parameters"))
    for k, v in params.items():
        _numbers([v], ctx, f"vector_field.parameters.{k}", 1)
    sweep = _mapping(block.get("sweep", {}), ctx, "vector_field.sweep")
    grids = {k: _numbers(v, ctx, f"vector_field.sweep.{k}", None) for k, v in sweep.items()}
    n, m = len(states), len(inputs)
    base = VectorField(fns["function"], tuple(states), tuple(inputs), params,
                       fns.get("jacobian"), block["function"], ctx.source,
                       ctx.prefix + "vector_field.function")
    box = None
    if "equilibria" in block:
        eq = _mapping(block["equilibria"], ctx, "vector_field.equilibria")
        _check_keys(eq, EQUILIBRIA_KEYS, ctx, "vector_field.equilibria", "equilibria")
        where = "vector_field.equilibria.box"
        sides = _mapping(eq.get("box"), ctx, where)
        for k in sides:
            if k not in states:
                close = suggest(str(k), states)
                raise ctx.err(f"{where}.{k}", "names no state", f"did you mean {close!r}?"
                              if close else "states: " + ", ".join(states))
        lo, hi = [], []
        for s in states:
            if s not in sides:
                raise ctx.err(where, f"gives no range for state {s!r}",
                              "give every state a [low, high] range")
            a, b = _numbers(sides[s], ctx, f"{where}.{s}", 2)
            if not a < b:
                raise ctx.err(f"{where}.{s}", f"must have low < high, got {[a, b]}")
            lo.append(a)
            hi.append(b)
        starts = eq.get("starts", 64)
        if isinstance(starts, bool) or not isinstance(starts, int) or not 1 <= starts <= 100000:
            raise ctx.err("vector_field.equilibria.starts", f"must be an integer from 1 to "
                          f"100000, got {starts!r}")
        u_eq = _numbers(eq.get("u", [0.0] * m), ctx, "vector_field.equilibria.u", m)
        tol = _numbers([eq["tolerance"]], ctx, "vector_field.equilibria.tolerance", 1)[0] \
            if "tolerance" in eq else None
        box = (tuple(lo), tuple(hi), u_eq, starts, tol)
    top, top_off, known = parse_requirements(data, ctx, states)
    if any(r.rule in LOOP_RULES for r in top):
        raise ctx.err("requirements", "asks for loop margins, but a vector field has no loop")
    points = block.get("at")
    if points is None and box is None:
        raise ctx.err("vector_field", "needs at (operating points) or equilibria (a box to "
                      "search)", "add at: [{label: ..., x: [...]}]")
    if any(r.rule in SET_RULES for r in top) and box is None:
        raise ctx.err("vector_field.equilibria", "is missing, but the requirements count or "
                      "classify the equilibria in a box", "add equilibria: {box: {...}}")
    at: list[tuple[str, tuple, tuple, tuple, tuple]] = []
    if points is not None:
        if not isinstance(points, list) or not points:
            raise ctx.err("vector_field.at", "must be a non-empty list of operating points")
        seen: set[str] = set()
        for i, p in enumerate(points):
            path = f"vector_field.at[{i}]"
            p = _mapping(p, ctx, path)
            _check_keys(p, AT_KEYS, ctx, path, "an operating point")
            label = p.get("label")
            if not isinstance(label, str) or not label.strip() or label in seen:
                raise ctx.err(f"{path}.label", f"must be a unique non-empty string, got {label!r}")
            seen.add(label)
            x = _numbers(p.get("x"), ctx, f"{path}.x", n)
            u = _numbers(p.get("u", [0.0] * m), ctx, f"{path}.u", m)
            own: tuple = ((), ())
            if "requirements" in p:
                pctx = dataclasses.replace(ctx, prefix=ctx.prefix + f"{path} (label {label!r}).")
                own = parse_requirements({"requirements": p["requirements"]}, pctx, states)[:2]
            at.append((label, x, u, *own))
    combos = list(itertools.product(*grids.values())) or [()]
    models: list[Model] = []
    for combo in combos:
        tag = ", ".join(f"{k}={v:g}" for k, v in zip(grids, combo))
        vf = dataclasses.replace(base, parameters={**params, **dict(zip(grids, combo))})
        shared: dict = {}
        rows = list(at)
        if points is None:  # the equilibria found are the operating points
            search = FieldPoint(vf, (), (), True, None, box, shared).search()
            rows = [(f"x*={_vec(e.x)}", e.x, box[2], (), ()) for e in search.equilibria]
            if not rows:
                if not any(r.rule in SET_RULES + POINT_RULES for r in top):
                    raise ctx.err("vector_field.equilibria", f"found no equilibrium in the box"
                                  f"{' for ' + tag if tag else ''}: {search.describe()}",
                                  "widen the box, add starts, or list operating points under at")
                centre = tuple((a + b) / 2 for a, b in zip(box[0], box[1]))
                rows = [("box centre", centre, box[2], (), ())]
        for j, (label, x, u, own, own_off) in enumerate(rows):
            full = ", ".join(t for t in (tag, label) if t) or None
            carrier_label = ", ".join(t for t in (tag, rows[0][0]) if t)
            reqs = apply_layers([(top, top_off), (own, own_off)])
            if j:  # set-level requirements are judged once per parameter set
                reqs = tuple(r for r in reqs if r.rule not in SET_RULES + POINT_RULES)
            elif points is None and label == "box centre":
                reqs = tuple(r for r in reqs if r.rule in SET_RULES + POINT_RULES)
            model = linearise(vf, x, u, name=name, label=full, source=ctx.source,
                              requirements=reqs, known_modes=known,
                              disabled=tuple(sorted(set(top_off) | set(own_off))),
                              on_uncertain=data.get("on_uncertain"), waivers=ctx.waivers,
                              lines=ctx.prefixed_lines())
            info = FieldPoint(vf, tuple(x), tuple(u), j == 0, carrier_label, box, shared)
            models.append(dataclasses.replace(model, lines=dict(ctx.lines), nonlinear=info))
    return models
