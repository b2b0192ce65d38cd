"""Nonlinear models: a Python vector field ``x' = f(x, u)``, its linearisations and equilibria.

The function is named as ``module:function`` (relative to the repository root, imported only
when the caller allows it), with parameters from the file. Jacobians: complex step when the
function accepts complex input and agrees with central differences (detected by trying), else
central differences with ``h_j = eps^(1/3)·max(1, |x_j|)``, or a Jacobian function. Each
linearisation is an ordinary :class:`~eigengate.model.core.Model`. Equilibria: multi-start
``scipy.optimize.root`` (hybr, then lm) from the box centre and a Halton sequence, deduplicated
and classified from their linearisation.
"""

from __future__ import annotations

import contextlib
import dataclasses
import importlib
import os
import re
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterator, Mapping, Sequence, Union

import numpy as np

from ..errors import ModelError
from ..model.core import Model, from_arrays

__all__ = ["VectorField", "FoundEquilibrium", "EquilibriumSearch", "FieldPoint", "jacobians",
           "linearise", "find_equilibria", "import_function"]

#: A point of state or input space: numbers in a list or tuple, or a 1-D array.
Vector = Union[Sequence[float], "np.ndarray"]

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
    b = None if b is None else np.asarray(b, dtype=float).reshape(n, -1) if m else np.zeros((n, 0))
    for what, arr, shape in (("A", a, (n, n)), ("B", b, (n, m))):
        if arr is not None and (arr.shape != shape or not np.all(np.isfinite(arr))):
            raise bad._fail(f"returned {what} of shape {arr.shape} (finite {shape} expected)", x, u)
    return a, b


def _columns(vf: VectorField, x: np.ndarray, u: np.ndarray, wrt: str, how: str
             ) -> np.ndarray | None:
    """∂f/∂x or ∂f/∂u by complex step (None when f refuses complex input) or by central
    differences with ``h_j = eps^(1/3)·max(1, |v_j|)``."""
    v, cols = (x if wrt == "x" else u), []
    for j in range(v.size):
        e = np.zeros(v.size, dtype=complex if how == "complex" else float)
        if how == "complex":
            h = 1e-30 * max(1.0, abs(v[j]))
            e[j] = 1j * h
            try:
                out = vf(x + e, u + 0j, complex_ok=True) if wrt == "x" else \
                    vf(x + 0j, u + e, complex_ok=True)
            except ModelError:
                return None
            cols.append(out.imag / h)
        else:
            e[j] = h = _EPS ** (1 / 3) * max(1.0, abs(v[j]))
            plus, minus = ((vf(x + e, u), vf(x - e, u)) if wrt == "x" else
                           (vf(x, u + e), vf(x, u - e)))
            cols.append((plus - minus) / (2 * h))
    return np.column_stack(cols) if cols else np.zeros((len(vf.states), 0))


def _central(vf: VectorField, x: np.ndarray, u: np.ndarray, wrt: str) -> np.ndarray:
    """Central differences (never refused, unlike the complex step)."""
    cols = _columns(vf, x, u, wrt, "central")
    assert cols is not None
    return cols


def jacobians(vf: VectorField, x: Vector, u: Vector | None = None
              ) -> tuple[np.ndarray, np.ndarray, str]:
    """``(∂f/∂x, ∂f/∂u, method)`` at ``(x, u)``; method is ``jacobian function``,
    ``complex step`` or ``central differences``."""
    xa = np.asarray(x, dtype=float)
    ua = np.zeros(len(vf.inputs)) if u is None else np.asarray(u, dtype=float)
    f0 = vf(xa, ua)  # a clear error first if f fails at the point itself
    if vf.jacobian is not None:
        a, b = _user_jacobian(vf, xa, ua)
        return a, (_central(vf, xa, ua, "u") if b is None else b), "jacobian function"
    ca, cb = _columns(vf, xa, ua, "x", "complex"), _columns(vf, xa, ua, "u", "complex")
    da, db = _central(vf, xa, ua, "x"), _central(vf, xa, ua, "u")
    # A function that accepts complex numbers but is not analytic in them (abs, real parts,
    # branches on values) gives a wrong complex step; central differences catch that.
    if ca is not None and cb is not None and all(
            np.all(np.abs(c - d) <= 1e-4 * (1.0 + np.abs(c) + np.abs(f0).max()))
            for c, d in ((ca, da), (cb, db))):
        return ca, cb, "complex step"
    return da, db, "central differences"


def linearise(vf: VectorField, x: Vector, u: Vector | None = None, *,
              name: str = "model", label: str | None = None, **kwargs: Any) -> Model:
    """The linearisation at ``(x, u)`` as a :class:`Model` (``A = ∂f/∂x``, ``B = ∂f/∂u``);
    ``kwargs`` go to :func:`~eigengate.model.core.from_arrays`."""
    a, b, method = jacobians(vf, x, u)
    return from_arrays(a, b, states=vf.states, inputs=vf.inputs, name=name, label=label,
                       source=kwargs.pop("source", vf.source),
                       structure=f"linearised vector field ({method})", **kwargs)


@dataclass(frozen=True, eq=False)
class FoundEquilibrium:
    """An equilibrium (or a checked point): location, residual ``max|f|`` and type."""

    x: tuple[float, ...]
    residual: float
    equilibrium: Any  # eigengate.analysis.equilibrium.Equilibrium
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
        from ..errors import counted

        return counted(len(self.equilibria), "equilibrium", "equilibria") + "".join(
            (": " if i == 0 else "; ") + e.describe() for i, e in enumerate(self.equilibria))

    def describe(self) -> str:
        return (f"{self.starts} starts, {self.converged} converged in the box, {self.outside} "
                f"left it, {self.failed} did not converge"
                + (f" (first error: {self.errors[0]})" if self.errors else ""))


def _classify(vf: VectorField, x: np.ndarray, u: np.ndarray) -> FoundEquilibrium:
    from .equilibrium import classify
    from .modes import analyse

    spectrum = analyse(linearise(vf, x, u))
    return FoundEquilibrium(tuple(float(v) for v in x), float(np.max(np.abs(vf(x, u)))),
                            classify(spectrum.modes), tuple(spectrum.eigenvalues()))


def find_equilibria(vf: VectorField, lower: Vector, upper: Vector,
                    u: Vector | None = None, *, starts: int = 64,
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
    ua, width = np.zeros(len(vf.inputs)) if u is None else np.asarray(u, dtype=float), hi - lo
    tol = tolerance if tolerance is not None else 1e-6 * max(1.0, float(width.max()))
    unit = qmc.Halton(d=lo.size, scramble=False).random(max(starts, 1))[1:]  # [0] is a corner
    x0s = [lo + width / 2] + [lo + width * p for p in unit]
    jac = None if vf.jacobian is None else (lambda x: _user_jacobian(vf, x, ua)[0])
    found: list[FoundEquilibrium] = []
    errors: list[str] = []
    converged = failed = outside = 0
    for x0 in x0s:
        x = None
        try:
            for method in ("hybr", "lm"):
                sol = root(lambda x: vf(x, ua), x0, jac=jac, method=method)
                if not np.all(np.isfinite(sol.x)):
                    continue
                norm_a = float(np.abs(jacobians(vf, sol.x, ua)[0]).max())
                if np.max(np.abs(vf(sol.x, ua))) <= 1e-8 * max(1.0, norm_a * max(
                        1.0, float(np.abs(sol.x).max()))):
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
                found.append(_classify(vf, x, ua))
    found.sort(key=lambda e: tuple(round(v, 9) for v in e.x))
    return EquilibriumSearch(tuple(found), len(x0s), converged, failed, outside, tuple(errors[:3]))


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

    def search(self) -> EquilibriumSearch | None:
        """The search of the box (None without one), run once per parameter set."""
        if "search" not in self.shared and self.box is not None:
            lo, hi, u, starts, tol = self.box
            self.shared["search"] = find_equilibria(self.field, lo, hi, u, starts=starts,
                                                    tolerance=tol)
        return self.shared.get("search")

    def point(self, x: Sequence[float]) -> FoundEquilibrium:
        """Residual and type of the linearisation at ``x`` (with the box's input)."""
        u = self.box[2] if self.box else self.u
        return _classify(self.field, np.asarray(x, dtype=float), np.asarray(u, dtype=float))


@contextlib.contextmanager
def _on_path(root: Path) -> Iterator[None]:
    sys.path.insert(0, str(root))
    try:
        yield
    finally:  # remove exactly the entry added, wherever the import moved it
        with contextlib.suppress(ValueError):
            sys.path.remove(str(root))


def _module_origin(mod_name: str, root: Path, source: str, fld: str, line: int | None) -> str:
    """The file module ``mod_name`` would be loaded from, found below ``root`` without
    importing or running anything (``PathFinder`` searches the given folders only), checked to
    be a regular file inside the repository, links resolved; the standard library's names are
    refused (the interpreter has them already, so the repository's file would not be used)."""
    import importlib.machinery
    import stat

    def refuse(problem: str) -> ModelError:
        return ModelError(source, fld, f"names module {mod_name!r}, {problem}", line=line,
                          hint="vector fields are imported only from modules whose file lies "
                               "inside the repository")

    top = mod_name.split(".")[0]
    if top in sys.stdlib_module_names or top in sys.builtin_module_names:
        raise refuse("a module of the Python standard library, not one inside the repository")
    parts = mod_name.split(".")
    search = [str(root)]
    spec = None
    for i in range(len(parts)):
        spec = importlib.machinery.PathFinder.find_spec(".".join(parts[:i + 1]), search)
        if spec is None:
            raise refuse("which cannot be imported from the repository root: it is not found "
                         "inside the repository")
        places = [spec.origin] if spec.has_location and spec.origin else []
        places += list(spec.submodule_search_locations or [])
        for place in places:
            if not Path(os.path.realpath(place)).is_relative_to(root):
                raise refuse("whose file lies outside the repository, not inside the "
                             "repository")
        search = list(spec.submodule_search_locations or [])
    if spec is None or not spec.has_location or not spec.origin:
        raise refuse("which is a folder without code, not a module file inside the repository")
    origin = os.path.realpath(spec.origin)
    try:
        regular = stat.S_ISREG(os.stat(origin).st_mode)
    except OSError:
        regular = False
    if not regular:
        raise refuse("whose file is not a regular file inside the repository")
    return origin


def import_function(ref: str, root: Path, source: str, fld: str, line: int | None = None
                    ) -> tuple[Callable[..., Any], Path | None]:
    """Import ``module:function`` relative to ``root``; return it and its module's file."""
    if not isinstance(ref, str) or not _REF.match(ref):
        raise ModelError(source, fld, f"must be 'package.module:function', got {ref!r:.60}",
                         line=line)
    mod_name, func = ref.split(":")
    root = Path(root).resolve()
    origin = _module_origin(mod_name, root, source, fld, line)
    for name in [n for n in sys.modules if n == mod_name or mod_name.startswith(n + ".")]:
        file = getattr(sys.modules[name], "__file__", None)  # a same-named module of another
        if file and root not in Path(file).resolve().parents:  # repository is not reused
            del sys.modules[name]
    importlib.invalidate_caches()
    try:
        with _on_path(root):
            module = importlib.import_module(mod_name)
    except Exception as exc:
        raise ModelError(source, fld, f"names module {mod_name!r}, which cannot be imported "
                         f"from the repository root: {type(exc).__name__}: {exc}",
                         line=line) from None
    file = getattr(module, "__file__", None)
    if not file or os.path.realpath(file) != origin:  # pragma: no cover - a racing import
        raise ModelError(source, fld, f"names module {mod_name!r}, which was imported from "
                         "elsewhere than the repository's file", line=line)
    fn = getattr(module, func, None)
    if not callable(fn):
        raise ModelError(source, fld, f"names {func!r}, which is not a function of module "
                         f"{mod_name!r}", line=line)
    file = getattr(module, "__file__", None)
    return fn, (Path(file).resolve() if file else None)
