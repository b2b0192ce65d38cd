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
import sys
from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterable, Mapping, Sequence

from .assert_models import ARRAY_KEYS, Built, NotAModelError, build_models, refusal
from .failure_report import Layer, failure_report, requirement_origins, result_record
from ..errors import EigengateError, ModelError

if TYPE_CHECKING:  # pragma: no cover
    from types import FrameType

    from ..scan.config import Config
    from ..scan.engine import ModelResult
    from ..model.core import Model

__all__ = ["StabilityAssertionError", "NotAModelError", "RequirementArgumentError", "Layer",
           "Checker", "Subject", "check", "of", "parse_layer", "result_record"]



class StabilityAssertionError(AssertionError):
    """A stability requirement is not met. ``str()`` is the full report; ``records`` holds the
    same facts as plain data (one dict per failing model, see :func:`result_record`)."""

    def __init__(self, report: str, records: Sequence[Mapping[str, Any]] = ()) -> None:
        super().__init__(report)
        self.report = report
        self.records = list(records)

    def __str__(self) -> str:
        return self.report


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
              on_uncertain: str | None = None, loop: str | None = None,
              **kwargs: Any) -> tuple["ModelResult", ...]:
        """Assert that the model meets the given requirements (and the defaults) now.

        ``kwargs`` are requirement keywords (``stable=True``, ``min_damping=0.3``, ...) plus,
        for matrices and python-control objects, ``sample_period``, ``states``, ``inputs``,
        ``outputs`` and ``name``. ``loop="open"`` says that matrices or a python-control
        object are the open-loop transfer ``L``: eigengate closes it with unity negative
        feedback, margin keywords measure ``L``, the others judge the closed loop. A
        requirement the model cannot be judged by (a margin of a system given as it is) is
        refused with :class:`RequirementArgumentError`. Returns the results, one per
        operating point.
        """
        __tracebackhide__ = True
        build = {k: kwargs.pop(k) for k in ARRAY_KEYS if k in kwargs}
        built = self._models(system, operating_point, build, "stability.check()", loop)
        call = parse_layer(kwargs, "stability.check()", "this call")
        return self._assert(built, self.defaults + (call,), on_uncertain,
                            use_file=True, context="stability.check()")

    def of(self, *system: Any, operating_point: str | None = None,
           on_uncertain: str | None = None, loop: str | None = None,
           **build: Any) -> "Subject":
        """A subject to chain assertions on: ``of(sys).is_stable().min_damping(0.3)``;
        ``loop="open"`` as in :meth:`check`."""
        __tracebackhide__ = True
        bad = [k for k in build if k not in ARRAY_KEYS]
        if bad:
            raise TypeError(f"stability.of() got unexpected keyword {bad[0]!r}: requirements "
                            "go in the chain (.min_damping(0.3)) or in stability.check()")
        built = self._models(system, operating_point, build, "stability.of()", loop)
        # the defaults and the file's own are asserted later: refused now, at the call
        self._refuse_unmet(built, self.defaults, "stability.of()", use_file=True)
        subject = Subject(self, built, on_uncertain, _caller())
        if self.defaults or any(m.requirements for m in built.models):
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
                where: str, loop: str | None) -> Built:
        __tracebackhide__ = True
        try:
            return build_models(system, point, build, where, loop, self.search, self.config)
        except ModelError as exc:  # raised afresh here: the engine's frames say nothing
            raise ModelError(exc.source, exc.field, exc.problem, line=exc.line,
                             hint=exc.hint) from None

    def _refuse_unmet(self, built: Built, layers: Sequence[Layer], context: str, *,
                      use_file: bool, only: set[str] | None = None) -> None:
        """Raise :class:`RequirementArgumentError` for the first requirement that a model of
        ``built`` cannot be judged by: it is never passed over."""
        __tracebackhide__ = True
        from ..rules.applicability import first_missing, provided, unmet_for
        from ..rules.requirements import apply_layers

        for model in built.models:
            base = (model.requirements, model.disabled) if use_file else ((), ())
            reqs = apply_layers([base] + [(lay.requirements, lay.off) for lay in layers])
            reqs = tuple(r for r in reqs if only is None or r.rule in only)
            for req, why in unmet_for(model, reqs, together=built.models):
                have = provided(model)
                need = first_missing(req.needs, have) if req.needs not in have else ""
                origin = requirement_origins(model, (req,), layers, use_file)[req.rule]
                raise RequirementArgumentError(context, req.info.key, None, problem=refusal(
                    req.info.key, why, need, built, origin))

    # ---- evaluation
    def _assert(self, built: Built, layers: Sequence[Layer], on_uncertain: str | None, *,
                use_file: bool, context: str,
                only: Iterable[str] | None = None) -> tuple["ModelResult", ...]:
        __tracebackhide__ = True
        from ..scan.engine import check_model
        from ..rules.requirements import apply_layers

        only = None if only is None else set(only)
        self._refuse_unmet(built, layers, context, use_file=use_file, only=only)
        what = built.what
        results, failures, checked = [], [], 0
        for model in built.models:
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

    def __init__(self, checker: Checker, built: Built, on_uncertain: str | None,
                 where: str = "") -> None:
        self._checker = checker
        self.where = where
        self._built = built
        self.models = built.models
        self.what = built.what
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
        """Modal analysis of the (single) model: :class:`~eigengate.analysis.modes.Spectrum`
        (for a sparse model, the partial spectrum of the sparse search)."""
        from ..analysis.sparse_modes import spectrum_of

        return spectrum_of(self.model)

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
            self._checker._assert(self._built, (layer,), self._on_uncertain,
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
            self._checker._assert(self._built, layers, self._on_uncertain,
                                  use_file=True, context="stability.of()", only=left)
        except StabilityAssertionError as exc:
            where = f" at {self.where}" if self.where else ""
            report = (f"stability.of(){where}: requirements the chain did not state, checked "
                      f"when the test returned:\n{exc.report}")
            raise StabilityAssertionError(report, exc.records) from None


def _caller() -> str:
    """``file:line`` of the first frame outside eigengate (where the user called us)."""
    frame: "FrameType | None" = sys._getframe(1)
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
