"""Regression rules: how an analysed model compares with the state accepted before.

Public API (the tolerances live in :mod:`eigengate.baseline.tolerances`, re-exported here)::

    Tolerance(abs=0.0, rel=0.0, worse="lower")
    Tolerances(decay_rate=..., damping=..., frequency=..., match_gate=1.5)
    parse_tolerances(value, source, prefix="allowed_drift.", lines=None, base=None) -> Tolerances
    compare(result, entry, tolerances=None, *, severities=None) -> Comparison
    compare_all(file_results, baseline, tolerances_for=None, *, complete=False,
                severities=None) -> Outcome
    DEFAULT_SEVERITY

Modes are matched with :func:`eigengate.analysis.matching.match_modes`; each matched mode is judged
figure by figure (decay rate -Re s, damping ratio ζ, natural frequency ωn), each with its own
tolerance: a change counts when it exceeds ``max(abs, rel·|before|)``, and ``worse`` says which
way is a regression. Whole-model figures (slowest decay rate, smallest damping, equilibrium type
and direction counts) are judged too, so a regression hidden in a mode that appeared is still
caught. Rules EG201-EG209 (see :mod:`eigengate.rules.catalogue`); changes for the better are collected as
:class:`Improvement` records, which never fail.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any, Callable, Iterable, Mapping

from ..rules.findings import Finding, ModeRow
from ..rules.catalogue import RULES
from ..rules.robustness import figures_of
from .tolerances import TOLERANCE_KEYS, Tolerance, Tolerances, parse_tolerances

if TYPE_CHECKING:  # pragma: no cover
    from .store import Baseline, Entry
    from ..analysis.matching import Match

__all__ = ["Tolerance", "Tolerances", "parse_tolerances", "compare", "compare_all",
           "Comparison", "Improvement", "Outcome", "DEFAULT_SEVERITY", "TOLERANCE_KEYS"]

#: Default severity of each regression rule ("error", "warning" or "off").
DEFAULT_SEVERITY: dict[str, str] = {
    "EG201": "error", "EG202": "error", "EG203": "error", "EG204": "error",
    "EG205": "warning", "EG206": "warning", "EG207": "warning", "EG208": "warning",
    "EG209": "warning", "EG210": "error", "EG211": "error", "EG212": "error", "EG213": "error"}
#: Robustness figure (baseline name, before any ``@ε``) → (tolerance, rule, words, unit).
ROBUST_FIGURES = {
    "stability_radius": ("stability_radius", "EG211", "stability radius", ""),
    "structured_stability_radius": ("stability_radius", "EG211", "structured stability radius",
                                    ""),
    "real_stability_radius": ("stability_radius", "EG211", "real stability radius", ""),
    "transient_growth": ("transient_growth", "EG212", "transient peak max ‖e^{At}‖", ""),
    "pseudospectral_abscissa": ("pseudospectral_abscissa", "EG213",
                                "pseudospectral abscissa", "1/s"),
}
@dataclass(frozen=True)
class Improvement:
    """A change for the better; reported, never failing."""

    figure: str
    source: str
    model: str
    label: str | None
    message: str
    modes: tuple[ModeRow, ...] = ()
    before: tuple[ModeRow, ...] = ()

    @property
    def title(self) -> str:
        return self.model if self.label is None else f"{self.model}[{self.label}]"


@dataclass(frozen=True, eq=False)
class Comparison:
    """One model against its entry: findings (errors and warnings), improvements, matches."""

    source: str
    title: str
    regressions: tuple[Finding, ...]
    improvements: tuple[Improvement, ...] = ()
    matched: tuple["Match", ...] = ()

    @property
    def failed(self) -> bool:
        return any(f.severity == "error" for f in self.regressions)


@dataclass(frozen=True, eq=False)
class Outcome:
    """A run compared with a baseline; keys are ``(source, title)``."""

    findings: tuple[Finding, ...]
    improvements: tuple[Improvement, ...]
    stale_keys: tuple[tuple[str, str], ...]
    new_keys: tuple[tuple[str, str], ...]
    comparisons: tuple[Comparison, ...] = field(default=())

    @property
    def failed(self) -> bool:
        return any(f.severity == "error" for f in self.findings)


def _f(x: float) -> str:
    return "∞" if math.isinf(x) and x > 0 else "-∞" if math.isinf(x) else f"{x:.4g}"


def _ev(m: Any) -> str:
    z = complex(m.eigenvalue)
    text = f"{z.real:.6g}" if z.imag == 0 else f"{z.real:.6g}±{abs(z.imag):.6g}j"
    return text + (f" ×{m.multiplicity}" if m.multiplicity > 1 else "")


def _change(before: float, after: float, tol: Tolerance, unit: str) -> str:
    d = after - before
    pct = f", {100 * d / abs(before):+.1f} %" if before and math.isfinite(d) else ""
    unit = f" {unit}" if unit else ""
    return (f"{_f(before)} → {_f(after)}{unit} ({'+' if d > 0 else ''}{_f(d)}{pct}; allowed "
            f"±{_f(tol.allowed(before))})")


def _side(m: Any) -> int:
    re = m.s.real
    return -1 if re < -m.uncertainty else 1 if re > m.uncertainty else 0


class _Judge:
    """Builds the findings and improvements of one comparison."""

    def __init__(self, result: Any, severities: Mapping[str, str] | None) -> None:
        self.model = result.model
        self.sev = {**DEFAULT_SEVERITY, **(severities or {})}
        self.findings: list[Finding] = []
        self.better: list[Improvement] = []
        self.was = ""  # which entry a relabelled operating point was compared with
        self.moved: list[tuple[int, "Match"]] = []  # findings of a matched mode that moved
        m = self.model
        self.line = (m.line_of("feedback") or m.line_of("plant")) if m.lines else None

    def add(self, rule: str, message: str, *, after: Iterable[ModeRow] = (),
            before: Iterable[ModeRow] = (), measured: Any = None, threshold: Any = None,
            margin: float | None = None, match: "Match | None" = None) -> None:
        severity = self.sev.get(rule, "error")
        if severity == "off":
            return
        if match is not None:
            self.moved.append((len(self.findings), match))
        m, info = self.model, RULES[rule]
        self.findings.append(Finding(
            rule=rule, name=info.name, severity=severity, source=m.source, line=self.line,
            model=m.name, label=m.label, message=message + self.was, requirement="baseline",
            measured=measured, threshold=threshold, margin=margin, unit=info.unit,
            modes=tuple(after), before=tuple(before),
            suggestion="if the change is intended, accept it into the baseline"))

    def improve(self, figure: str, message: str, after: Iterable[ModeRow] = (),
                before: Iterable[ModeRow] = ()) -> None:
        m = self.model
        self.better.append(Improvement(figure, m.source, m.name, m.label, message + self.was,
                                       tuple(after), tuple(before)))

    def reported(self, rules: tuple[str, ...], mode: Any) -> bool:
        return any(f.rule in rules and any(r.index == mode.index for r in f.modes)
                   for f in self.findings)


def _rows(mt: "Match") -> dict[str, Any]:
    """A matched mode as a finding shows it, after and before (built only when reported)."""
    assert mt.before is not None and mt.after is not None and mt.before_index is not None
    return dict(after=(ModeRow.of(mt.after),), before=(mt.before.row(mt.before_index + 1),),
                match=mt)


def _named(m: Any) -> str:
    """``sway mode`` (the name's head, from the baseline's participating states) where a
    message says "mode" ahead of an eigenvalue; plain ``mode`` without states."""
    from ..analysis.naming import mode_name

    name = mode_name(m.states)
    return name.split(":", 1)[0] if name else "mode"


def _explain(j: _Judge, entry: "Entry", result: Any, inputs_for: Any) -> None:
    """Add the causes (inputs that changed, ranked) to the findings of moved modes."""
    if not j.moved:
        return
    from .attribution import attribute

    source = None if not entry.inputs else inputs_for(result)
    done: dict[int, tuple] = {}
    for pos, mt in j.moved:
        key = id(mt)
        if key not in done:
            done[key] = attribute(entry, source, mt.before, mt.after)
        cause = done[key]
        line = next((c.line for c in cause if c.line is not None), None)
        f = j.findings[pos]
        j.findings[pos] = replace(f, cause=cause, line=line or f.line)


def _figure(j: _Judge, mt: "Match", rule: str, what: str, b: float, a: float, tol: Tolerance,
            unit: str) -> None:
    verdict = tol.judge(b, a)
    if verdict not in ("worse", "better"):
        return
    rows = _rows(mt)
    text = (f"{_named(mt.before)} {_ev(mt.before)} → {_ev(mt.after)}: {what} "
            f"{_change(b, a, tol, unit)}")
    if verdict == "worse":
        margin = tol.allowed(b) - abs(a - b)
        j.add(rule, text, measured=a, threshold=b, margin=margin, **rows)
    elif verdict == "better":
        rows.pop("match")
        j.improve(what.replace(" ", "_"), text, **rows)


def _equilibrium(j: _Judge, entry: "Entry", eq: Any, after_modes: list) -> None:
    def score(t: str, unstable: int, center: int) -> tuple[int, int, int]:
        return (unstable, center, 1 if t.endswith("focus") or t == "center" else 0)

    b, a = score(entry.equilibrium, entry.unstable, entry.center), score(eq.type, eq.unstable,
                                                                           eq.center)
    text = (f"equilibrium {entry.equilibrium} ({entry.stable} stable, {entry.unstable} "
            f"unstable, {entry.center} center) → {eq.type} ({eq.stable} stable, {eq.unstable} "
            f"unstable, {eq.center} center)")
    if a > b:
        rows = [ModeRow.of(m) for m in after_modes if _side(m) >= 0]
        j.add("EG204", text, after=rows, measured=eq.type, threshold=entry.equilibrium)
    elif a < b:
        j.improve("equilibrium", text)


def _robustness(j: _Judge, entry: "Entry", result: Any, tol: Tolerances) -> None:
    """Robustness figures both the baseline and the model have (EG211-EG213)."""
    before = dict(entry.robustness)
    for key, a in sorted(figures_of(result.verdicts).items()):
        b = before.get(key)
        name, _, eps = key.partition("@")
        if b is None or name not in ROBUST_FIGURES:
            continue
        tkey, rule, words, unit = ROBUST_FIGURES[name]
        if result.model.sample_period is not None and name == "pseudospectral_abscissa":
            words, unit = "pseudospectral radius", ""
        t = getattr(tol, tkey)
        what = words + (f" (ε = {eps})" if eps else "")
        verdict = t.judge(b, a)
        if verdict == "worse":
            j.add(rule, f"{what} {_change(b, a, t, unit)}", measured=a, threshold=b,
                  margin=t.allowed(b) - abs(a - b))
        elif verdict == "better":
            j.improve(tkey, f"{what} {_change(b, a, t, unit)}")


def compare(result: Any, entry: "Entry | None", tolerances: Tolerances | None = None, *,
            severities: Mapping[str, str] | None = None, unreadable: str | None = None,
            inputs_for: Callable[[Any], Any] | None = None) -> Comparison:
    """Compare an analysed model (:class:`~eigengate.scan.engine.ModelResult`) with its entry.

    ``entry`` None gives one EG208 new-model finding, or, with ``unreadable`` (where and why
    the model file could not be loaded, "at REV (commit): reason"), one EG210 finding.
    ``severities`` overrides :data:`DEFAULT_SEVERITY` per rule (``"off"`` drops the rule).
    A finding about a matched mode that moved gets its causes
    (:func:`eigengate.baseline.attribution.attribute`) and the line of the first changed input;
    ``inputs_for(result)`` gives the model's inputs (default: ``result.model.file_inputs``),
    asked for only then.
    """
    from ..analysis.matching import match_modes

    tol = tolerances or Tolerances()
    j = _Judge(result, severities)
    m = result.model
    if entry is None and unreadable is not None:
        j.add("EG210", f"{m.title} was not compared: its model file could not be loaded "
              f"{unreadable}")
        return Comparison(m.source, m.title, tuple(j.findings))
    if entry is None and getattr(m, "grid", None) is not None:
        j.add("EG208", f"{m.title}: the grid gained the point {m.point_id}, which has no "
              "baseline entry: accept it to start comparing its modes with later changes")
        return Comparison(m.source, m.title, tuple(j.findings))
    if entry is None:
        j.add("EG208", f"{m.title} has no baseline entry: accept it to start comparing its "
              "modes with later changes")
        return Comparison(m.source, m.title, tuple(j.findings))
    if entry.title != m.title:  # the same operating point under a new label
        j.was = f" (compared with baseline entry {entry.title!r}: the same operating point, " \
            f"{entry.point})"
    after = list(result.spectrum.modes)
    matches = match_modes(entry.modes, after, gate=tol.match_gate)
    eq = result.equilibrium
    for mt in matches:
        b, a = mt.before, mt.after
        if a is None:
            assert b is not None and mt.before_index is not None  # a mode that disappeared
            j.add("EG207", f"baseline {_named(b)} {_ev(b)} (ζ={b.damping_ratio:.3g}, ωn="
                  f"{_f(b.natural_frequency)} rad/s) has no counterpart in the model"
                  + (f" ({mt.count} of its {b.multiplicity})" if mt.count < b.multiplicity
                     else ""), after=(b.row(mt.before_index + 1),))
            continue
        if b is None:
            if _side(a) > 0 and eq.unstable > entry.unstable:
                j.add("EG201", f"unstable mode {_ev(a)} (decay rate {_f(a.decay_rate)} 1/s) "
                      "appeared with no counterpart in the baseline", after=(ModeRow.of(a),),
                      measured=-a.decay_rate, threshold=0.0)
            else:
                row = ModeRow.of(a)
                j.add("EG206", f"{row.name.split(':', 1)[0] or 'mode'} {_ev(a)} (ζ="
                      f"{a.damping_ratio:.3g}, ωn={_f(a.natural_frequency)} rad/s) has no "
                      "counterpart in the baseline", after=(row,))
            continue
        sb, sa = _side(b), _side(a)
        if sb <= 0 and sa > 0:
            j.add("EG201", f"{_named(b)} {_ev(b)} → {_ev(a)} crossed into instability: "
                  "decay rate "
                  + _change(b.decay_rate, a.decay_rate, tol.decay_rate, "1/s"),
                  measured=a.decay_rate, threshold=b.decay_rate, margin=a.decay_rate,
                  **_rows(mt))
            continue
        if sb > 0 and sa < 0:
            rows = _rows(mt)
            rows.pop("match")
            j.improve("stability", f"{_named(b)} {_ev(b)} → {_ev(a)} is stable now", **rows)
        _figure(j, mt, "EG202", "decay rate", b.decay_rate, a.decay_rate, tol.decay_rate,
                "1/s")
        if b.oscillatory or a.oscillatory:
            _figure(j, mt, "EG203", "damping ratio", b.damping_ratio, a.damping_ratio,
                    tol.damping, "")
        if b.oscillatory and a.oscillatory:
            _figure(j, mt, "EG205", "natural frequency", b.natural_frequency,
                    a.natural_frequency, tol.frequency, "rad/s")
    # Whole-model figures, for regressions no matched mode explains (a mode that appeared).
    if after:
        slow = max(after, key=lambda x: (x.s.real, -x.index))
        b_rate, a_rate = -entry.spectral_abscissa, -result.spectrum.spectral_abscissa
        if tol.decay_rate.judge(b_rate, a_rate) == "worse" and \
                not j.reported(("EG201", "EG202"), slow):
            j.add("EG202", "slowest decay rate of the model "
                  + _change(b_rate, a_rate, tol.decay_rate, "1/s")
                  + f", now from mode {_ev(slow)}", after=(ModeRow.of(slow),),
                  measured=a_rate, threshold=b_rate)
        osc = [x for x in after if x.oscillatory]
        if osc:
            low = min(osc, key=lambda x: (x.damping_ratio, x.index))
            b_z, a_z = entry.min_damping, result.spectrum.min_damping
            if tol.damping.judge(b_z, a_z) == "worse" and not j.reported(("EG201", "EG203"),
                                                                         low):
                j.add("EG203", "smallest damping ratio of the model "
                      + _change(b_z, a_z, tol.damping, "") + f", now from mode {_ev(low)}",
                      after=(ModeRow.of(low),), measured=a_z, threshold=b_z)
    _equilibrium(j, entry, eq, after)
    _robustness(j, entry, result, tol)
    _explain(j, entry, result, inputs_for or (lambda r: getattr(r.model, "file_inputs", None)))
    return Comparison(m.source, m.title, tuple(j.findings), tuple(j.better), tuple(matches))


def compare_all(file_results: Iterable[Any], baseline: "Baseline",
                tolerances_for: "Tolerances | Callable[[Any], Tolerances] | None" = None, *,
                complete: bool = False, severities: Mapping[str, str] | None = None,
                inputs_for: Callable[[Any], Any] | None = None) -> Outcome:
    """Compare every model of ``file_results`` (:class:`~eigengate.scan.engine.FileResult`) with
    ``baseline``.

    ``tolerances_for`` is one :class:`Tolerances` for all, or a function of the
    :class:`~eigengate.scan.engine.ModelResult`. An entry is *stale* (EG209) when its model file
    was checked and no longer has that model, or, with ``complete`` (the whole repository was
    checked), when its file was not checked at all. Files that failed to load are skipped:
    their EG001 finding already fails the run, and their entries are not called stale.
    """
    comparisons: list[Comparison] = []
    seen: set[tuple[str, str]] = set()
    checked: set[str] = set()
    broken: set[str] = set()
    files = list(file_results)
    grids = {fr.source for fr in files if fr.error is None and getattr(fr, "grid", None)}
    # titles the current models claim: an operating point matched by its identity (its label
    # changed) never takes an entry that a current model has by its own title
    taken = {(r.model.source, r.model.title) for fr in files if fr.error is None
             for r in fr.results}
    new_list = []
    for fr in files:
        if fr.error is not None:
            broken.add(fr.source)
            continue
        checked.add(fr.source)
        for r in fr.results:
            key = (r.model.source, r.model.title)
            checked.add(key[0])
            entry = baseline.match(*key, getattr(r.model, "point_id", None), taken)
            if entry is not None:
                seen.add(entry.key)
                taken.add(entry.key)
            elif key[0] not in baseline.unreadable:
                new_list.append(key)
            tol = tolerances_for(r) if callable(tolerances_for) else tolerances_for
            comparisons.append(compare(r, entry, tol, severities=severities,
                                       unreadable=baseline.unreadable.get(key[0]),
                                       inputs_for=inputs_for))
    new = tuple(sorted(new_list))
    stale = tuple(k for k in baseline.keys() if k not in seen and k[0] not in broken
                  and (complete or k[0] in checked))
    findings = [f for c in comparisons for f in c.regressions]
    sev = {**DEFAULT_SEVERITY, **(severities or {})}.get("EG209", "warning")
    for key in stale if sev != "off" else ():
        entry = baseline.entry(*key)
        assert entry is not None  # stale keys are keys of the baseline
        line = baseline.line_of(key)
        gone = "its model file is gone" if key[0] not in checked else \
            f"the grid lost the point {entry.point or entry.label}" if key[0] in grids else \
            "its model file no longer defines it"
        findings.append(Finding(
            rule="EG209", name=RULES["EG209"].name, severity=sev,
            source=baseline.path if line is not None and baseline.path else key[0], line=line,
            model=entry.name, label=entry.label, requirement="baseline",
            message=f"baseline entry {key[1]!r} of {key[0]!r} is stale: {gone}",
            suggestion="accept again to remove stale entries"))
    return Outcome(findings=tuple(findings),
                   improvements=tuple(i for c in comparisons for i in c.improvements),
                   stale_keys=stale, new_keys=new, comparisons=tuple(comparisons))
