"""Stability requirements and their verdicts.

A requirement reads the modes of a :class:`~eigengate.modes.Spectrum` and returns a
:class:`Verdict`: passed or not, the measured value against the threshold, the signed margin
(positive: passed by that much), the offending modes, and whether the outcome is *uncertain*
because a mode lies within its numerical error bound of the threshold. Uncertain verdicts fail
unless the model says ``on_uncertain: pass``; either way the verdict says so.

Discrete models are checked on the s-plane equivalent of each pole, ``s = ln(z)/T``, so one
threshold in 1/s or rad/s means the same thing for both kinds of model.
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass, field
from typing import Any, Callable, Iterable, Mapping, Sequence

from .equilibrium import EQUILIBRIUM_TYPES, classify, side
from .errors import ModelError
from .modes import Mode, Spectrum

__all__ = [
    "Verdict", "Requirement", "Stability", "MinDecayRate", "MinDamping", "MaxFrequency",
    "PoleRegion", "EquilibriumType", "NoSaddle", "DirectionCounts", "KnownMode",
    "RULES", "evaluate", "parse_requirements", "parse_known_modes", "split_known_modes",
]


@dataclass(frozen=True, eq=False)
class Verdict:
    """Outcome of one requirement on one model (and operating point)."""

    rule: str
    name: str
    requirement: str
    passed: bool
    uncertain: bool
    measured: float | str
    threshold: float | str
    margin: float | None
    unit: str
    offending: tuple[Mode, ...]
    message: str
    suggestion: str | None = None


@dataclass(frozen=True)
class Rule:
    """Stable identity of a requirement: id, name, file key, units and what it checks."""

    id: str
    name: str
    key: str
    unit: str
    summary: str


RULES: dict[str, Rule] = {r.id: r for r in (
    Rule("EG101", "asymptotic-stability", "stable", "1/s",
         "Every mode decays: Re(s) < 0 (Hurwitz) or |z| < 1 (Schur). `stable: marginal` also "
         "accepts simple eigenvalues on the boundary; defective ones (Jordan blocks) always fail."),
    Rule("EG102", "decay-rate", "min_decay_rate", "1/s",
         "Every mode decays at least like exp(-αt): -Re(s) ≥ α (discrete: |z| ≤ exp(-αT))."),
    Rule("EG103", "damping-ratio", "min_damping", "",
         "Every oscillatory mode has damping ratio ζ = -Re(s)/|s| ≥ ζmin."),
    Rule("EG104", "natural-frequency", "max_frequency", "rad/s",
         "Every mode has natural frequency ωn = |s| ≤ ωmax (deadbeat z = 0 modes excepted)."),
    Rule("EG105", "pole-region", "pole_region", "rad/s",
         "Every pole lies in the region given by min_decay_rate, min_damping and max_frequency; "
         "the margin is the s-plane distance to the region's boundary."),
    Rule("EG106", "equilibrium-type", "equilibrium",
         "", "The origin has the expected type: " + ", ".join(EQUILIBRIUM_TYPES) + "."),
    Rule("EG107", "no-saddle", "no_saddle", "",
         "The origin is not a saddle: not both stable and unstable directions."),
    Rule("EG108", "direction-counts", "directions", "",
         "The numbers of stable, unstable and center directions are as stated."),
    Rule("EG109", "known-modes", "known_modes", "",
         "Every declared known mode (integrator, rigid-body mode, conserved quantity) is present "
         "exactly as declared; known modes are left out of every other requirement."),
)}


class Requirement:
    """Base class: subclasses set ``rule`` and implement :meth:`check`."""

    rule: str = ""

    @property
    def info(self) -> Rule:
        return RULES[self.rule]

    def spec(self) -> str:  # pragma: no cover - overridden
        raise NotImplementedError

    def check(self, modes: Sequence[Mode], spectrum: Spectrum, on_uncertain: str) -> Verdict:
        raise NotImplementedError  # pragma: no cover

    def _verdict(self, **kw: Any) -> Verdict:
        info = self.info
        return Verdict(rule=info.id, name=info.name, requirement=self.spec(),
                       unit=kw.pop("unit", info.unit), **kw)


def _fmt(x: float) -> str:
    return f"{x:.6g}"


def _threshold_verdict(req: Requirement, rows: list[tuple[Mode, float, float]], threshold: float,
                       at_least: bool, what: str, on_uncertain: str, *,
                       empty: str, suggest: Callable[[float], str]) -> Verdict:
    """Shared logic of single-threshold requirements.

    ``rows`` holds (mode, value, uncertainty of value). ``at_least``: value must be ≥ threshold,
    else ≤ threshold.
    """
    if not rows:
        return req._verdict(passed=True, uncertain=False, measured="n/a", threshold=threshold,
                            margin=None, offending=(), message=empty)
    sign = 1.0 if at_least else -1.0
    margins = [(m, sign * (v - threshold), u, v) for m, v, u in rows]
    failing = [m for m, g, u, _ in margins if g < -u]
    unsure = [m for m, g, u, _ in margins if abs(g) <= u]
    worst = min(margins, key=lambda t: (t[1], t[0].index))
    margin, worst_value = worst[1], worst[3]
    uncertain = bool(unsure)
    passed = not failing and (not unsure or on_uncertain == "pass")
    rel = "≥" if at_least else "≤"
    if failing:
        verb = "modes violate" if len(failing) > 1 else "mode violates"
        message = (f"{len(failing)} {verb} {what} {rel} "
                   f"{_fmt(threshold)}: worst {_fmt(worst_value)} (margin {_fmt(margin)})")
    elif unsure:
        message = (f"{what} {_fmt(worst_value)} is within its numerical uncertainty "
                   f"(±{_fmt(max(u for m, g, u, _ in margins if m in unsure))}) of the threshold "
                   f"{_fmt(threshold)}; verdict {'passed' if passed else 'failed'} by the "
                   f"on_uncertain={on_uncertain} policy")
    else:
        message = f"{what} {_fmt(worst_value)} {rel} {_fmt(threshold)} (margin {_fmt(margin)})"
    offending = tuple(m for m, *_ in margins if m in failing or m in unsure)
    return req._verdict(passed=passed, uncertain=uncertain, measured=worst_value,
                        threshold=threshold, margin=margin, offending=offending, message=message,
                        suggestion=None if passed else suggest(worst_value))


def _decay_rows(modes: Iterable[Mode]) -> list[tuple[Mode, float, float]]:
    return [(m, m.decay_rate, m.uncertainty) for m in modes]


@dataclass(frozen=True)
class Stability(Requirement):
    """Asymptotic stability (Hurwitz or Schur); ``allow_marginal`` accepts simple boundary modes."""

    allow_marginal: bool = False
    rule = "EG101"

    def spec(self) -> str:
        return "stable: marginal" if self.allow_marginal else "stable: true"

    def check(self, modes, spectrum, on_uncertain):
        discrete = spectrum.model.discrete
        unstable = [m for m in modes if side(m) > 0]
        boundary = [m for m in modes if side(m) == 0]
        defective = [m for m in boundary if m.defective]
        simple = [m for m in boundary if not m.defective]
        inexact = [m for m in boundary if m.s.real != 0.0]
        margin = min((m.decay_rate for m in modes), default=math.inf)
        abscissa = -margin
        bad = list(unstable) + list(defective) + ([] if self.allow_marginal else simple)
        uncertain = bool(inexact)
        failing_for_sure = bool(unstable) or (bool(boundary) and not inexact and
                                              (bool(defective) or not self.allow_marginal))
        passed = not failing_for_sure and (not bad or on_uncertain == "pass")
        where = "|z| < 1" if discrete else "Re(s) < 0"
        measured = spectrum.spectral_radius if discrete else abscissa
        parts = []
        if unstable:
            parts.append(f"{sum(m.count for m in unstable)} unstable eigenvalue(s), worst "
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
            parts.append("an eigenvalue lies within its numerical uncertainty of the boundary "
                         f"(±{_fmt(max(m.uncertainty for m in inexact))} 1/s); verdict "
                         f"{'passed' if passed else 'failed'} by the on_uncertain={on_uncertain} "
                         "policy")
        if not parts:
            parts.append(f"all {sum(m.count for m in modes)} eigenvalues satisfy {where}; "
                         f"slowest decay rate {_fmt(margin)} 1/s")
        if discrete:  # margin in the plane of the measured value: 1 - spectral radius
            margin = 1.0 - measured
        return self._verdict(passed=passed, uncertain=uncertain, measured=measured,
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

    def check(self, modes, spectrum, on_uncertain):
        rows = [(m, m.damping_ratio, m.uncertainty / m.natural_frequency)
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

    def check(self, modes, spectrum, on_uncertain):
        rows = [(m, m.natural_frequency, m.uncertainty) for m in modes
                if math.isfinite(m.natural_frequency)]
        return _threshold_verdict(self, rows, self.omega, False, "natural frequency",
                                  on_uncertain, empty="no modes to check",
                                  suggest=lambda w: f"passes with max_frequency ≥ {_fmt(w)}")


def region_distance(s: complex, alpha: float | None, zeta: float | None,
                    omega: float | None) -> float:
    """Signed s-plane distance from ``s`` to the boundary of the allowed region.

    Positive inside. Inside, it is exact (the smallest distance to any constraint's boundary);
    outside, it is the largest distance to a single violated constraint, a lower bound of the
    distance to the region.
    """
    if math.isinf(s.real):
        return math.inf
    d = []
    if alpha is not None:
        d.append(-alpha - s.real)
    if zeta is not None:
        theta0 = math.acos(max(-1.0, min(1.0, zeta)))  # half-angle of the sector about -Re
        r = abs(s)
        phi = math.atan2(abs(s.imag), -s.real) if r > 0 else 0.0
        gap = theta0 - phi
        d.append(r * math.sin(gap) if abs(gap) < math.pi / 2 else math.copysign(r, gap))
    if omega is not None:
        d.append(omega - abs(s))
    # Inside, the nearest boundary is the nearest constraint's; outside, min(d) is minus the
    # largest single violation.
    return min(d)


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

    def check(self, modes, spectrum, on_uncertain):
        rows = [(m, region_distance(m.s, self.alpha, self.zeta, self.omega), m.uncertainty)
                for m in modes]
        return _threshold_verdict(self, rows, 0.0, True, "distance into the allowed region",
                                  on_uncertain, empty="no modes to check",
                                  suggest=lambda w: "move the listed modes into the region, or "
                                  "widen it")


@dataclass(frozen=True)
class EquilibriumType(Requirement):
    """The origin has the expected type."""

    expected: str
    rule = "EG106"

    def spec(self):
        return f"equilibrium: {self.expected}"

    def check(self, modes, spectrum, on_uncertain):
        eq = classify(modes)
        ok = eq.type == self.expected
        passed = ok and (not eq.uncertain or on_uncertain == "pass")
        message = f"expected {self.expected}, found {eq.describe()}"
        return self._verdict(passed=passed, uncertain=eq.uncertain, measured=eq.type,
                             threshold=self.expected, margin=None,
                             offending=() if ok else tuple(modes), message=message,
                             suggestion=None if passed else f"equilibrium: {eq.type} matches "
                             "the current model")


@dataclass(frozen=True)
class NoSaddle(Requirement):
    """Not both stable and unstable directions."""

    rule = "EG107"

    def spec(self):
        return "no_saddle: true"

    def check(self, modes, spectrum, on_uncertain):
        eq = classify(modes)
        saddle = eq.stable > 0 and eq.unstable > 0
        passed = not saddle and (not eq.uncertain or on_uncertain == "pass")
        offending = tuple(m for m in modes if side(m) > 0) if saddle else ()
        return self._verdict(passed=passed, uncertain=eq.uncertain, measured=eq.type,
                             threshold="not saddle", margin=None, offending=offending,
                             message=("saddle: " if saddle else "no saddle: ") + eq.describe())


@dataclass(frozen=True)
class DirectionCounts(Requirement):
    """Numbers of stable, unstable and center directions (any subset)."""

    stable: int | None = None
    unstable: int | None = None
    center: int | None = None
    rule = "EG108"

    def spec(self):
        parts = [f"{k}: {v}" for k, v in (("stable", self.stable), ("unstable", self.unstable),
                                          ("center", self.center)) if v is not None]
        return "directions: {" + ", ".join(parts) + "}"

    def check(self, modes, spectrum, on_uncertain):
        eq = classify(modes)
        found = {"stable": eq.stable, "unstable": eq.unstable, "center": eq.center}
        wrong = [f"{k} {found[k]} (expected {v})" for k, v in
                 (("stable", self.stable), ("unstable", self.unstable), ("center", self.center))
                 if v is not None and found[k] != v]
        passed = not wrong and (not eq.uncertain or on_uncertain == "pass")
        message = ("direction counts differ: " + ", ".join(wrong) if wrong else
                   "direction counts as expected") + f"; {eq.describe()}"
        return self._verdict(passed=passed, uncertain=eq.uncertain,
                             measured=f"{eq.stable}/{eq.unstable}/{eq.center}",
                             threshold=self.spec(), margin=None,
                             offending=tuple(modes) if wrong else (), message=message)


@dataclass(frozen=True)
class KnownMode:
    """A mode the model is expected to have and the requirements leave out.

    Selected by ``eigenvalue`` (in the model's own plane, within ``tolerance`` or the mode's
    error bound), by participating ``states`` (their participation factors sum to at least
    one half), or, with neither, as modes on the stability boundary. ``count`` counts
    eigenvalues (a conjugate pair is two).
    """

    count: int = 1
    eigenvalue: complex | None = None
    tolerance: float = 1e-8
    states: tuple[str, ...] = ()
    reason: str = ""

    def describe(self) -> str:
        sel = (f"eigenvalue {self.eigenvalue}" if self.eigenvalue is not None else
               f"states {', '.join(self.states)}" if self.states else "on the stability boundary")
        return f"{self.count} eigenvalue(s) {sel}" + (f" ({self.reason})" if self.reason else "")

    def matches(self, mode: Mode, spectrum: Spectrum) -> bool:
        if self.eigenvalue is not None:
            native_err = mode.uncertainty
            if spectrum.model.discrete:
                native_err *= abs(mode.eigenvalue) * spectrum.model.sample_period
            ev = self.eigenvalue
            near = min(abs(mode.eigenvalue - ev), abs(mode.eigenvalue.conjugate() - ev))
            if near > max(self.tolerance * max(1.0, abs(ev)), 4.0 * native_err):
                return False
        if self.states:
            names = spectrum.model.states
            idx = [names.index(s) for s in self.states if s in names]
            if not idx or float(mode.participation[idx].sum()) < 0.5:
                return False
        if self.eigenvalue is None and not self.states:
            return side(mode) == 0
        return True


def split_known_modes(spectrum: Spectrum, known: Sequence[KnownMode]
                      ) -> tuple[list[Mode], list[tuple[KnownMode, list[Mode]]]]:
    """Remove the declared known modes; return the rest and what each declaration took."""
    remaining = list(spectrum.modes)
    taken: list[tuple[KnownMode, list[Mode]]] = []
    for k in known:
        got: list[Mode] = []
        total = 0
        for m in list(remaining):
            if total >= k.count:
                break
            if k.matches(m, spectrum):
                got.append(m)
                total += m.count
                remaining.remove(m)
        taken.append((k, got))
    return remaining, taken


def _known_verdict(taken: list[tuple[KnownMode, list[Mode]]]) -> Verdict:
    wrong = [(k, got) for k, got in taken if sum(m.count for m in got) != k.count]
    parts = []
    for k, got in wrong:
        found = sum(m.count for m in got)
        parts.append(f"declared {k.describe()}, found {found}")
    ok = not wrong
    message = ("; ".join(parts) if parts else
               "all declared known modes present: " + "; ".join(k.describe() for k, _ in taken))
    rule = RULES["EG109"]
    return Verdict(rule=rule.id, name=rule.name, requirement="known_modes",
                   passed=ok, uncertain=False, measured=str(sum(sum(m.count for m in g)
                                                                for _, g in taken)),
                   threshold=str(sum(k.count for k, _ in taken)), margin=None, unit="",
                   offending=tuple(m for _, got in wrong for m in got), message=message,
                   suggestion=None if ok else "update known_modes to what the model has, or "
                   "find why the mode moved")


def evaluate(spectrum: Spectrum, requirements: Sequence[Requirement] | None = None, *,
             known_modes: Sequence[KnownMode] | None = None,
             on_uncertain: str | None = None) -> tuple[Verdict, ...]:
    """Evaluate requirements (default: the model's own) on a spectrum.

    Known modes (default: the model's own) are taken out first; when any are declared, a
    known-modes verdict comes first in the result.
    """
    model = spectrum.model
    reqs = model.requirements if requirements is None else tuple(requirements)
    known = model.known_modes if known_modes is None else tuple(known_modes)
    policy = model.on_uncertain if on_uncertain is None else on_uncertain
    if policy not in ("fail", "pass"):
        raise ValueError(f"on_uncertain must be 'fail' or 'pass', got {policy!r}")
    modes, taken = split_known_modes(spectrum, known)
    out = [_known_verdict(taken)] if known else []
    out.extend(r.check(modes, spectrum, policy) for r in reqs)
    return tuple(out)


# ---------------------------------------------------------------- parsing from model files

def _positive(value: Any, source: str, fld: str, line: int | None, *, allow_zero: bool = False,
              upper: float | None = None) -> float:
    ok = not isinstance(value, bool) and isinstance(value, (int, float)) and math.isfinite(value)
    if ok:
        ok = value >= 0 if allow_zero else value > 0
    if ok and upper is not None:
        ok = value <= upper
    if not ok:
        want = "a non-negative number" if allow_zero else "a positive number"
        if upper is not None:
            want += f" at most {upper:g}"
        raise ModelError(source, fld, f"must be {want}, got {value!r}", line=line)
    return float(value)


def _unknown(key: str, allowed: Iterable[str], source: str, fld: str, line: int | None) -> ModelError:
    allowed = sorted(allowed)
    close = difflib.get_close_matches(key, allowed, n=1)
    hint = f"did you mean {close[0]!r}?" if close else "allowed: " + ", ".join(allowed)
    return ModelError(source, fld, f"is not a known field (got {key!r})", line=line, hint=hint)


def _mapping(value: Any, source: str, fld: str, line: int | None) -> Mapping[str, Any]:
    if not isinstance(value, Mapping):
        raise ModelError(source, fld, f"must be a mapping, got {type(value).__name__} {value!r:.60}",
                         line=line)
    return value


def _region(value, source, fld, line):
    value = _mapping(value, source, fld, line)
    keys = {"min_decay_rate": "alpha", "min_damping": "zeta", "max_frequency": "omega"}
    kw = {}
    for k, v in value.items():
        if k not in keys:
            raise _unknown(k, keys, source, f"{fld}.{k}", line)
        kw[keys[k]] = _positive(v, source, f"{fld}.{k}", line, allow_zero=k != "max_frequency",
                                upper=1.0 if k == "min_damping" else None)
    if not kw:
        raise ModelError(source, fld, "must set at least one of " + ", ".join(keys) + ", got {}",
                         line=line)
    return PoleRegion(**kw)


def _stable(value, source, fld, line):
    if value is True:
        return Stability()
    if value == "marginal":
        return Stability(allow_marginal=True)
    if value is False:
        return None
    raise ModelError(source, fld, f"must be true, false or 'marginal', got {value!r}", line=line)


def _equilibrium(value, source, fld, line):
    if value not in EQUILIBRIUM_TYPES:
        close = difflib.get_close_matches(str(value), EQUILIBRIUM_TYPES, n=1)
        raise ModelError(source, fld, f"must be one of {', '.join(EQUILIBRIUM_TYPES)}, got "
                         f"{value!r}", line=line,
                         hint=f"did you mean {close[0]!r}?" if close else None)
    return EquilibriumType(value)


def _no_saddle(value, source, fld, line):
    if not isinstance(value, bool):
        raise ModelError(source, fld, f"must be true or false, got {value!r}", line=line)
    return NoSaddle() if value else None


def _directions(value, source, fld, line):
    value = _mapping(value, source, fld, line)
    kw = {}
    for k, v in value.items():
        if k not in ("stable", "unstable", "center"):
            raise _unknown(k, ("stable", "unstable", "center"), source, f"{fld}.{k}", line)
        if isinstance(v, bool) or not isinstance(v, int) or v < 0:
            raise ModelError(source, f"{fld}.{k}", f"must be a non-negative integer, got {v!r}",
                             line=line)
        kw[k] = v
    if not kw:
        raise ModelError(source, fld, "must set at least one of stable, unstable, center, got {}",
                         line=line)
    return DirectionCounts(**kw)


_PARSERS: dict[str, Callable[..., Requirement | None]] = {
    "stable": _stable,
    "min_decay_rate": lambda v, s, f, l: MinDecayRate(_positive(v, s, f, l, allow_zero=True)),
    "min_damping": lambda v, s, f, l: MinDamping(_positive(v, s, f, l, allow_zero=True, upper=1.0)),
    "max_frequency": lambda v, s, f, l: MaxFrequency(_positive(v, s, f, l)),
    "pole_region": _region,
    "equilibrium": _equilibrium,
    "no_saddle": _no_saddle,
    "directions": _directions,
}

#: Keys accepted under ``requirements:`` in a model file.
REQUIREMENT_KEYS = tuple(_PARSERS)


def parse_requirements(raw: Any, source: str, prefix: str = "requirements.",
                       lines: Mapping[str, int] | None = None) -> tuple[Requirement, ...]:
    """Validate the ``requirements:`` mapping of a model file; return requirements by rule id."""
    lines = lines or {}
    base = prefix.rstrip(".")
    raw = _mapping(raw, source, base, lines.get(base))
    out = []
    for key, value in raw.items():
        fld = prefix + str(key)
        line = lines.get(fld, lines.get(base))
        if key not in _PARSERS:
            raise _unknown(str(key), _PARSERS, source, fld, line)
        req = _PARSERS[key](value, source, fld, line)
        if req is not None:
            out.append(req)
    return tuple(sorted(out, key=lambda r: r.rule))


def _eigenvalue(value: Any, source: str, fld: str, line: int | None) -> complex:
    if isinstance(value, bool):
        pass
    elif isinstance(value, (int, float)) and math.isfinite(value):
        return complex(value)
    elif isinstance(value, (list, tuple)) and len(value) == 2 and all(
            isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
            for v in value):
        return complex(value[0], value[1])
    raise ModelError(source, fld, f"must be a real number or [real, imaginary], got {value!r}",
                     line=line)


def parse_known_modes(raw: Any, source: str, prefix: str = "known_modes",
                      lines: Mapping[str, int] | None = None,
                      states: Sequence[str] | None = None) -> tuple[KnownMode, ...]:
    """Validate the ``known_modes:`` list of a model file.

    ``states`` (the model's state names), when given, is used to check ``states`` entries.
    """
    lines = lines or {}
    base = prefix.rstrip(".")
    if not isinstance(raw, list):
        raise ModelError(source, base, f"must be a list of mappings, got {type(raw).__name__}",
                         line=lines.get(base))
    allowed = ("count", "eigenvalue", "tolerance", "states", "reason")
    out = []
    for i, item in enumerate(raw):
        fld = f"{base}[{i}]"
        line = lines.get(f"{base}.{i}", lines.get(base))
        item = _mapping(item, source, fld, line)
        for k in item:
            if k not in allowed:
                raise _unknown(str(k), allowed, source, f"{fld}.{k}", line)
        count = item.get("count", 1)
        if isinstance(count, bool) or not isinstance(count, int) or count < 1:
            raise ModelError(source, f"{fld}.count", f"must be a positive integer, got {count!r}",
                             line=line)
        ev = item.get("eigenvalue")
        ev = None if ev is None else _eigenvalue(ev, source, f"{fld}.eigenvalue", line)
        tol = _positive(item.get("tolerance", 1e-8), source, f"{fld}.tolerance", line)
        names = item.get("states", [])
        if not isinstance(names, list) or not all(isinstance(n, str) for n in names):
            raise ModelError(source, f"{fld}.states", f"must be a list of state names, got "
                             f"{names!r}", line=line)
        if states is not None:
            for n in names:
                if n not in states:
                    close = difflib.get_close_matches(n, states, n=1)
                    raise ModelError(source, f"{fld}.states", f"names no state of the model "
                                     f"(got {n!r})", line=line,
                                     hint=f"did you mean {close[0]!r}?" if close else None)
        reason = item.get("reason", "")
        if not isinstance(reason, str):
            raise ModelError(source, f"{fld}.reason", f"must be text, got {reason!r}", line=line)
        out.append(KnownMode(count=count, eigenvalue=ev, tolerance=tol, states=tuple(names),
                             reason=reason))
    return tuple(out)
