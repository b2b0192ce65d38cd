"""The models the ``stability`` fixture checks: what a test passed, as eigengate models.

Matrices and python-control objects are the system itself (a closed loop, or a plant) unless
``loop="open"`` says the system is the open-loop transfer ``L``; then it is closed with unity
negative feedback exactly as a model file with ``feedback: {output_gain: I}`` is, so the
margins of ``L`` can be measured and the eigenvalue requirements judge the closed loop.
Which requirements each kind of input can be judged by, and what to do about the others, is
said here too (:func:`refusal`).
"""

from __future__ import annotations

import os
import reprlib
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Sequence

from ..errors import EigengateError, ModelError, counted

if TYPE_CHECKING:  # pragma: no cover
    from ..scan.config import Config
    from ..model.core import Model

__all__ = ["NotAModelError", "Built", "ARRAY_KEYS", "LOOP_VALUES", "build_models", "open_loop",
           "refusal"]

ARRAY_KEYS = ("sample_period", "states", "inputs", "outputs", "name")
#: ``loop=`` values: the system given is the closed loop (default) or the open-loop ``L``.
LOOP_VALUES = ("closed", "open")
_ACCEPTED = ("a square matrix A (numpy array or nested list), matrices A, B, C, D, a "
             "python-control StateSpace or TransferFunction, an eigengate Model, or a model "
             "file path")


class NotAModelError(EigengateError, TypeError):
    """Something that does not describe a model was given; carries it as ``given``."""

    def __init__(self, where: str, given: Any, hint: str | None = None) -> None:
        self.where, self.given = where, given
        text = (f"{where} expected a model ({_ACCEPTED}), got {type(given).__name__}: "
                f"{short(given)}")
        super().__init__(text + (f" ({hint})" if hint else ""))


def short(value: Any) -> str:
    r = reprlib.Repr()
    r.maxstring, r.maxother, r.maxlist, r.maxdict = 50, 50, 4, 4
    return r.repr(value)


@dataclass(frozen=True)
class Built:
    """The models of one call, how reports name them, and the kind of input: ``arrays``,
    ``control``, ``model`` or ``file``; ``open`` when given as an open loop."""

    models: tuple["Model", ...]
    what: str
    kind: str
    open: bool = False


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


def build_models(system: Sequence[Any], point: str | None, build: dict[str, Any], where: str,
                 loop: str | None, search: Sequence[Path], config: "Config | None") -> Built:
    """The models a fixture call names (``where`` is the call, for messages)."""
    __tracebackhide__ = True
    if loop is not None and loop not in LOOP_VALUES:
        raise ValueError(f"{where}: loop must be 'open' (the system given is the open-loop "
                         f"transfer L) or 'closed' (the default: it is the system itself), got "
                         f"{loop!r}")
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

        models, kind = [from_arrays(*system, **build)], "arrays"
    elif _kind_of(first) == "control":
        from ..model.core import from_control

        models, kind = [from_control(first, **build)], "control"
    else:
        from ..model.core import Model

        if isinstance(first, Model):
            models, kind = [first], "model"
        elif isinstance(first, (str, os.PathLike)) and not isinstance(first, bytes):
            models, kind = _load(first, where, search, config), "file"
        else:
            hint = "wrap a one-state model as [[a]]" if isinstance(first, (int, float)) \
                else None
            raise NotAModelError(where, first, hint)
        given = [k for k in build] + (["loop='open'"] if loop == "open" else [])
        if given:
            raise TypeError(f"{where}: {', '.join(given)} apply to matrices and "
                            "python-control objects only; a model or model file brings "
                            "its own" + (" (a model file declares its loop with a feedback "
                                         "block)" if loop == "open" else ""))
    what = _describe(system, models)
    if loop == "open":
        models = [open_loop(models[0])]
        what += " as the open loop L"
    if point is not None:
        chosen = [m for m in models if m.label == point]
        if not chosen:
            labels = ", ".join(repr(m.label) for m in models if m.label) or "none"
            raise ModelError(models[0].source, "operating_points",
                             f"has no operating point labelled {point!r}",
                             hint=f"labels: {labels}")
        models = chosen
    return Built(tuple(models), what, kind, loop == "open")


def _load(path: str | os.PathLike[str], where: str, search: Sequence[Path],
          config: "Config | None") -> list["Model"]:
    __tracebackhide__ = True
    from ..load.loader import load_models

    given = Path(path)
    candidates = [given] if given.is_absolute() else [d / given for d in search]
    found = next((c for c in candidates if c.is_file()), None)
    if found is None:
        looked = ", ".join(str(c.parent) for c in candidates)
        raise ModelError(os.fspath(path), "", "does not exist", hint=f"{where} looked in "
                         f"{looked}")
    root = None
    if config is not None:
        try:
            found.resolve().relative_to(config.root.resolve())
            root = config.root
        except ValueError:
            root = None
    models = load_models(found, root=root, allow_python=True)
    if config is not None and root is not None:
        models = [config.effective(m) for m in models]
    return models


def open_loop(model: "Model") -> "Model":
    """``model`` taken as the open-loop transfer ``L`` and closed with unity negative
    feedback (``u = r − y``), built as the model file ``plant: L, feedback: {output_gain: I}``
    is, so its margins are measured by :mod:`eigengate.analysis.margins` with the loop broken at
    ``L``'s input. ``L`` must be square (as many outputs as inputs)."""
    __tracebackhide__ = True
    import numpy as np

    from ..load.loader import load_document

    p, m = model.C.shape[0], model.B.shape[1]
    if p != m or not m:
        raise ModelError(model.source, "loop", f"is 'open', so the system is the loop transfer "
                         f"L, which must be square and have inputs: got "
                         f"{counted(p, 'output')} and {counted(m, 'input')}", hint="give L with one output per input (unity "
                         "feedback closes output i onto input i)")
    plant: dict[str, Any] = {"A": model.A, "B": model.B, "C": model.C, "D": model.D,
                             "states": list(model.states), "inputs": list(model.inputs),
                             "outputs": list(model.outputs)}
    if model.E is not None:
        plant["E"] = model.E
    doc: dict[str, Any] = {"model_format": 1, "name": model.name, "plant": plant,
                           "feedback": {"output_gain": np.eye(m)}}
    if model.discrete:
        doc.update(domain="discrete", sample_period=model.sample_period)
    (closed,) = load_document(doc, source=model.source)
    return closed


def refusal(key: str, why: str, need: str, built: Built, stated_by: str) -> str:
    """The message refusing requirement ``key`` on the input ``built`` (it ``why``)."""
    from ..rules.applicability import NEEDS

    by = f" (stated by {stated_by})" if stated_by else ""
    text = f"{key}{by} cannot be evaluated on {built.what}: it {why}"
    if need == "loop":
        given = {"arrays": "the matrices are", "control": "the object is"}.get(built.kind)
        fix = {"model": "check a model loaded from a model file with a feedback block, or "
                        "pass the open loop's matrices with loop='open'",
               "file": "add a feedback block to the model file, or pass the open loop's "
                       "matrices or python-control object with loop='open'"}.get(
            built.kind, f"pass loop='open' if {given} the open-loop transfer L (eigengate "
            "closes it with unity negative feedback and breaks the loop there), or check a "
            "model file whose feedback block closes the loop")
    elif need in NEEDS and built.kind == "file":
        fix = NEEDS[need][1] + " in the model file"
    elif need == "parameters":
        fix = "a parameter range is declared in a model file: check a model file with a " \
              "parameters block"
    elif need in NEEDS:
        fix = "equilibrium requirements need a nonlinear model: check a model file with a " \
              "vector_field block"
    else:
        fix = "check the whole model file, without operating_point="
    return f"{text}; {fix}, or drop the requirement"
