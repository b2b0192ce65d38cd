"""The validated model every other stage reads: matrices, sample period, signal names, requirements.

A :class:`Model` is built by the file loader, by :func:`from_arrays` or by :func:`from_control`.
Whatever the source, the same shape and value checks run here, so every front end gets the
same errors with the same wording.
"""

from __future__ import annotations

import functools
from dataclasses import MISSING, dataclass, field, fields
from typing import TYPE_CHECKING, Any, Mapping, Sequence

from . import limits as _limits
from ..errors import ModelError
from .matrices import (  # noqa: F401 (re-exported: the model's matrix checks)
    MAX_MAGNITUDE, MAX_STATES, MIN_SCALE, SPARSE_THRESHOLD, _check_scale, as_matrix, as_sparse,
    check_scale_top, dense_limit, is_sparse, matrix_and_top)

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np


__all__ = ["Model", "from_arrays", "from_control", "as_matrix", "as_sparse", "is_sparse",
           "MAX_STATES", "SPARSE_THRESHOLD", "dense_limit", "sample_period_problem"]

#: Sample periods in seconds (femtoseconds to about 30 million years): ln|z|/T neither
#: overflows nor underflows to an exact zero for any |z| that double precision holds.
MIN_SAMPLE_PERIOD = 1e-15
MAX_SAMPLE_PERIOD = 1e15


@dataclass(frozen=True, eq=False)
class Model:
    """A linear time-invariant model, ready for modal analysis.

    ``x' = A x + B u`` (or ``E x' = A x + B u`` for descriptor models), ``y = C x + D u``;
    for discrete models ``x[k+1] = A x[k] + B u[k]`` with sample period ``sample_period``.
    A closed loop formed by the loader is stored as its closed-loop matrices; ``structure``
    says how it was formed. ``requirements`` are the model's own; ``disabled`` lists rule ids
    the model switches off (``stable: false``) so a repository default does not apply to it;
    ``on_uncertain`` is None when the model leaves it to the repository policy, and so is
    ``require`` (``"certified"``: a verdict only estimated counts as uncertain).
    ``loop_parts``, ``nonlinear`` and ``parameters`` carry what margin, equilibrium and
    parameter-range requirements need.
    """

    name: str
    A: "np.ndarray"
    B: "np.ndarray"
    C: "np.ndarray"
    D: "np.ndarray"
    E: "np.ndarray | None" = None
    sample_period: float | None = None
    states: tuple[str, ...] = ()
    inputs: tuple[str, ...] = ()
    outputs: tuple[str, ...] = ()
    label: str | None = None
    source: str = "<arrays>"
    structure: str = "state-space"
    requirements: tuple[Any, ...] = ()
    known_modes: tuple[Any, ...] = ()
    on_uncertain: str | None = None
    require: str | None = None
    disabled: tuple[str, ...] = ()
    waivers: tuple[Any, ...] = ()
    lines: Mapping[str, int] = field(default_factory=dict)
    allowed_drift: Mapping[str, Any] | None = None  # regression tolerances of the model file
    #: Plant and controller kept apart (:class:`eigengate.analysis.margins.LoopParts`) when the loader
    #: closed the loop, so margins can break it; None otherwise.
    loop_parts: Any = None
    #: The vector field behind a linearised model (:class:`eigengate.analysis.nonlinear.FieldPoint`).
    nonlinear: Any = None
    #: Stable identity of an operating point within its file, kept when its label changes:
    #: the point's ``id``, else its position (``#2``), with the sweep position in front for a
    #: swept vector field (``@1,0/#0``); None for a file of one model. See docs/baselines.md.
    point_id: str | None = None
    #: The declared uncertain parameters (:class:`eigengate.analysis.parametric.ParameterBox`:
    #: names, nominal values, ranges and a way to form the matrices at other values); None
    #: without a ``parameters`` block. Not stored in the result cache (a cached result is
    #: never analysed again).
    parameters: Any = None
    #: The numeric inputs of the model file (:class:`eigengate.load.inputs.ModelInputs`), kept
    #: for baselines and cause attribution; None for models not read from a file and results
    #: from the cache.
    file_inputs: Any = None
    #: The coordinates of a point of an operating-point grid (``grid:`` in the model file),
    #: as ``((axis, value), ...)`` in the axes' order; None for a model not on a grid.
    grid: tuple[tuple[str, float], ...] | None = None

    @property
    def discrete(self) -> bool:
        return self.sample_period is not None

    def with_fields(self, **changes: Any) -> "Model":
        """A copy with ``changes``: what ``dataclasses.replace`` gives, without its pass
        through the frozen ``__init__`` (about a tenth of a small model's modal analysis). A
        Model has no ``__post_init__`` and every field is an ``__init__`` argument, so copying
        the fields is the same; a subclass (the cache's lazily read model) or a name that is
        no field goes through ``dataclasses.replace`` itself."""
        if type(self) is not Model or not _FIELD_NAMES.issuperset(changes):
            import dataclasses

            return dataclasses.replace(self, **changes)
        new = object.__new__(Model)
        new.__dict__.update(self.__dict__)
        new.__dict__.update(changes)
        return new

    @property
    def n_states(self) -> int:
        return self.A.shape[0]

    @property
    def descriptor(self) -> bool:
        return self.E is not None

    @property
    def sparse(self) -> bool:
        """A and E (when given) are scipy.sparse CSR matrices; B, C, D are always dense."""
        return is_sparse(self.A)

    @property
    def title(self) -> str:
        """``name`` or ``name[label]`` for an operating point."""
        return self.name if self.label is None else f"{self.name}[{self.label}]"

    def line_of(self, field_path: str) -> int | None:
        """Line in the source file where ``field_path`` (or its closest parent) is defined."""
        parts = field_path.split(".")
        while parts:
            line = self.lines.get(".".join(parts))
            if line is not None:
                return line
            parts.pop()
        return None


_FIELD_NAMES = frozenset(f.name for f in fields(Model))
#: Every field's default, in field order (None for the five matrices and name, which have
#: none, and for ``lines``, whose default is made per model).
_DEFAULTS = {f.name: None if f.default is MISSING else f.default for f in fields(Model)}


def new_model(**values: Any) -> Model:
    """``Model(**values)`` without the frozen ``__init__``'s assignment per field: the same
    fields in the same order (a Model has no ``__post_init__``). ``values`` gives name, the
    four matrices A to D and ``lines`` (the fields without a plain default)."""
    assert _REQUIRED.issubset(values) and _FIELD_NAMES.issuperset(values)
    new = object.__new__(Model)
    state = new.__dict__
    state.update(_DEFAULTS)
    state.update(values)
    return new


_REQUIRED = frozenset(("name", "A", "B", "C", "D", "lines"))


def sample_period_problem(value: Any) -> str | None:
    """Why ``value`` is not a usable sample period, or None when it is."""
    import math

    if isinstance(value, bool) or not isinstance(value, (int, float)) \
            or not math.isfinite(value) or value <= 0:
        return f"must be a positive number of seconds, got {value!r}"
    if not MIN_SAMPLE_PERIOD <= value <= MAX_SAMPLE_PERIOD:
        return (f"is {value!r} s, outside the range the s-plane mapping ln(z)/T computes in "
                f"double precision: expected between {MIN_SAMPLE_PERIOD:g} and "
                f"{MAX_SAMPLE_PERIOD:g} s")
    return None


@functools.lru_cache(maxsize=256)
def _default_names(prefix: str, count: int) -> tuple[str, ...]:
    """``(x1, x2, ...)``: the same tuple for every model of a size (tuples do not change)."""
    return tuple(f"{prefix}{i + 1}" for i in range(count))


def _names(given: Sequence[str] | None, count: int, prefix: str, source: str, field_path: str,
           lines: Mapping[str, int]) -> tuple[str, ...]:
    if given is None:
        return _default_names(prefix, count)
    names = tuple(given)
    line = lines.get(field_path)
    if len(names) != count:
        raise ModelError(source, field_path, f"must name {count} signals, got {len(names)}",
                         line=line)
    for n in names:
        if not isinstance(n, str) or not n.strip():
            raise ModelError(source, field_path, f"must hold non-empty strings, got {n!r}",
                             line=line)
    seen: set[str] = set()
    for n in names:
        if n in seen:
            raise ModelError(source, field_path, f"names must be unique, {n!r} appears twice",
                             line=line)
        seen.add(n)
    return names


def from_arrays(
    A: Any,
    B: Any = None,
    C: Any = None,
    D: Any = None,
    E: Any = None,
    *,
    sample_period: float | None = None,
    name: str = "model",
    states: Sequence[str] | None = None,
    inputs: Sequence[str] | None = None,
    outputs: Sequence[str] | None = None,
    label: str | None = None,
    source: str = "<arrays>",
    structure: str = "state-space",
    requirements: Sequence[Any] = (),
    known_modes: Sequence[Any] = (),
    on_uncertain: str | None = None,
    disabled: Sequence[str] = (),
    waivers: Sequence[Any] = (),
    lines: Mapping[str, int] | None = None,
    prefix: str = "",
    sparse: bool | None = None,
) -> Model:
    """Build a validated :class:`Model` from matrices.

    ``B``, ``C`` and ``D`` default to empty (no inputs, no outputs; ``C`` defaults to no
    outputs). ``prefix`` is prepended to field names in error messages (``"plant."``).
    ``sparse``: make A (and E) sparse CSR matrices (True: the sparse modal search), dense
    (False), or, by default, keep a scipy.sparse A sparse above :data:`SPARSE_THRESHOLD`
    states. B, C and D are always dense.
    """
    import numpy as np

    lines = dict(lines or {})

    def fld(key: str) -> str:
        return prefix + key

    def mat(value: Any, key: str) -> np.ndarray:
        return as_matrix(value, source, fld(key), line=lines.get(fld(key)))

    keep = sparse if sparse is not None else \
        is_sparse(A) and A.shape[0] > SPARSE_THRESHOLD

    def spmat(value: Any, key: str) -> Any:
        return as_sparse(value if is_sparse(value) else mat(value, key), source, fld(key),
                         line=lines.get(fld(key)))

    if keep:
        a = spmat(A, "A")
        e_sparse = None if E is None else spmat(E, "E")
        _check_scale(a, lambda p, h=None: ModelError(source, fld("A"), p,
                                                     line=lines.get(fld("A")), hint=h))
    else:
        a, top = matrix_and_top(A, source, fld("A"), lines.get(fld("A")))
        check_scale_top(a, top, lambda p, h=None: ModelError(source, fld("A"), p,
                                                             line=lines.get(fld("A")), hint=h))
    n = a.shape[0]
    if a.shape[0] * a.shape[1] == 0:
        raise ModelError(source, fld("A"), "must not be empty, got a 0×0 matrix",
                         line=lines.get(fld("A")))
    if a.shape[0] != a.shape[1]:
        raise ModelError(source, fld("A"), f"must be square, got {a.shape[0]}×{a.shape[1]}",
                         line=lines.get(fld("A")))
    limit = _limits.MAX_SPARSE_STATES if keep else dense_limit()
    if n > limit:
        what = "a sparse" if keep else "a dense"
        raise ModelError(source, fld("A"), f"has {n} states, more than the limit of {limit} for "
                         f"{what} model" + ("" if keep else " on this machine"),
                         line=lines.get(fld("A")),
                         hint=None if keep else "store A (and E) as a sparse matrix (a "
                         "scipy.sparse.save_npz .npz, a Matrix Market .mtx or a sparse .mat "
                         "file) to use the sparse modal search; see docs/model-format.md")
    b = np.zeros((n, 0)) if B is None else mat(B, "B")
    if B is not None and b.size == 0:
        b = np.zeros((n, 0))
    if b.shape[0] != n:
        raise ModelError(source, fld("B"), f"must have {n} rows (one per state of A), got "
                         f"{b.shape[0]}×{b.shape[1]}", line=lines.get(fld("B")))
    m = b.shape[1]
    c = np.zeros((0, n)) if C is None else mat(C, "C")
    if C is not None and c.size == 0:
        c = np.zeros((0, n))
    if c.shape[1] != n:
        raise ModelError(source, fld("C"), f"must have {n} columns (one per state of A), got "
                         f"{c.shape[0]}×{c.shape[1]}", line=lines.get(fld("C")))
    p = c.shape[0]
    d = np.zeros((p, m)) if D is None else mat(D, "D")
    if D is not None and d.size == 0:
        d = np.zeros((p, m))
    if d.shape != (p, m):
        raise ModelError(source, fld("D"), f"must be {p}×{m} (outputs of C × inputs of B), got "
                         f"{d.shape[0]}×{d.shape[1]}", line=lines.get(fld("D")))
    e = None
    if keep and e_sparse is not None:
        e = e_sparse
        if e.shape != (n, n):
            raise ModelError(source, fld("E"), f"must be {n}×{n} like A, got "
                             f"{e.shape[0]}×{e.shape[1]}", line=lines.get(fld("E")))
        _check_scale(e, lambda p, h=None: ModelError(source, fld("E"), p,
                                                     line=lines.get(fld("E")), hint=h))
        ident = e.nnz == n and bool((e.diagonal() == 1.0).all())
        e = None if ident else e
    elif E is not None:
        e, top = matrix_and_top(E, source, fld("E"), lines.get(fld("E")))
        if e.shape != (n, n):
            raise ModelError(source, fld("E"), f"must be {n}×{n} like A, got "
                             f"{e.shape[0]}×{e.shape[1]}", line=lines.get(fld("E")))
        check_scale_top(e, top, lambda p, h=None: ModelError(source, fld("E"), p,
                                                             line=lines.get(fld("E")), hint=h))
        if np.array_equal(e, np.eye(n)):
            e = None  # an identity E is an ordinary state-space model
    if sample_period is not None:
        problem = sample_period_problem(sample_period)
        if problem:
            raise ModelError(source, "sample_period", problem, line=lines.get("sample_period"))
        sample_period = float(sample_period)
    if on_uncertain not in (None, "fail", "pass"):
        raise ModelError(source, "on_uncertain", f"must be 'fail' or 'pass', got {on_uncertain!r}",
                         line=lines.get("on_uncertain"))
    return new_model(
        name=name,
        A=a, B=b, C=c, D=d, E=e,
        sample_period=sample_period,
        states=_names(states, n, "x", source, fld("states"), lines),
        inputs=_names(inputs, m, "u", source, fld("inputs"), lines),
        outputs=_names(outputs, p, "y", source, fld("outputs"), lines),
        label=label,
        source=source,
        structure=structure,
        requirements=tuple(requirements),
        known_modes=tuple(known_modes),
        on_uncertain=on_uncertain,
        disabled=tuple(disabled),
        waivers=tuple(waivers),
        lines=lines,
    )


def from_control(sys: Any, *, name: str = "model", **kwargs: Any) -> Model:
    """Build a :class:`Model` from a python-control ``StateSpace`` or ``TransferFunction``.

    Transfer functions are realised by python-control (``control.ss``); signal names are taken
    from the object where it carries them.
    """
    import control  # heavy: only when a python-control object is actually given

    if isinstance(sys, control.TransferFunction):
        sys = control.ss(sys)
    if not isinstance(sys, control.StateSpace):
        raise ModelError("<python-control>", "", "must be a control.StateSpace or "
                         f"control.TransferFunction, got {type(sys).__name__}")
    dt = sys.dt
    sample_period = None if dt in (0, None, False) else (None if dt is True else float(dt))
    if dt is True:
        raise ModelError("<python-control>", "dt", "must be a numeric sample period for a "
                         "discrete model, got dt=True (unspecified)")
    names: dict[str, Any] = {}
    for key, attr in (("states", "state_labels"), ("inputs", "input_labels"),
                      ("outputs", "output_labels")):
        labels = getattr(sys, attr, None)
        if labels and key not in kwargs:
            names[key] = list(labels)
    return from_arrays(sys.A, sys.B, sys.C, sys.D, sample_period=sample_period, name=name,
                       source=kwargs.pop("source", "<python-control>"), **names, **kwargs)
