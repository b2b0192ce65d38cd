"""Which requirements a model can be judged by: the one place that says so.

Eigenvalue requirements apply to every model. Margin requirements need a feedback loop to
break (``model.loop_parts``); ``robust`` needs declared parameters (``model.parameters``); equilibrium requirements need a vector field
(``model.nonlinear``), and those about the set of equilibria also need its search box. Each
requirement class names what it needs in ``needs``; :func:`provided` says what a model has.

A requirement whose need is not met is never passed over: the loader refuses it in a model
file, the ``stability`` fixture refuses it with the input kind and the way to make it
evaluable, and :func:`~eigengate.rules.requirements.evaluate` turns whatever still reaches it (a
repository-wide target, say) into a failing verdict (:func:`not_evaluable`). A need this
module does not know is never met, so a new kind of requirement is refused until it is
taught here.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Callable, Iterable, Mapping, Protocol, Sequence

if TYPE_CHECKING:  # pragma: no cover
    from ..errors import ModelError
    from ..model.core import Model
    from .catalogue import Verdict

__all__ = ["NEEDS", "provided", "first_missing", "unmet", "why_not", "unmet_for", "not_evaluable", "refuse_unmet"]

class Needy(Protocol):
    """What this module reads of a requirement (``rules.requirements.Requirement`` has it;
    a protocol keeps this module below the requirements that call it)."""

    @property
    def needs(self) -> str: ...

    @property
    def rule(self) -> str: ...

    @property
    def info(self) -> Any: ...

    def spec(self) -> str: ...

    @property
    def _verdict(self) -> Callable[..., "Verdict"]: ...


#: need → (what is missing, in words; how a model file supplies it)
NEEDS: dict[str, tuple[str, str]] = {
    "loop": ("needs a closed loop to break, but the model has no feedback loop",
             "add a feedback block (state_gain, output_gain or controller)"),
    "vector field": ("needs a vector field, but the model is linear (no vector_field block)",
                     "describe the model with a vector_field block"),
    "equilibria box": ("needs the box of equilibria to search, but the model declares none",
                       "add vector_field.equilibria: {box: {...}}"),
    "parameters": ("needs uncertain parameters to range over, but the model declares none "
                   "(no parameters block)",
                   "add a parameters block (each parameter with nominal, range and affects)"),
}


def provided(model: "Model") -> frozenset[str]:
    """The needs ``model`` meets."""
    out = set()
    if getattr(model, "loop_parts", None) is not None:
        out.add("loop")
    if getattr(model, "parameters", None) is not None:
        out.add("parameters")
    info = getattr(model, "nonlinear", None)
    if info is not None:
        out.add("vector field")
        if info.box is not None:
            out.add("equilibria box")
    return frozenset(out)


#: A need that only a model meeting another can meet: its message names the first missing.
_BEHIND = {"equilibria box": "vector field"}


def first_missing(need: str, have: frozenset[str]) -> str:
    """The need to name for ``need`` when ``have`` lacks it."""
    behind = _BEHIND.get(need)
    return behind if behind is not None and behind not in have else need


def unmet(requirements: Iterable["Needy"], have: Iterable[str]
          ) -> list[tuple["Needy", str]]:
    """``(requirement, why)`` for each requirement whose need is not in ``have``."""
    have = frozenset(have)
    out = []
    for r in requirements:
        if getattr(r, "needs", "") and r.needs not in have:
            need = first_missing(r.needs, have)
            out.append((r, NEEDS[need][0] if need in NEEDS else
                        f"needs {need}, which eigengate cannot supply"))
    return out


def why_not(req: "Needy", model: "Model") -> str:
    """Why ``model`` cannot be judged by ``req`` (called where the need is known unmet)."""
    found = unmet((req,), provided(model))
    return found[0][1] if found else f"{req.info.key} cannot be evaluated on this model"


def unmet_for(model: "Model", requirements: Iterable["Needy"] | None = None,
              together: Sequence["Model"] | None = None) -> list[tuple["Needy", str]]:
    """:func:`unmet` for ``model`` (default: its own requirements).

    Equilibrium requirements are judged on one operating point per parameter set (the
    carrier); ``together``, the models checked in the same call, must then hold it, or the
    requirement is unmet for a point picked alone.
    """
    reqs = tuple(model.requirements if requirements is None else requirements)
    out = unmet(reqs, provided(model))
    info = getattr(model, "nonlinear", None)
    if together is None or info is None or info.carrier:
        return out
    carriers = {(m.source, m.label) for m in together
                if getattr(m, "nonlinear", None) is not None and m.nonlinear.carrier}
    if (model.source, info.carrier_label) in carriers:
        return out
    left = {id(r) for r, _ in out}
    return out + [(r, f"is judged once per parameter set, on operating point "
                   f"{info.carrier_label!r}, which this check leaves out")
                  for r in reqs if r.needs in ("vector field", "equilibria box")
                  and id(r) not in left]


def not_evaluable(req: "Needy", why: str) -> "Verdict":
    """The failing verdict of a requirement that could not be evaluated."""
    return req._verdict(passed=False, uncertain=False, measured="not evaluated",
                        threshold=req.spec().split(": ", 1)[-1], margin=None, offending=(),
                        message=f"{req.info.key} cannot be evaluated: {why}; a requirement "
                        "that cannot be evaluated fails",
                        suggestion=f"give the model a {req.needs or 'way to evaluate it'}, "
                        f"or switch it off for this model ({req.info.key}: false)")


def refuse_unmet(requirements: Iterable["Needy"], have: Iterable[str],
                 err: Callable[[str, str, str | None], "ModelError"],
                 hints: Mapping[str, str] | None = None) -> None:
    """Raise ``err(field, problem, hint)`` (a loader context's) for the first requirement of
    a model file whose need the model does not meet; ``hints`` replaces the hint of a need."""
    for req, why in unmet(requirements, have):
        need = first_missing(req.needs, frozenset(have))
        hint = (hints or {}).get(need)
        if hint is None and need in NEEDS:
            hint = f"{NEEDS[need][1]}, or remove the requirement"
        raise err(f"requirements.{req.info.key}", why, hint)

