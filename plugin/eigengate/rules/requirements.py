"""Stability requirements and their verdicts.

A requirement reads the modes of a :class:`~eigengate.analysis.modes.Spectrum` and returns a
:class:`Verdict`: passed or not, the measured value against the threshold, the signed margin
(positive: passed by that much), the offending modes, and whether the outcome is *uncertain*
because a mode lies within its numerical error bound of the threshold. Uncertain verdicts fail
unless the model says ``on_uncertain: pass``; either way the verdict says so.

Discrete models are checked on the s-plane equivalent of each pole, ``s = ln(z)/T``, so one
threshold in 1/s or rad/s means the same thing for both kinds of model.
"""

from __future__ import annotations

import math
from ..errors import counted
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Callable, Iterable, Sequence

from ..analysis.equilibrium import side
from .known_modes import KnownMode, known_modes_verdict, split_known_modes
from ..analysis.modes import Mode, Spectrum
from .catalogue import RULES, Rule, Verdict, make_verdict
from .region_geometry import region_distance

if TYPE_CHECKING:
    from ..analysis.sparse_regions import Target


def _target(kind: str, value: float) -> "Target":
    """A region a sparse search must cover (its module is imported for a sparse model only)."""
    from ..analysis.sparse_regions import Target

    return Target(kind, value)


__all__ = [
    "Verdict", "Requirement", "Stability", "MinDecayRate", "MinDamping", "MaxFrequency",
    "PoleRegion", "KnownMode",
    "RULES", "Rule", "evaluate", "apply_layers", "region_distance",
]


class Requirement:
    """Base class: subclasses set ``rule`` and implement :meth:`check`."""

    rule: str = ""
    #: What the model must provide besides its matrices ("" for nothing); see
    #: :mod:`eigengate.rules.applicability`.
    needs: str = ""

    @property
    def info(self) -> Rule:
        return RULES[self.rule]

    def spec(self) -> str:  # pragma: no cover - overridden
        raise NotImplementedError

    def unfit(self, model: Any) -> str | None:
        """Why ``model`` cannot be judged by this requirement although it meets ``needs`` (a
        structure of the wrong shape, say); None when it can. The loader refuses such a
        requirement; :meth:`check` gives a failing "cannot be evaluated" verdict."""
        return None

    def check(self, modes: Sequence[Mode], spectrum: Spectrum, on_uncertain: str) -> Verdict:
        raise NotImplementedError  # pragma: no cover

    def targets(self) -> "tuple[Target, ...] | None":
        """The s-plane regions this requirement judges, which a sparse search must cover;
        None when it needs every eigenvalue (it cannot be judged on a partial spectrum:
        :mod:`eigengate.rules.partial`)."""
        return None

    def _verdict(self, **kw: Any) -> Verdict:
        info = RULES[self.rule]
        return make_verdict(rule=info.id, name=info.name, requirement=self.spec(),
                            unit=kw.pop("unit", info.unit), **kw)


def _fmt(x: float) -> str:
    return f"{x:.6g}"


def _level(distance: float, u: float, c: float) -> str:
    d = abs(distance)
    return "certified" if d > c and d > u else "estimated" if d > u else "uncertain"


def _threshold_verdict(req: Requirement, rows: list[tuple[Mode, float, float, float]],
                       threshold: float, at_least: bool, what: str, on_uncertain: str, *,
                       empty: str, suggest: Callable[[float], str]) -> Verdict:
    """Shared logic of single-threshold requirements.

    ``rows`` holds (mode, value, first-order uncertainty of value, certified uncertainty of
    value: inf without an enclosure). ``at_least``: value must be ≥ threshold, else ≤
    threshold. A failure is decided as well as its best-decided violating mode; a pass as
    well as its least-decided mode.
    """
    if not rows:
        return req._verdict(passed=True, uncertain=False, measured="n/a", threshold=threshold,
                            margin=None, offending=(), message=empty, decided_by="certified")
    sign = 1.0 if at_least else -1.0
    # one pass over the rows: margins, the failing and unsure modes (offending: both, in row
    # order), the worst row (the smallest (margin, index), the first of equals, as min()
    # finds it) and how each row is decided (_level: only the weakest level matters)
    failing, unsure, offending, unsure_u = [], [], [], []
    worst: tuple[float, int, float] | None = None  # (margin, index, value)
    certified_failure = loose = unsure_level = False
    for m, v, u, c in rows:
        g = sign * (v - threshold)
        d = abs(g)
        if g < -u:  # then d > u: the failure is certified when d > c as well
            failing.append(m)
            offending.append(m)
            if d > c:
                certified_failure = True
        elif d <= u:  # never also failing: |g| ≤ u rules out g < −u
            unsure.append(m)
            offending.append(m)
            unsure_u.append(u)
        if not d > u:  # _level: uncertain
            unsure_level = True
        elif not d > c:  # _level: estimated
            loose = True
        if worst is None or g < worst[0] or (g == worst[0] and m.index < worst[1]):
            worst = (g, m.index, v)
    assert worst is not None  # rows is not empty
    margin, worst_value = worst[0], worst[2]
    uncertain = bool(unsure)
    passed = not failing and (not unsure or on_uncertain == "pass")
    if failing:
        decided = "certified" if certified_failure else "estimated"
    else:  # _weakest of the rows' levels
        decided = "uncertain" if unsure_level else "estimated" if loose else "certified"
    rel = "≥" if at_least else "≤"
    if failing:
        verb = "modes violate" if len(failing) > 1 else "mode violates"
        message = (f"{len(failing)} {verb} {what} {rel} "
                   f"{_fmt(threshold)}: worst {_fmt(worst_value)} (margin {_fmt(margin)})")
    elif unsure:
        message = (f"{what} {_fmt(worst_value)} is within its numerical uncertainty "
                   f"(±{_fmt(max(unsure_u))}) of the "
                   f"threshold {_fmt(threshold)}; verdict {'passed' if passed else 'failed'} by "
                   f"the on_uncertain={on_uncertain} policy")
    else:
        message = f"{what} {_fmt(worst_value)} {rel} {_fmt(threshold)} (margin {_fmt(margin)})"
    return req._verdict(passed=passed, uncertain=uncertain, measured=worst_value,
                        threshold=threshold, margin=margin, offending=tuple(offending),
                        message=message,
                        suggestion=None if passed else suggest(worst_value), decided_by=decided)


def _decay_rows(modes: Iterable[Mode]) -> list[tuple[Mode, float, float, float]]:
    return [(m, m.decay_rate, m.uncertainty, m.enclosure) for m in modes]


@dataclass(frozen=True)
class Stability(Requirement):
    """Asymptotic stability (Hurwitz or Schur); ``allow_marginal`` accepts simple boundary modes."""

    allow_marginal: bool = False
    rule = "EG101"

    def spec(self) -> str:
        return "stable: marginal" if self.allow_marginal else "stable: true"

    def targets(self):
        return (_target("right", 0.0),)

    def check(self, modes, spectrum, on_uncertain):
        discrete = spectrum.model.discrete
        # one pass: each mode's side (equilibrium.side) and, off the exact boundary, how it
        # is decided (side_level), in mode order
        unstable, inexact, exact, decay, total = [], [], [], [], 0
        unsure_level = loose = False  # whether _level gave "uncertain", "estimated"
        for m in modes:
            re, u = m.s.real, m.uncertainty
            total += m.multiplicity * (2 if m.pair else 1)  # m.count
            decay.append(-re)  # m.decay_rate
            if not (re < -u or re > u) and re == 0.0:
                exact.append(m)
                continue
            if re > u and not re < -u:
                unstable.append(m)
            elif not re < -u:
                # A boundary mode computed exactly on the boundary (Re s == 0.0) is taken as
                # exact; one within its bound but off it may lie on either side, so it decides
                # nothing for sure.
                inexact.append(m)
            d = abs(re)  # _level(re, u, m.enclosure)
            if not d > u:
                unsure_level = True
            elif not d > m.enclosure:
                loose = True
        defective = [m for m in exact if m.defective]
        simple = [m for m in exact if not m.defective]
        margin = min(decay, default=math.inf)
        abscissa = -margin
        certain = unstable + defective + ([] if self.allow_marginal else simple)
        uncertain = bool(inexact)
        passed = not certain and (not inexact or on_uncertain == "pass")
        bad = certain + inexact
        where = "|z| < 1" if discrete else "Re(s) < 0"
        measured = spectrum.spectral_radius if discrete else abscissa
        parts = []
        if unstable:
            parts.append(f"{counted(sum(m.count for m in unstable), 'unstable eigenvalue')}, worst "
                         + unstable[0].describe())
        if defective:
            parts.append(f"defective eigenvalue on the stability boundary ({defective[0].describe()}):"
                         " unstable, the response grows polynomially")
        if simple:
            state = "accepted as marginally stable" if self.allow_marginal else \
                "marginally stable, not asymptotically stable"
            parts.append(f"simple eigenvalue on the stability boundary ({simple[0].describe()}): "
                         f"{state}")
        if inexact:
            could = ("slightly unstable" if self.allow_marginal else "slightly stable") \
                if not any(m.defective for m in inexact) else "on either side"
            decided = (f"verdict {'passed' if passed else 'failed'} by the "
                       f"on_uncertain={on_uncertain} policy") if not certain else \
                "the verdict fails for the reasons above"
            parts.append(f"{counted(sum(m.count for m in inexact), 'eigenvalue')} within the numerical "
                         f"uncertainty of the boundary (±{_fmt(max(m.uncertainty for m in inexact))}"
                         f" 1/s), worst {inexact[0].describe()}: could be {could}, not decided; "
                         + decided)
        if not parts:
            parts.append(f"all {total} eigenvalues "
                         f"{'found ' if getattr(spectrum, 'search', None) else ''}satisfy {where}; "
                         f"slowest decay rate {_fmt(margin)} 1/s")
        if discrete:  # margin in the plane of the measured value: 1 - spectral radius
            margin = 1.0 - measured
        if certain:  # an exact boundary mode is taken as exact: estimated, never certified
            decided = "certified" if any(side_level(m) == "certified" for m in unstable) \
                else "estimated"
        else:
            decided = "uncertain" if unsure_level else "estimated" if loose or exact else \
                "certified"  # _weakest of the levels, an exact boundary mode's "estimated"
        return self._verdict(passed=passed, uncertain=uncertain, measured=measured,
                             decided_by=decided,
                             threshold=1.0 if discrete else 0.0,
                             margin=margin if math.isfinite(margin) else None,
                             unit="" if discrete else "1/s", offending=tuple(bad),
                             message="; ".join(parts),
                             suggestion=None if passed else
                             "move the listed modes into the open left half-plane"
                             + (" (inside the unit circle)" if discrete else ""))


@dataclass(frozen=True)
class MinDecayRate(Requirement):
    """Every mode decays at least like exp(-αt)."""

    alpha: float
    rule = "EG102"

    def spec(self):
        return f"min_decay_rate: {_fmt(self.alpha)}"

    def targets(self):
        return (_target("right", -self.alpha),)

    def check(self, modes, spectrum, on_uncertain):
        return _threshold_verdict(self, _decay_rows(modes), self.alpha, True, "decay rate",
                                  on_uncertain, empty="no modes to check",
                                  suggest=lambda w: f"passes with min_decay_rate ≤ {_fmt(w)}")


@dataclass(frozen=True)
class MinDamping(Requirement):
    """Every oscillatory mode has ζ ≥ zeta."""

    zeta: float
    rule = "EG103"

    def spec(self):
        return f"min_damping: {_fmt(self.zeta)}"

    def targets(self):
        return (_target("sector", self.zeta),)

    def check(self, modes, spectrum, on_uncertain):
        # cos is 1-Lipschitz and a disc of radius ρ about s turns the angle by ≤ asin(ρ/|s|).
        rows = [(m, m.damping_ratio, m.uncertainty / m.natural_frequency,
                 math.asin(min(1.0, m.enclosure / m.natural_frequency)) * (1.0 + 1e-15)
                 if m.enclosure < m.natural_frequency else math.inf)
                for m in modes if m.oscillatory and m.natural_frequency > 0]
        return _threshold_verdict(self, rows, self.zeta, True, "damping ratio", on_uncertain,
                                  empty="no oscillatory modes",
                                  suggest=lambda w: f"passes with min_damping ≤ {_fmt(w)}")


@dataclass(frozen=True)
class MaxFrequency(Requirement):
    """Every mode has ωn ≤ omega."""

    omega: float
    rule = "EG104"

    def spec(self):
        return f"max_frequency: {_fmt(self.omega)}"

    def targets(self):
        return (_target("outside", self.omega),)

    def check(self, modes, spectrum, on_uncertain):
        rows = [(m, m.natural_frequency, m.uncertainty, m.enclosure) for m in modes
                if math.isfinite(m.natural_frequency)]
        return _threshold_verdict(self, rows, self.omega, False, "natural frequency",
                                  on_uncertain, empty="no modes to check",
                                  suggest=lambda w: f"passes with max_frequency ≥ {_fmt(w)}")


@dataclass(frozen=True)
class PoleRegion(Requirement):
    """All poles inside {Re s ≤ -α} ∩ {ζ ≥ ζmin} ∩ {|s| ≤ ωmax} (any subset of the three)."""

    alpha: float | None = None
    zeta: float | None = None
    omega: float | None = None
    rule = "EG105"

    def spec(self):
        parts = [f"{k}: {_fmt(v)}" for k, v in (("min_decay_rate", self.alpha),
                 ("min_damping", self.zeta), ("max_frequency", self.omega)) if v is not None]
        return "pole_region: {" + ", ".join(parts) + "}"

    def targets(self):
        return tuple(t for t in (None if self.alpha is None else _target("right", -self.alpha),
                                 None if self.zeta is None else _target("sector", self.zeta),
                                 None if self.omega is None else _target("outside", self.omega))
                     if t is not None)

    def check(self, modes, spectrum, on_uncertain):
        # The signed distance to the region's boundary is 1-Lipschitz in s.
        rows = [(m, region_distance(m.s, self.alpha, self.zeta, self.omega), m.uncertainty,
                 m.enclosure) for m in modes]
        return _threshold_verdict(self, rows, 0.0, True, "distance into the allowed region",
                                  on_uncertain, empty="no modes to check",
                                  suggest=lambda w: "move the listed modes into the region, or "
                                  "widen it")


def side_level(m: Mode) -> str:
    """How the side of the stability boundary a mode lies on is decided."""
    return _level(m.s.real, m.uncertainty, m.enclosure)


def evaluate(spectrum: Spectrum, requirements: Sequence[Requirement] | None = None, *,
             known_modes: Sequence[KnownMode] | None = None,
             on_uncertain: str | None = None, require: str | None = None
             ) -> tuple[Verdict, ...]:
    """Evaluate requirements (default: the model's own) on a spectrum.

    Known modes (default: the model's own) are taken out first; when any are declared, a
    known-modes verdict comes first in the result. A requirement the model cannot be judged
    by (a margin without a loop, say) gets a failing verdict that says why. With
    ``require="certified"`` (default: the model's own policy) a verdict decided only by the
    first-order estimate counts as uncertain and follows ``on_uncertain``.
    """
    model = spectrum.model
    reqs = model.requirements if requirements is None else tuple(requirements)
    known = model.known_modes if known_modes is None else tuple(known_modes)
    policy = on_uncertain or model.on_uncertain or "fail"
    if policy not in ("fail", "pass"):
        raise ValueError(f"on_uncertain must be 'fail' or 'pass', got {policy!r}")
    modes, taken = split_known_modes(spectrum, known)
    out = [known_modes_verdict(taken)] if known else []
    refused = {}
    if any(getattr(r, "needs", "") for r in reqs):  # else unmet_for finds nothing unmet
        from .applicability import unmet_for

        refused = {id(r): why for r, why in unmet_for(model, reqs)}  # fail, never pass unseen
    if refused:
        from .applicability import not_evaluable
    if getattr(spectrum, "search", None) is not None:  # a sparse search: a partial spectrum
        from .partial import partial_verdict

        out.extend(partial_verdict(r, modes, spectrum, policy) if id(r) not in refused else
                   not_evaluable(r, refused[id(r)]) for r in reqs)
    else:
        out.extend(r.check(modes, spectrum, policy) if id(r) not in refused else
                   not_evaluable(r, refused[id(r)]) for r in reqs)
    need = require or model.require or "estimated"
    if need not in ("certified", "estimated"):
        raise ValueError(f"require must be 'certified' or 'estimated', got {need!r}")
    if need == "certified":
        out = [_only_certified(v, policy) for v in out]
    return tuple(out)


def _only_certified(v: Verdict, policy: str) -> Verdict:
    """``v`` as a policy that requires certified verdicts sees it."""
    from dataclasses import replace

    if v.decided_by != "estimated":
        return v
    passed = policy == "pass"
    return replace(v, uncertain=True, decided_by="uncertain", passed=passed,
                   message=f"{v.message}; decided only by the first-order estimate, not by an "
                   f"enclosure, and require: certified makes that uncertain: verdict "
                   f"{'passed' if passed else 'failed'} by the on_uncertain={policy} policy",
                   suggestion=v.suggestion if passed == v.passed else None)


def apply_layers(layers: Iterable[tuple[Sequence[Requirement], Sequence[str]]]
                 ) -> tuple[Requirement, ...]:
    """Combine requirement layers, general first: each layer's ``(requirements, off)`` first
    switches off the rule ids in ``off``, then replaces rules of the same id."""
    by_rule: dict[str, Requirement] = {}
    for reqs, off in layers:
        for rule in off:
            by_rule.pop(rule, None)
        for r in reqs:
            by_rule[r.rule] = r
    return tuple(by_rule[k] for k in sorted(by_rule))


#: Names that moved to :mod:`eigengate.rules.origin_requirements`, still read here for code
#: that imported them from this module (the public face is ``from eigengate import ...``).
_MOVED = ("EquilibriumType", "NoSaddle", "DirectionCounts", "origin")


def __getattr__(name: str) -> Any:
    """A moved name (:data:`_MOVED`), looked up where it lives now, on first use: imported
    only then, so the two modules do not import each other when loaded."""
    if name in _MOVED:
        import importlib

        return getattr(importlib.import_module("eigengate.rules.origin_requirements"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
