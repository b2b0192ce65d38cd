"""Stability assertions on models built in code: one call with keyword thresholds, or a chain.

Plain code, usable without pytest; the ``stability`` fixture of the pytest plugin is a
:class:`Checker` that also carries the requirements of the test's markers::

    from eigengate.pytest.assertions import check, of

    check(A, stable=True, min_damping=0.3)
    of(sys).is_stable().min_damping(0.3).equilibrium("stable-node")

Anything that describes a model is accepted: a square matrix ``A`` (numpy array or nested
list), matrices ``A, B, C, D``, a python-control ``StateSpace`` or ``TransferFunction``, an
:class:`~eigengate.model.core.Model`, or the path of a model file. Requirement keywords are the
keys of a model file's ``requirements:`` mapping and are validated by the same parser.

A requirement that is not met raises :class:`StabilityAssertionError`, an ``AssertionError``
whose text is the report: requirement and threshold, measured value and margin, the offending
modes (eigenvalue, ζ, ωn, τ, participating states), the note when a value is within its
numerical uncertainty, and the value that would have passed.

Requirements are layered, general first, and the closer layer wins key by key: a model file's
own requirements (with the repository layers of ``[tool.eigengate]``), the checker's
``defaults`` (markers, module to function), then what the call itself states. A chain asserts
each step at once; the defaults it does not restate are asserted by :meth:`Checker.finish`
(the pytest plugin calls it when the test function returns).
"""

from __future__ import annotations

import os
import reprlib
import sys
from dataclasses import replace
from pathlib import Path
from types import FrameType
from typing import TYPE_CHECKING, Any, Iterable, Mapping, Sequence

from .failure_report import Layer, failure_report, requirement_origins, result_record
from ..errors import EigengateError, ModelError

if TYPE_CHECKING:  # pragma: no cover
    from ..scan.config import Config
    from ..scan.engine import ModelResult
    from ..model.core import Model

__all__ = ["StabilityAssertionError", "NotAModelError", "RequirementArgumentError", "Layer",
           "Checker", "Subject", "check", "of", "parse_layer", "result_record"]

_ARRAY_KEYS = ("sample_period", "states", "inputs", "outputs", "name")
_ACCEPTED = ("a square matrix A (numpy array or nested list), matrices A, B, C, D, a "
             "python-control StateSpace or TransferFunction, an eigengate Model, or a model "
             "file path")


class StabilityAssertionError(AssertionError):
    """A stability requirement is not met. ``str()`` is the full report; ``records`` holds the
    same facts as plain data (one dict per failing model, see :func:`result_record`)."""

    def __init__(self, report: str, records: Sequence[Mapping[str, Any]] = ()) -> None:
        super().__init__(report)
        self.report = report
        self.records = list(records)

    def __str__(self) -> str:
        return self.report


class NotAModelError(EigengateError, TypeError):
    """Something that does not describe a model was given; carries it as ``given``."""

    def __init__(self, where: str, given: Any, hint: str | None = None) -> None:
        self.where, self.given = where, given
        text = (f"{where} expected a model ({_ACCEPTED}), got {type(given).__name__}: "
                f"{_short(given)}")
        super().__init__(text + (f" ({hint})" if hint else ""))


class RequirementArgumentError(EigengateError, ValueError):
    """A requirement keyword (of a call, a chain step or a marker) has a bad key or value."""

    def __init__(self, origin: str, key: str, value: Any, error: ModelError | None = None, *,
                 problem: str = "") -> None:
        self.origin, self.key, self.value = origin, key, value
        if error is None:
            text = f"{origin}: {problem}"
        else:
            text = f"{origin}: {key}={value!r}: {error.field or key} {error.problem}"
            text += f" ({error.hint})" if error.hint else ""
        super().__init__(text)


def _short(value: Any) -> str:
    r = reprlib.Repr()
    r.maxstring, r.maxother, r.maxlist, r.maxdict = 50, 50, 4, 4
    return r.repr(value)


def parse_layer(mapping: Mapping[str, Any], origin: str, label: str | None = None) -> Layer:
    """Validate requirement keywords with the model-file parser; one bad key or value raises
    :class:`RequirementArgumentError` naming ``origin``, the key and the value. ``label``
    (default ``origin``) is how reports name the layer."""
    from ..rules.parsing import parse_requirement_layer

    reqs: list = []
    off: list[str] = []
    for key, value in mapping.items():
        try:
            r, o = parse_requirement_layer({key: value}, origin, prefix="")
        except ModelError as exc:
            raise RequirementArgumentError(origin, str(key), value, exc) from None
        reqs.extend(r)
        off.extend(o)
    return Layer(label or origin, tuple(reqs), tuple(off), tuple(str(k) for k in mapping))


# ---------------------------------------------------------------------------- models
def _kind_of(obj: Any) -> str:
    return type(obj).__module__.split(".")[0]


def _is_matrix(obj: Any) -> bool:
    if isinstance(obj, (list, tuple)):
        return True
    return _kind_of(obj) == "numpy" and hasattr(obj, "shape") and hasattr(obj, "dtype") \
        and getattr(obj, "ndim", 0) >= 1


def _shape(obj: Any) -> str:
    shape = getattr(obj, "shape", None)
    if shape is None:
        rows = len(obj)
        cols = len(obj[0]) if rows and isinstance(obj[0], (list, tuple)) else 1
        shape = (rows, cols)
    return "×".join(str(s) for s in shape)


def _describe(system: Sequence[Any], models: Sequence["Model"]) -> str:
    first = system[0]
    if len(system) > 1:
        names = "ABCDE"
        return "matrices " + ", ".join(f"{names[i]} ({_shape(m)})" for i, m in
                                       enumerate(system) if m is not None)
    if _is_matrix(first):
        return f"{_shape(first)} matrix A"
    if isinstance(first, (str, os.PathLike)):
        return models[0].source if models else os.fspath(first)
    if _kind_of(first) == "control":
        n = models[0].n_states if models else "?"
        return f"control.{type(first).__name__} ({n} states)"
    m = models[0]
    return f"eigengate Model {m.title}" + ("" if m.source.startswith("<") else f" ({m.source})")


class Checker:
    """Asserts stability requirements on models; see the module documentation.

    Parameters
    ----------
    defaults
        Requirement layers applied to every model, general first (the pytest plugin passes the
        test's markers, module, class, then function).
    search
        Folders a relative model file path is looked up in, in order (the plugin passes the
        test file's folder, then the rootdir). Default: the current folder.
    config
        Repository policy: its layers apply below a model file's own requirements, as in the
        command line. Arrays and python-control objects get none of them.
    """

    def __init__(self, *, defaults: Sequence[Layer] = (), search: Sequence[str | Path] = (),
                 config: "Config | None" = None) -> None:
        self.defaults = tuple(defaults)
        self.search = tuple(Path(p) for p in search) or (Path.cwd(),)
        self.config = config
        self._records: dict[int, tuple["Model", dict[str, Any]]] = {}
        self._pending: list[Subject] = []

    @property
    def records(self) -> list[dict[str, Any]]:
        """Figures of every model checked so far (one per model, failed if any check
        failed), as :func:`result_record` gives them."""
        return [rec for _, rec in self._records.values()]

    # ---- front doors
    def check(self, *system: Any, operating_point: str | None = None,
              on_uncertain: str | None = None, **kwargs: Any) -> tuple["ModelResult", ...]:
        """Assert that the model meets the given requirements (and the defaults) now.

        ``kwargs`` are requirement keywords (``stable=True``, ``min_damping=0.3``, ...) plus,
        for matrices and python-control objects, ``sample_period``, ``states``, ``inputs``,
        ``outputs`` and ``name``. Returns the results, one per operating point.
        """
        __tracebackhide__ = True
        build = {k: kwargs.pop(k) for k in _ARRAY_KEYS if k in kwargs}
        models, what = self._models(system, operating_point, build, "stability.check()")
        call = parse_layer(kwargs, "stability.check()", "this call")
        return self._assert(models, what, self.defaults + (call,), on_uncertain,
                            use_file=True, context="stability.check()")

    def of(self, *system: Any, operating_point: str | None = None,
           on_uncertain: str | None = None, **build: Any) -> "Subject":
        """A subject to chain assertions on: ``of(sys).is_stable().min_damping(0.3)``."""
        __tracebackhide__ = True
        bad = [k for k in build if k not in _ARRAY_KEYS]
        if bad:
            raise TypeError(f"stability.of() got unexpected keyword {bad[0]!r}: requirements "
                            "go in the chain (.min_damping(0.3)) or in stability.check()")
        models, what = self._models(system, operating_point, build, "stability.of()")
        subject = Subject(self, models, what, on_uncertain, _caller())
        if self.defaults or any(m.requirements for m in models):
            self._pending.append(subject)
        return subject

    def finish(self) -> None:
        """Assert the defaults (and model-file requirements) that no chain step restated."""
        __tracebackhide__ = True
        pending, self._pending = self._pending, []
        for subject in pending:
            subject._finish()

    # ---- building models
    def _models(self, system: Sequence[Any], point: str | None, build: dict[str, Any],
                where: str) -> tuple[list["Model"], str]:
        __tracebackhide__ = True
        try:
            return self._build(system, point, build, where)
        except ModelError as exc:  # raised afresh here: the engine's frames say nothing
            raise ModelError(exc.source, exc.field, exc.problem, line=exc.line,
                             hint=exc.hint) from None

    def _build(self, system: Sequence[Any], point: str | None, build: dict[str, Any],
               where: str) -> tuple[list["Model"], str]:
        __tracebackhide__ = True
        if not system:
            raise TypeError(f"{where} needs a model: {_ACCEPTED}")
        if len(system) > 5:
            raise TypeError(f"{where} takes at most 5 matrices (A, B, C, D, E), got "
                            f"{len(system)} arguments")
        first = system[0]
        if len(system) > 1 or _is_matrix(first):
            for obj in system:
                if obj is not None and not _is_matrix(obj):
                    raise NotAModelError(where, obj, "each of A, B, C, D must be a matrix")
            from ..model.core import from_arrays

            models = [from_arrays(*system, **build)]
        elif _kind_of(first) == "control":
            from ..model.core import from_control

            models = [from_control(first, **build)]
        else:
            from ..model.core import Model

            if isinstance(first, Model):
                models = [first]
            elif isinstance(first, (str, os.PathLike)) and not isinstance(first, bytes):
                models = self._load(first, where)
            else:
                hint = "wrap a one-state model as [[a]]" if isinstance(first, (int, float)) \
                    else None
                raise NotAModelError(where, first, hint)
            if build:
                raise TypeError(f"{where}: {', '.join(build)} apply to matrices and "
                                "python-control objects only; a model or model file brings "
                                "its own")
        if point is not None:
            chosen = [m for m in models if m.label == point]
            if not chosen:
                labels = ", ".join(repr(m.label) for m in models if m.label) or "none"
                raise ModelError(models[0].source, "operating_points",
                                 f"has no operating point labelled {point!r}",
                                 hint=f"labels: {labels}")
            models = chosen
        return models, _describe(system, models)

    def _load(self, path: str | os.PathLike[str], where: str) -> list["Model"]:
        __tracebackhide__ = True
        from ..load.loader import load_models

        given = Path(path)
        candidates = [given] if given.is_absolute() else [d / given for d in self.search]
        found = next((c for c in candidates if c.is_file()), None)
        if found is None:
            looked = ", ".join(str(c.parent) for c in candidates)
            raise ModelError(os.fspath(path), "", "does not exist", hint=f"{where} looked in "
                             f"{looked}")
        root = None
        if self.config is not None:
            try:
                found.resolve().relative_to(self.config.root.resolve())
                root = self.config.root
            except ValueError:
                root = None
        models = load_models(found, root=root, allow_python=True)
        if self.config is not None and root is not None:
            models = [self.config.effective(m) for m in models]
        return models

    # ---- evaluation
    def _assert(self, models: Sequence["Model"], what: str, layers: Sequence[Layer],
                on_uncertain: str | None, *, use_file: bool, context: str,
                only: Iterable[str] | None = None) -> tuple["ModelResult", ...]:
        __tracebackhide__ = True
        from ..scan.engine import check_model
        from ..rules.requirements import apply_layers

        only = None if only is None else set(only)
        results, failures, checked = [], [], 0
        for model in models:
            base = (model.requirements, model.disabled) if use_file else ((), ())
            reqs = apply_layers([base] + [(lay.requirements, lay.off) for lay in layers])
            if only is not None:
                reqs = tuple(r for r in reqs if r.rule in only)
            if not reqs and only is None:
                raise TypeError(f"{context}: no requirement to check on {what}: pass keywords "
                                "such as stable=True or min_damping=0.3, or mark the test "
                                "with @pytest.mark.stability_requirements(...)")
            if not reqs:
                continue
            checked += len(reqs)
            origin = requirement_origins(model, reqs, layers, use_file)
            effective = replace(model, requirements=reqs, disabled=(),
                                on_uncertain=on_uncertain or model.on_uncertain)
            result = check_model(effective)
            results.append(result)
            errors = [f for f in result.findings if f.severity == "error"]
            record = result_record(result, "fail" if errors else "pass")
            if model.source.startswith("<"):
                record["model"] = what
            seen = self._records.get(id(model))
            if seen is not None and seen[1]["verdict"] == "fail" and not errors:
                record = seen[1]  # a later passing step does not hide an earlier failure
            self._records[id(model)] = (model, record)  # the model is kept: ids stay unique
            if errors:
                failures.append((result, errors, origin, record))
        if failures:
            raise StabilityAssertionError(failure_report(what, failures, checked),
                                          [rec for *_, rec in failures])
        return tuple(results)


class Subject:
    """Chained assertions on one model (or each operating point of a model file). Each step
    asserts at once and returns the subject; ``spectrum`` and ``results`` give the figures."""

    def __init__(self, checker: Checker, models: Sequence["Model"], what: str,
                 on_uncertain: str | None, where: str = "") -> None:
        self._checker = checker
        self.where = where
        self.models = tuple(models)
        self.what = what
        self._on_uncertain = on_uncertain
        self._stated: set[str] = set()

    def __repr__(self) -> str:
        return f"<stability subject {self.what}>"

    @property
    def model(self) -> "Model":
        if len(self.models) != 1:
            raise ValueError(f"{self.what} has {len(self.models)} operating points; use "
                             "operating_point= or .models")
        return self.models[0]

    @property
    def spectrum(self):
        """Modal analysis of the (single) model: :class:`~eigengate.analysis.modes.Spectrum`."""
        from ..analysis.modes import analyse

        return analyse(self.model)

    # ---- steps
    def is_stable(self, marginal: bool = False) -> "Subject":
        """Asymptotically stable (Hurwitz / Schur); ``marginal=True`` accepts simple
        eigenvalues on the boundary."""
        __tracebackhide__ = True
        return self._step(".is_stable()", stable="marginal" if marginal else True)

    def min_decay_rate(self, alpha: float) -> "Subject":
        """Every mode decays at least like exp(-αt), α in 1/s."""
        __tracebackhide__ = True
        return self._step(f".min_decay_rate({alpha!r})", min_decay_rate=alpha)

    def min_damping(self, zeta: float) -> "Subject":
        """Every oscillatory mode has damping ratio ζ ≥ ``zeta``."""
        __tracebackhide__ = True
        return self._step(f".min_damping({zeta!r})", min_damping=zeta)

    def max_frequency(self, omega: float) -> "Subject":
        """Every mode has natural frequency ωn ≤ ``omega`` rad/s."""
        __tracebackhide__ = True
        return self._step(f".max_frequency({omega!r})", max_frequency=omega)

    def in_region(self, **region: float) -> "Subject":
        """All poles in the region of ``min_decay_rate``, ``min_damping``, ``max_frequency``."""
        __tracebackhide__ = True
        return self._step(".in_region()", pole_region=region)

    def equilibrium(self, kind: str) -> "Subject":
        """The origin is of type ``kind`` (``stable-node``, ``saddle``, ...)."""
        __tracebackhide__ = True
        return self._step(f".equilibrium({kind!r})", equilibrium=kind)

    def no_saddle(self) -> "Subject":
        """Not both stable and unstable directions."""
        __tracebackhide__ = True
        return self._step(".no_saddle()", no_saddle=True)

    def directions(self, **counts: int) -> "Subject":
        """Numbers of ``stable``, ``unstable`` and ``center`` directions."""
        __tracebackhide__ = True
        return self._step(".directions()", directions=counts)

    def meets(self, **requirements: Any) -> "Subject":
        """Requirement keywords as in :meth:`Checker.check`; with none, assert the defaults
        and the model file's own requirements now."""
        __tracebackhide__ = True
        if not requirements:
            self._finish()
            return self
        return self._step(".meets()", **requirements)

    # ---- machinery
    def _step(self, label: str, **mapping: Any) -> "Subject":
        __tracebackhide__ = True
        layer = parse_layer(mapping, f"stability.of(){label}", label)
        from ..rules.catalogue import rule_by_key

        self._stated.update(rule_by_key(k).id for k in mapping)
        if layer.requirements:
            self._checker._assert(self.models, self.what, (layer,), self._on_uncertain,
                                  use_file=False, context=f"stability.of(){label}")
        return self

    def _finish(self) -> None:
        __tracebackhide__ = True
        from ..rules.requirements import apply_layers

        layers = self._checker.defaults
        rules = {r.rule for m in self.models for r in apply_layers(
            [(m.requirements, m.disabled)] + [(lay.requirements, lay.off) for lay in layers])}
        left = rules - self._stated
        self._stated |= rules
        if not left:
            return
        try:
            self._checker._assert(self.models, self.what, layers, self._on_uncertain,
                                  use_file=True, context="stability.of()", only=left)
        except StabilityAssertionError as exc:
            where = f" at {self.where}" if self.where else ""
            report = (f"stability.of(){where}: requirements the chain did not state, checked "
                      f"when the test returned:\n{exc.report}")
            raise StabilityAssertionError(report, exc.records) from None


def _caller() -> str:
    """``file:line`` of the first frame outside eigengate (where the user called us)."""
    frame: FrameType | None = sys._getframe(1)
    while frame is not None and frame.f_globals.get("__name__", "").startswith("eigengate"):
        frame = frame.f_back
    if frame is None:
        return ""
    name = frame.f_code.co_filename
    try:
        name = os.path.relpath(name)
    except ValueError:  # another drive on Windows
        pass
    return f"{Path(name).as_posix()}:{frame.f_lineno}"


def check(*system: Any, **kwargs: Any) -> tuple["ModelResult", ...]:
    """:meth:`Checker.check` without defaults: ``check(A, stable=True, min_damping=0.3)``."""
    __tracebackhide__ = True
    return Checker().check(*system, **kwargs)


def of(*system: Any, **kwargs: Any) -> Subject:
    """:meth:`Checker.of` without defaults: ``of(sys).is_stable().min_damping(0.3)``."""
    __tracebackhide__ = True
    return Checker().of(*system, **kwargs)
